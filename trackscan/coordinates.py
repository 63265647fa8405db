"""Internal coordinates measured on a geometry: distance, angle, dihedral.

Atoms are given 1-based, as chemists count; positions are in bohr.  Distances
are returned in bohr, angles and dihedrals in degrees.
"""

from __future__ import annotations

import math

import numpy as np

from trackscan.units import (ANGSTROM_IN_BOHR, UNITS_OF_KIND, angle_factor, canonical_unit,
                             length_factor)

__all__ = ["kabsch", "apply_transform", "COORDINATE_KINDS", "distance", "angle", "dihedral",
           "measure", "in_unit", "default_tolerance", "difference", "DEFAULT_TOLERANCES"]

#: Kind of internal coordinate -> number of atoms that define it.
COORDINATE_KINDS = {"distance": 2, "angle": 3, "dihedral": 4}


def distance(positions, i: int, j: int) -> float:
    """Distance between 1-based atoms `i` and `j` (bohr)."""
    p = np.asarray(positions, dtype=float)
    return float(np.linalg.norm(p[i - 1] - p[j - 1]))


def angle(positions, i: int, j: int, k: int) -> float:
    """Angle i–j–k at atom `j` (degrees)."""
    p = np.asarray(positions, dtype=float)
    a = p[i - 1] - p[j - 1]
    b = p[k - 1] - p[j - 1]
    c = np.dot(a, b) / (np.linalg.norm(a) * np.linalg.norm(b))
    return float(np.degrees(np.arccos(np.clip(c, -1.0, 1.0))))


def dihedral(positions, i: int, j: int, k: int, l: int) -> float:
    """Dihedral angle i–j–k–l (degrees, in (−180, 180]).

    Notes
    -----
    IUPAC sign convention: positive when, looking along j→k, the bond j–i
    must be turned clockwise to eclipse k–l.
    """
    p = np.asarray(positions, dtype=float)
    b0 = p[i - 1] - p[j - 1]
    b1 = p[k - 1] - p[j - 1]
    b2 = p[l - 1] - p[k - 1]
    b1n = b1 / np.linalg.norm(b1)
    v = b0 - np.dot(b0, b1n) * b1n
    w = b2 - np.dot(b2, b1n) * b1n
    x = np.dot(v, w)
    y = np.dot(np.cross(b1n, v), w)
    return float(np.degrees(np.arctan2(y, x)))


_FUNCS = {"distance": distance, "angle": angle, "dihedral": dihedral}


def measure(kind: str, atoms, positions) -> float:
    """Measure an internal coordinate.

    Parameters
    ----------
    kind : {'distance', 'angle', 'dihedral'}
    atoms : sequence of int
        1-based atom numbers (2, 3 or 4 of them).
    positions : (n, 3) array_like, bohr

    Returns
    -------
    float
        bohr for a distance, degrees for an angle or dihedral.
    """
    if kind not in _FUNCS:
        raise ValueError(f"unknown coordinate kind {kind!r}")
    if len(atoms) != COORDINATE_KINDS[kind]:
        raise ValueError(f"{kind} takes {COORDINATE_KINDS[kind]} atoms, got {len(atoms)}")
    return _FUNCS[kind](positions, *atoms)


DEFAULT_TOLERANCES = {"angstrom": 1e-3, "bohr": 1e-3 * ANGSTROM_IN_BOHR, "degree": 0.1,
                      "radian": math.radians(0.1)}
"""Default largest difference between a listed coordinate value and the value
measured on the frame's geometry, per unit: 1e-3 Å for distances (the same
length in bohr), 0.1 degree for angles and dihedrals (the same in radian)."""


def _canonical_unit(kind: str, unit: str):
    name = canonical_unit(unit)
    return name if name in UNITS_OF_KIND.get(kind, ()) else None


def in_unit(kind: str, value: float, unit: str):
    """A measured value (bohr, or degrees) converted to `unit`; None if `unit` is unknown.

    Parameters
    ----------
    kind : {'distance', 'angle', 'dihedral'}
    value : float
        As :func:`measure` returns it: bohr for a distance, degrees otherwise.
    unit : str
        ``angstrom`` / ``bohr`` for distances, ``degree`` / ``radian`` for
        angles (the spellings of :data:`trackscan.units.UNIT_ALIASES`).
    """
    if _canonical_unit(kind, unit) is None:
        return None
    if kind == "distance":
        return value / length_factor(unit)
    return value / angle_factor(unit)


def default_tolerance(kind: str, unit: str):
    """The default tolerance (in `unit`) of listed against measured values, or None."""
    name = _canonical_unit(kind, unit)
    return None if name is None else DEFAULT_TOLERANCES[name]


def difference(kind: str, listed: float, measured: float, unit: str) -> float:
    """|listed - measured|, for a dihedral modulo a full turn (180 and -180 agree)."""
    d = abs(float(listed) - float(measured))
    if kind == "dihedral":
        turn = 2 * math.pi if _canonical_unit(kind, unit) == "radian" else 360.0
        d = d % turn
        d = min(d, turn - d)
    return d


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
    if weights is None:
        cp, cq = p.mean(axis=0), q.mean(axis=0)
        if n < 2:
            return np.eye(3), cq - cp
        h = (p - cp).T @ (q - cq)
    else:
        w = np.asarray(weights, dtype=np.float64)
        if w.shape != (n,) or np.any(w < 0) or w.sum() <= 0:
            raise ValueError("weights must be (n,) non-negative and not all zero")
        w = w / w.sum()
        cp, cq = w @ p, w @ q
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
