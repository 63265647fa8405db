"""Indicators of a change read from tracked frame dicts.

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

__all__ = ["FoldSide", "fold_side", "fold_samples", "is_fold", "position_error"]


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


def fold_side(change: dict) -> FoldSide | None:
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
    pairs = (change.get("resolution") or {}).get("pairs") or []
    pairs = [p for p in pairs if p.get("tracks") and p.get("frame") is not None]
    if not pairs:
        return None
    pair = min(pairs, key=lambda p: (_num(p.get("separation_bohr")), str(p["tracks"])))
    k0, k1 = change["between"]
    v0, v1 = change["bracket"]
    if pair["frame"] == k0:
        return FoldSide(float(v0), float(v1), int(k0), -1, tuple(pair["tracks"]))
    if pair["frame"] == k1:
        return FoldSide(float(v1), float(v0), int(k1), +1, tuple(pair["tracks"]))
    return None


def is_fold(change: dict) -> bool:
    """True for a fold change, resolved or not."""
    mech = change.get("mechanism")
    return mech == "fold" or (mech == "unresolved" and change.get("mechanism_candidate") == "fold")


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
    if "grid" in str(frame.get("field", "grid")):
        h = max((frame.get("grid") or {}).get("spacing_bohr") or [math.nan])
        floor = interpolation_floor(float(h))
        if floor > 0:
            g_err += floor / float(h)
    return g_err / abs(lam) + POSITION_ROUNDING


def _soft_eigenvalue(cp) -> float | None:
    ev = cp.get("eigenvalues")
    if not ev:
        return None
    return float(min(ev, key=abs))


def fold_samples(frames, side: FoldSide, *, gtol: float = DEFAULT_GTOL) -> list:
    """Samples of the pair in consecutive frames on the present side.

    Parameters
    ----------
    frames : sequence of dict
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
        by_track = {cp.get("track"): cp for cp in frames[k].get("critical_points") or []}
        a, b = (by_track.get(t) for t in side.tracks)
        if a is None or b is None:
            break
        pa = np.asarray(a["position_bohr"], dtype=float)
        pb = np.asarray(b["position_bohr"], dtype=float)
        d2 = float(np.dot(pa - pb, pa - pb))
        la, lb = _soft_eigenvalue(a), _soft_eigenvalue(b)
        lam2 = abs(la * lb) if la is not None and lb is not None else None
        sa = position_error(a, frames[k], gtol=gtol)
        sb = position_error(b, frames[k], gtol=gtol)
        err = 2.0 * math.sqrt(d2) * math.hypot(sa, sb)
        out.append(FoldSample(float(frames[k]["value"]), d2, lam2, err))
        k += side.step
    return out
