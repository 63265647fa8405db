"""Where a change happens: the atoms involved, the fold pair, the view plane.

Shared by the molecular-graph drawings, the density maps and the fold plots.
Everything about the change itself (its events, which CPs fold together)
is read from the typed :class:`trackscan.model.Change`; this module only
adds geometry (planes, positions).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from trackscan.model import Change, Frame
from trackscan.report.scan_view import ScanView, cp_by_track

__all__ = ["Plane", "best_plane", "involved_atoms", "FoldPair", "fold_pair", "changed_tracks",
           "change_plane", "frame_plane", "atom_positions", "switch_event"]


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


def atom_positions(frame: Frame | None) -> dict:
    """``{number: (3,) position in bohr}`` of a frame's atoms."""
    return {} if frame is None else {a.number: np.asarray(a.position_bohr, float)
                                     for a in frame.atoms}


@dataclass(frozen=True)
class FoldPair:
    """The two CPs of a change's fold, in the frame where both exist.

    Attributes
    ----------
    events : (Event, Event)
        The change's two events that fold together (``fold_with``).
    cps : (CriticalPoint, CriticalPoint)
        The two CPs, lower Morse index first, in `frame`.
    frame : Frame
        The last frame before the change (an annihilation) or the first
        after it (a birth).
    side : {"before", "after"}
    """

    events: tuple
    cps: tuple
    frame: Frame
    side: str

    @property
    def tracks(self) -> tuple:
        return tuple(cp.track for cp in self.cps)

    @property
    def separation_bohr(self) -> float:
        return float(np.linalg.norm(self.cps[0].position - self.cps[1].position))

    @property
    def midpoint(self) -> np.ndarray:
        return 0.5 * (self.cps[0].position + self.cps[1].position)


_ORDER = {"nuclear": 0, "non_nuclear": 0, "bond": 1, "ring": 2, "cage": 3}


def fold_pair(scan: ScanView, change: Change) -> FoldPair | None:
    """The fold pair of a change, from its events' ``fold_with`` (None without one).

    When a change has several fold pairs, the first one listed.
    """
    before, after = scan.change_frames(change)
    for a, b in change.fold_pairs():
        side, frame = ("after", after) if a.is_birth else ("before", before)
        ca, cb = cp_by_track(frame, a.track), cp_by_track(frame, b.track)
        if ca is None or cb is None:
            continue
        cps = tuple(sorted((ca, cb), key=lambda cp: _ORDER.get(cp.kind, 9)))
        return FoldPair((a, b), cps, frame, side)
    return None


def switch_event(change: Change):
    """The ``bond_switched`` event of a conflict, or None."""
    for e in change.events:
        if e.kind == "bond_switched":
            return e
    return None


def changed_tracks(change: Change) -> set:
    """Tracks of the CPs a change's events name (and their fold partners)."""
    out = set()
    for e in change.events:
        if e.track is not None:
            out.add(e.track)
        if e.fold_with is not None:
            out.add(e.fold_with)
    return out


def involved_atoms(scan: ScanView, change: Change) -> list:
    """Atom numbers most involved in a change, sorted.

    The atoms its events name (bond ends, ring atoms).  When fewer than
    three, the nearest other atoms (in the frame before) are added until
    there are three, so a plane is defined.
    """
    before, after = scan.change_frames(change)
    nums = set()
    for e in change.events:
        for atoms in (e.atoms, e.atoms_before, e.atoms_after):
            nums.update(a for a in atoms or () if isinstance(a, int))
    pos = atom_positions(before) or atom_positions(after)
    if pos:
        nums &= set(pos)
    if pos and len(nums) < 3:
        centre = (np.mean([pos[n] for n in nums], axis=0) if nums
                  else np.mean(list(pos.values()), axis=0))
        others = sorted((float(np.linalg.norm(p - centre)), n) for n, p in pos.items()
                        if n not in nums)
        for _, n in others[: 3 - len(nums)]:
            nums.add(n)
    return sorted(nums)


def change_plane(scan: ScanView, change: Change):
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


def frame_plane(frame: Frame) -> Plane:
    """Best-fit plane of all atoms of a frame (the view of a whole structure)."""
    return best_plane([a.position_bohr for a in frame.atoms])
