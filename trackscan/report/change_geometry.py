"""Where a change happens: the atoms involved, the coalescing CP pair, the view plane.

Shared by the molecular-graph drawings, the density maps and the fold plots.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from trackscan.report.scan_data import ScanData, cp_by_id

__all__ = ["Plane", "best_plane", "involved_atoms", "vanishing_tracks", "coalescing_pair",
           "change_plane", "atom_positions"]

_FOLD_PARTNERS = {("bond", "ring"), ("ring", "cage")}


@dataclass(frozen=True)
class Plane:
    """A view plane: ``point = origin + u*e1 + v*e2`` (bohr); ``normal`` completes the frame."""

    origin: np.ndarray
    e1: np.ndarray
    e2: np.ndarray
    normal: np.ndarray

    def project(self, points) -> np.ndarray:
        """In-plane coordinates ``(N, 2)`` (bohr) of points ``(N, 3)`` (bohr)."""
        p = np.asarray(points, dtype=float).reshape(-1, 3) - self.origin
        return np.stack([p @ self.e1, p @ self.e2], axis=1)

    def height(self, points) -> np.ndarray:
        """Signed distance ``(N,)`` (bohr) of points from the plane."""
        p = np.asarray(points, dtype=float).reshape(-1, 3) - self.origin
        return p @ self.normal

    def lift(self, uv) -> np.ndarray:
        """3-D points ``(N, 3)`` of in-plane coordinates ``(N, 2)``."""
        uv = np.asarray(uv, dtype=float).reshape(-1, 2)
        return self.origin + uv[:, :1] * self.e1 + uv[:, 1:] * self.e2


def best_plane(points, *, context=None) -> Plane:
    """Least-squares plane of points (SVD of the centred coordinates).

    Parameters
    ----------
    points : (N, 3) array_like, bohr
        The points the plane should contain (N >= 1).
    context : (M, 3) array_like, optional
        Further points used to choose the in-plane directions that the
        `points` leave open (fewer than three points, or collinear ones).

    Returns
    -------
    Plane
        Centred on the mean of `points`; ``e1`` along their largest spread.

    Notes
    -----
    The normal is the right singular vector of the smallest singular value
    (total least squares).  Signs are fixed so that the largest component of
    ``e1`` and of ``normal`` is positive, which makes the view deterministic.
    """
    pts = np.asarray(points, dtype=float).reshape(-1, 3)
    ctx = np.asarray(context if context is not None else np.empty((0, 3)), float).reshape(-1, 3)
    centre = pts.mean(axis=0)
    dirs = []
    if len(pts) >= 2:
        _, s, vt = np.linalg.svd(pts - centre)
        scale = max(s[0], 1e-12)
        dirs = [vt[i] for i in range(len(s)) if s[i] > 1e-6 * scale and s[i] > 1e-9]
        dirs = dirs[:2]
    for extra in _fill_directions(ctx - centre, dirs):
        dirs.append(extra)
    e1 = _canon(dirs[0])
    e2 = dirs[1] - (dirs[1] @ e1) * e1
    e2 /= np.linalg.norm(e2)
    normal = _canon(np.cross(e1, e2))
    e2 = np.cross(normal, e1)
    return Plane(centre, e1, e2, normal)


def _fill_directions(ctx, dirs):
    """Directions to add to `dirs` (orthonormal candidates) until there are two."""
    out = []
    basis = [np.asarray(d, float) / np.linalg.norm(d) for d in dirs]
    candidates = list(ctx) + list(np.eye(3))
    for c in candidates:
        if len(basis) >= 2:
            break
        v = np.asarray(c, float).copy()
        for b in basis:
            v -= (v @ b) * b
        n = np.linalg.norm(v)
        if n > 1e-6 * max(1.0, np.linalg.norm(c)):
            v /= n
            basis.append(v)
            out.append(v)
    return out


def _canon(v):
    v = np.asarray(v, float)
    v = v / np.linalg.norm(v)
    return -v if v[np.argmax(np.abs(v))] < 0 else v


def atom_positions(frame) -> dict:
    """``{number: (3,) position in bohr}`` of a frame's atoms."""
    return {a["number"]: np.asarray(a["position_bohr"], float)
            for a in (frame or {}).get("atoms") or [] if a.get("position_bohr") is not None}


