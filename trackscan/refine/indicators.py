"""Indicators of a change read from tracked frame dicts.

Folds: the squared separation of the coalescing pair (one-sided).
Conflicts: the signed offset of the switching bond path from the surface
of the bond CP it runs into at the switch (two-sided; :func:`path_offset`).

For a fold, tracking (:func:`trackscan.tracking.track_scan`) names the
coalescing pair of each change in ``change["resolution"]["pairs"]`` (critical
point ids, persistent tracks, and the frame where the pair is last or first
seen).  Following the two tracks away from the bracket on that side gives the
samples :class:`~trackscan.refine.proposals.FoldSample`: squared separation
``d^2`` and squared vanishing Hessian eigenvalue ``lambda^2`` (the product of
the eigenvalues nearest zero at the two points; the fold normal form gives
them equal magnitude ``kappa d / 2``, METHODS.md section 2).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from trackscan.refine.proposals import FoldSample
from trackscan.settings import AnalysisSettings
from trackscan.tracking.resolution import interpolation_floor

#: Default gradient tolerance of the critical-point search.
DEFAULT_GTOL = AnalysisSettings().gtol

__all__ = ["FoldSide", "fold_side", "fold_samples", "is_fold", "position_error", "ConflictSpec",
           "conflict_spec", "conflict_samples", "path_offset", "is_conflict"]


@dataclass(frozen=True)
class FoldSide:
    """Where the coalescing pair of a fold change exists.

    Attributes
    ----------
    present, absent : float
        Bracket ends with and without the pair.
    present_index : int
        Index (scan order) of the frame at `present`.
    step : int
        -1 when the frames farther from the bracket on the present side have
        lower indices, +1 otherwise.
    tracks : tuple of str
        Persistent tracks of the two points.
    """

    present: float
    absent: float
    present_index: int
    step: int
    tracks: tuple


def fold_side(change) -> FoldSide | None:
    """The present side of a fold change, or None for other mechanisms.

    Parameters
    ----------
    change : dict
        One element of ``changes`` from tracking.

    Returns
    -------
    FoldSide or None
        None unless the mechanism is ``fold`` (or ``unresolved`` with the
        candidate ``fold``: a pair too close to the fold for the grid to
        resolve its density difference still has a usable separation) and
        tracking recorded the pair.  With several pairs, the closest one is
        used.
    """
    if not is_fold(change):
        return None
    pairs = change.resolution.pairs if change.resolution is not None else ()
    pairs = [p for p in pairs if p.tracks and p.frame is not None]
    if not pairs:
        return None
    pair = min(pairs, key=lambda p: (_num(p.separation_bohr), str(list(p.tracks))))
    k0, k1 = change.between
    v0, v1 = change.bracket
    if pair.frame == k0:
        return FoldSide(float(v0), float(v1), int(k0), -1, tuple(pair.tracks))
    if pair.frame == k1:
        return FoldSide(float(v1), float(v0), int(k1), +1, tuple(pair.tracks))
    return None


def is_fold(change) -> bool:
    """True for a fold change, resolved or not."""
    return change.mechanism_evidence == "fold"


def _num(x) -> float:
    return float(x) if isinstance(x, (int, float)) and math.isfinite(x) else math.inf


#: Rounding of positions in frame dicts (8 decimals), bohr.
POSITION_ROUNDING = 1e-8


def position_error(cp, frame, *, gtol: float) -> float:
    """Uncertainty of a critical point's position, bohr.

    Newton stops at ``|grad rho| < gtol``, so a point is off by about
    ``gtol / |lambda|`` along its softest direction (large near a fold, where
    that eigenvalue vanishes).  On an interpolated grid the gradient itself
    is off by about the interpolation floor of the density divided by the
    spacing (:func:`trackscan.tracking.resolution.interpolation_floor`, an
    h^3 model of the project's own measurement).
    """
    lam = _soft_eigenvalue(cp)
    if lam is None or lam == 0:
        return math.inf
    g_err = gtol
    if "grid" in str(frame.field if frame.field is not None else "grid"):
        h = frame.grid.max_spacing if frame.grid is not None else math.nan
        floor = interpolation_floor(float(h))
        if floor > 0:
            g_err += floor / float(h)
    return g_err / abs(lam) + POSITION_ROUNDING


def _soft_eigenvalue(cp) -> float | None:
    ev = cp.eigenvalues
    if not ev:
        return None
    return float(min(ev, key=abs))


def fold_samples(frames, side: FoldSide, *, gtol: float = DEFAULT_GTOL) -> list:
    """Samples of the pair in consecutive frames on the present side.

    Parameters
    ----------
    frames : sequence of trackscan.model.Frame
        Tracked frames in scan order (``track`` on every critical point).
    side : FoldSide
    gtol : float
        Gradient tolerance of the critical-point search (for
        :func:`position_error`).

    Returns
    -------
    list of FoldSample
        Nearest the bracket first; stops at the first frame where either
        track is missing.
    """
    out = []
    k = side.present_index
    while 0 <= k < len(frames):
        by_track = {cp.track: cp for cp in frames[k].critical_points}
        a, b = (by_track.get(t) for t in side.tracks)
        if a is None or b is None:
            break
        pa, pb = a.position, b.position
        d2 = float(np.dot(pa - pb, pa - pb))
        la, lb = _soft_eigenvalue(a), _soft_eigenvalue(b)
        lam2 = abs(la * lb) if la is not None and lb is not None else None
        sa = position_error(a, frames[k], gtol=gtol)
        sb = position_error(b, frames[k], gtol=gtol)
        err = 2.0 * math.sqrt(d2) * math.hypot(sa, sb)
        out.append(FoldSample(float(frames[k].value), d2, lam2, err))
        k += side.step
    return out


# -- conflicts --------------------------------------------------------------

@dataclass(frozen=True)
class ConflictSpec:
    """A conflict change whose switching path can be followed.

    Attributes
    ----------
    track : str
        Track of the bond CP whose path switches ends.
    old, new : int
        Atom numbers of the end before and after the switch.
    between : tuple of int
        Scan-order indices of the bracket frames.
    """

    track: str
    old: int
    new: int
    between: tuple


def is_conflict(change) -> bool:
    """True for a conflict change, resolved or not."""
    return change.mechanism_evidence == "conflict"


def conflict_spec(change) -> ConflictSpec | None:
    """The switching bond path of a conflict with one switch between atoms."""
    if not is_conflict(change):
        return None
    sw = [e for e in change.events if e.kind == "bond_switched"]
    if len(sw) != 1:
        return None
    before, after = list(sw[0].atoms_before or []), list(sw[0].atoms_after or [])
    old = [a for a in before if a not in after]
    new = [a for a in after if a not in before]
    if len(old) != 1 or len(new) != 1 or not all(isinstance(a, int) for a in old + new):
        return None
    return ConflictSpec(str(sw[0].track), old[0], new[0], tuple(change.between))


def _atom_position(frame, number):
    atoms = frame.atoms
    if not 1 <= number <= len(atoms):
        return None
    return np.asarray(atoms[number - 1].position_bohr, dtype=float)


def _switch_geometry(frame, spec: ConflictSpec):
    """(path toward the switching end, c, e, c's eigenvalues) in one frame, or None."""
    cps = frame.critical_points
    b = next((cp for cp in cps if cp.track == spec.track), None)
    x, y = _atom_position(frame, spec.old), _atom_position(frame, spec.new)
    if b is None or x is None or y is None:
        return None
    path = next((p for p in frame.bond_paths if p.cp == b.id), None)
    if path is None or len(path.points_bohr or ()) < 3:
        return None
    ends = [spec.old, spec.new]
    by_id = {cp.id: cp for cp in cps}
    cands = [by_id.get(p.cp) for p in frame.bond_paths
             if None not in p.ends and sorted(p.ends, key=str) == sorted(ends, key=str)]
    cands = [c for c in cands if c is not None and c.eigenvectors]
    if not cands:
        return None
    pb = b.position
    c = min(cands, key=lambda cp: float(np.linalg.norm(cp.position - pb)))
    pc = c.position
    e = np.asarray(c.eigenvectors[2], dtype=float)
    if np.dot(e, y - x) < 0:
        e = -e
    pts = np.asarray(path.points_bohr, dtype=float)
    i = int(np.argmin(np.linalg.norm(pts - pb, axis=1)))
    # walk from the bond CP towards the polyline end nearer the intervening point
    tail = pts[i:] if np.linalg.norm(pts[-1] - pc) < np.linalg.norm(pts[0] - pc) else pts[i::-1]
    return tail, pc, e, tuple(float(x) for x in c.eigenvalues)


def _closest_point(points, target):
    """Point of the polyline `points` closest to `target` (segments projected)."""
    a, b = points[:-1], points[1:]
    d = b - a
    dd = np.maximum(np.einsum("ij,ij->i", d, d), 1e-300)
    t = np.clip(np.einsum("ij,ij->i", target - a, d) / dd, 0.0, 1.0)
    p = a + t[:, None] * d
    j = int(np.argmin(np.linalg.norm(p - target, axis=1)))
    return p[j]


def path_offset(frame, spec: ConflictSpec):
    """Signed offset of the switching path from the intervening bond CP.

    Parameters
    ----------
    frame : trackscan.model.Frame
        A tracked frame with bond path polylines.
    spec : ConflictSpec

    Returns
    -------
    float or None
        ``G = sign(h) |h|^(1/p)`` with ``h = (q - c) . e``, where ``q`` is
        the point of the switching path (from its bond CP towards the
        switching end) closest to ``c``, ``c`` the bond CP linking the old
        and new partners, ``e`` its bond direction oriented from the old
        partner to the new, and ``p = |lambda_2| / (|lambda_2| + lambda_3)``
        from ``c``'s eigenvalues.  None when the frame lacks a piece.

    Notes
    -----
    At a conflict the path runs into ``c`` (a saddle connection); on either
    side it passes ``c`` on the old or the new partner's side of ``c``'s
    interatomic surface (METHODS.md section 2: the signed offset changes
    sign).  In the linearised ascent flow at ``c`` a path entering with
    offset ``y0`` along ``e`` (growth rate ``lambda_3``) and approaching
    in the surface along the softest negative direction (decay rate
    ``|lambda_2|``) passes ``c`` closest at an offset proportional to
    ``y0^p``; ``y0`` is to first order linear in the coordinate, so ``G``
    is too, and ordinary bracketing with interpolation applies.  Read at the
    closest approach, the sign agrees with the end the path reaches; read
    farther out it can be biased by the curvature of the surface.
    """
    geo = _switch_geometry(frame, spec)
    if geo is None:
        return None
    tail, pc, e, ev = geo
    if len(tail) < 2 or len(ev) != 3 or not (ev[1] < 0 < ev[2]):
        return None
    q = _closest_point(tail, pc)
    h = float(np.dot(q - pc, e))
    p = abs(ev[1]) / (abs(ev[1]) + ev[2])
    return math.copysign(abs(h) ** (1.0 / p), h)


def conflict_samples(frames, spec: ConflictSpec, *, per_side: int = 3) -> list:
    """Signed offsets ``(value, G)`` of frames next to the bracket, both sides.

    See :func:`path_offset`; up to `per_side` consecutive frames on each
    side, nearest first.
    """
    from trackscan.refine.crossing import SignedSample

    out = []
    for start, step in ((spec.between[0], -1), (spec.between[1], +1)):
        k, n = start, 0
        while 0 <= k < len(frames) and n < per_side:
            g = path_offset(frames[k], spec)
            if g is None:
                break
            out.append(SignedSample(float(frames[k].value), g))
            k += step
            n += 1
    return out
