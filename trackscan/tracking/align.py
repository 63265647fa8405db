"""Rigid alignment of neighbouring frames on their nuclei (Kabsch).

A relaxed scan may rotate or drift the molecule from one frame to the next.
Before critical points are matched, each frame is rotated and shifted onto
the previous one, so that distances between critical points of neighbouring
frames measure how the density changed, not how the molecule moved.
"""

from __future__ import annotations

import numpy as np

__all__ = ["kabsch", "chain_alignments", "apply_transform"]


def kabsch(moving, target, *, weights=None):
    """Best proper rotation and shift taking `moving` onto `target`.

    Parameters
    ----------
    moving, target : (n, 3) array_like, bohr
        Corresponding points (the nuclei of two frames, same atom order).
    weights : (n,) array_like, optional
        Non-negative weights (default: all equal).

    Returns
    -------
    rotation : (3, 3) ndarray
        Proper rotation (det = +1).
    shift : (3,) ndarray, bohr
        Such that ``moving @ rotation.T + shift`` is closest to `target` in
        the weighted least-squares sense.

    Notes
    -----
    The cross-covariance matrix of the centred point sets is decomposed by
    SVD; the sign of the last singular vector is flipped when needed so that
    the result is a rotation, not a reflection [1]_ [2]_.  O(n).

    References
    ----------
    .. [1] W. Kabsch, "A solution for the best rotation to relate two sets of
       vectors", Acta Cryst. A32, 922-923 (1976). :DOI:`10.1107/S0567739476001873`
    .. [2] W. Kabsch, "A discussion of the solution for the best rotation to
       relate two sets of vectors", Acta Cryst. A34, 827-828 (1978).
       :DOI:`10.1107/S0567739478001680`

    Examples
    --------
    >>> import numpy as np
    >>> p = np.array([[0., 0, 0], [1, 0, 0], [0, 2, 0]])
    >>> c, s = np.cos(0.3), np.sin(0.3)
    >>> r = np.array([[c, -s, 0], [s, c, 0], [0, 0, 1]])
    >>> rot, shift = kabsch(p @ r.T + 5.0, p)
    >>> bool(np.allclose((p @ r.T + 5.0) @ rot.T + shift, p))
    True
    """
    p = np.asarray(moving, dtype=np.float64)
    q = np.asarray(target, dtype=np.float64)
    if p.shape != q.shape or p.ndim != 2 or p.shape[1] != 3:
        raise ValueError(f"moving and target must both be (n, 3); got {p.shape} and {q.shape}")
    n = len(p)
    w = np.ones(n) if weights is None else np.asarray(weights, dtype=np.float64)
    if w.shape != (n,) or np.any(w < 0) or w.sum() <= 0:
        raise ValueError("weights must be (n,) non-negative and not all zero")
    w = w / w.sum()
    cp = w @ p
    cq = w @ q
    if n < 2:
        return np.eye(3), cq - cp
    h = (p - cp).T @ ((q - cq) * w[:, None])
    u, _, vt = np.linalg.svd(h)
    d = np.sign(np.linalg.det(vt.T @ u.T))
    if d == 0:
        d = 1.0
    rot = vt.T @ np.diag([1.0, 1.0, d]) @ u.T
    return rot, cq - cp @ rot.T


def apply_transform(points, transform) -> np.ndarray:
    """Apply ``(rotation, shift)`` to (..., 3) points."""
    rot, shift = transform
    return np.asarray(points, dtype=np.float64) @ rot.T + shift


def chain_alignments(positions) -> list:
    """Transforms that put every frame into the first frame's coordinates.

    Frame ``k`` is aligned on the already aligned frame ``k - 1`` (not on
    frame 0), so a scan whose geometry drifts far from its start still has
    small steps between neighbours.

    Parameters
    ----------
    positions : sequence of (n, 3) arrays, bohr
        Nuclear positions of the frames, in scan order.

    Returns
    -------
    list of (rotation, shift)
        One per frame; the first is the identity.
    """
    out = [(np.eye(3), np.zeros(3))]
    prev = np.asarray(positions[0], dtype=np.float64)
    for pos in positions[1:]:
        t = kabsch(pos, prev)
        out.append(t)
        prev = apply_transform(pos, t)
    return out