def vanishing_tracks(scan: ScanData, change) -> tuple:
    """Critical points present on only one side of a change.

    Returns
    -------
    lost : list of dict
        CPs (from the frame before) whose track is absent after the change.
    born : list of dict
        CPs (from the frame after) whose track is absent before.
    Nuclear attractors are left out.  CPs without a ``track`` id are
    compared by id.
    """
    before, after = scan.change_frames(change)

    def keyed(frame):
        out = {}
        for cp in (frame or {}).get("critical_points") or []:
            if cp.get("kind") == "nuclear":
                continue
            key = cp.get("track", cp.get("id"))
            if key is not None:
                out[key] = cp
        return out

    kb, ka = keyed(before), keyed(after)
    lost = [kb[k] for k in sorted(kb, key=str) if k not in ka]
    born = [ka[k] for k in sorted(ka, key=str) if k not in kb]
    return lost, born


def coalescing_pair(scan: ScanData, change):
    """The pair of CPs that annihilate (or are born) in a fold change.

    Returns
    -------
    tuple or None
        ``(cp_a, cp_b, side)`` with ``side`` ``"before"`` (the pair exists
        before the change and annihilates) or ``"after"`` (it is born); None
        when the change has no such pair (e.g. a conflict).  Among several
        candidate pairs the closest one is taken.
    """
    lost, born = vanishing_tracks(scan, change)
    best = None
    for side, cps in (("before", lost), ("after", born)):
        for a in cps:
            for b in cps:
                if (a.get("kind"), b.get("kind")) not in _FOLD_PARTNERS:
                    continue
                pa, pb = a.get("position_bohr"), b.get("position_bohr")
                if pa is None or pb is None:
                    continue
                d = float(np.linalg.norm(np.subtract(pa, pb)))
                if best is None or d < best[0]:
                    best = (d, a, b, side)
    return None if best is None else best[1:]


def involved_atoms(scan: ScanData, change) -> list:
    """Atom numbers most involved in a change, sorted.

    The atoms named by its events, the ring atoms of ring CPs it names, and
    the atoms of the CPs that appear or vanish.  When fewer than three are
    found, the nearest other atoms (in the frame before) are added until
    there are three, so a plane is defined.
    """
    before, after = scan.change_frames(change)
    nums = set()
    for e in change.get("events") or []:
        for key in ("atoms", "atoms_before", "atoms_after"):
            nums.update(a for a in e.get(key) or [] if a is not None)
        if e.get("cp") is not None:
            for frame in (before, after):
                cp = cp_by_id(frame, e["cp"])
                if cp is not None and cp.get("kind") != "cage":
                    nums.update(a for a in cp.get("atoms") or [] if isinstance(a, int))
    lost, born = vanishing_tracks(scan, change)
    for cp in lost + born:
        if cp.get("kind") in ("bond", "ring"):
            nums.update(a for a in cp.get("atoms") or [] if isinstance(a, int))
    pos = atom_positions(before) or atom_positions(after)
    nums &= set(pos) if pos else nums
    if pos and len(nums) < 3:
        centre = (np.mean([pos[n] for n in nums], axis=0) if nums
                  else np.mean(list(pos.values()), axis=0))
        others = sorted((float(np.linalg.norm(p - centre)), n) for n, p in pos.items()
                        if n not in nums)
        for _, n in others[: 3 - len(nums)]:
            nums.add(n)
    return sorted(nums)


def change_plane(scan: ScanData, change):
    """Best-fit plane of the atoms most involved in a change, or None without atoms."""
    before, after = scan.change_frames(change)
    nums = involved_atoms(scan, change)
    pts, ctx = [], []
    for frame in (before, after):
        pos = atom_positions(frame)
        pts += [pos[n] for n in nums if n in pos]
        ctx += [p for n, p in sorted(pos.items()) if n not in nums]
    if not pts:
        return None
    return best_plane(pts, context=ctx)
