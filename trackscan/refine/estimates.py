"""Final estimate, method, evaluation count and uncertainty of each change.

Per change (scan.json contract, DESIGN.md section 3, plus extensions):

- ``estimate`` and ``estimate_method``: the fold extrapolation from the
  pair's squared separation when it lies inside the bracket
  (``"fold-extrapolation"``), for a conflict the zero of the interpolated
  path offset (``"path-offset-interpolation"``), else the bracket midpoint
  (``"bisection-midpoint"`` after refinement, ``"bracket-midpoint"`` when no
  frame was added);
- ``evaluations``: frames added by refinement inside the change's initial
  bracket (the bracket between frames not made by refinement);
- ``uncertainty``: the one ± to quote (:func:`quoted_uncertainty`): ``value``
  and ``source``, with ``half_width``, the calibrated ``model_error`` and the
  ``resolution`` term beside it;
- ``fit``: the model fit behind the estimate (fold extrapolation of d^2,
  or the conflict's path-offset interpolation);
- ``refine`` (only for changes that refinement touched): ``initial_bracket``,
  ``tolerance``, ``converged`` and ``bisection_evaluations`` (what plain
  bisection needs from the initial bracket to the tolerance), and
  ``resolution_limit`` when the grids cannot narrow the bracket further.
"""

from __future__ import annotations

import dataclasses
import math

from trackscan.model import Uncertainty
from trackscan.tracking.resolution import separation_floor
from trackscan.refine.crossing import CROSSING, fit_crossing
from trackscan.refine.indicators import (
    DEFAULT_GTOL, conflict_samples, conflict_spec, fold_samples, fold_side,
)
from trackscan.refine.loop import change_context
from trackscan.refine.proposals import bisection_count, fit_fold

__all__ = ["annotate_changes", "quoted_uncertainty", "resolution_limit", "MODEL_SAFETY"]

#: Factor on a model's own error estimate (the change of the estimate when
#: the interpolation order drops by one).  That difference measures the
#: error of the lower-order estimate; the higher-order one is usually far
#: better, but near a fold the indicator is not exactly quadratic, so the
#: quoted error keeps a margin.  Calibrated by tests/refine/test_calibration.py
#: (coverage of the true s* on model folds and conflicts).
MODEL_SAFETY = 3.0

#: Weight of the spread between the d^2 and lambda^2 fold extrapolations in
#: the fold's model error.  lambda^2 extrapolates s* one to two orders of
#: magnitude worse than d^2 (METHODS.md section 2), so the full spread
#: overstates the error; this weight was calibrated on the same test.
CROSS_CHECK_WEIGHT = 0.25


def _fold_resolution(samples, pair_floor: float) -> float | None:
    """How far the grid's fold can lie from the true one, coordinate units.

    ``d_floor**2 / |d(d**2)/ds|`` (METHODS.md section 2: d**2 is linear in
    s near a fold), the slope from the two samples nearest the bracket.
    """
    if len(samples) < 2 or not pair_floor > 0:
        return None
    a, b = samples[0], samples[1]
    slope = abs(a.d2 - b.d2) / abs(a.value - b.value) if a.value != b.value else 0.0
    return pair_floor ** 2 / slope if slope > 0 else None


def _conflict_resolution(samples, frames, between) -> float | None:
    """Offset floor over the slope of the signed offset across the bracket."""
    by_value = {round(s.value, 12): s for s in samples}
    ends = [frames[k] for k in between]
    pair = [by_value.get(round(float(f.value), 12)) for f in ends]
    if None in pair or pair[0].value == pair[1].value:
        return None
    spacing = max((f.grid.max_spacing for f in ends if f.grid is not None), default=math.nan)
    floor = separation_floor(spacing)
    slope = abs(pair[0].g - pair[1].g) / abs(pair[0].value - pair[1].value)
    return floor / slope if floor > 0 and slope > 0 else None


def quoted_uncertainty(half_width: float, *, model_error=None, resolution=None) -> Uncertainty:
    """The one ± of a change: never more than half the bracket.

    Parameters
    ----------
    half_width : float
        Half the bracket (exact given the frames).
    model_error : float, optional
        Calibrated error of a model estimate inside the bracket.
    resolution : float, optional
        The grid's resolution term in coordinate units.

    Examples
    --------
    >>> quoted_uncertainty(0.25).source
    'bracket'
    >>> u = quoted_uncertainty(0.25, model_error=1e-3, resolution=1e-4)
    >>> (u.source, round(u.value, 6))
    ('model', 0.001005)
    """
    if model_error is None:
        return Uncertainty(half_width=half_width, model_error=None, value=half_width,
                           source="bracket", resolution=resolution)
    combined = math.hypot(model_error, resolution or 0.0)
    if combined >= half_width:
        value, source = half_width, "bracket"
    else:
        value = combined
        source = "model" if model_error >= (resolution or 0.0) else "resolution"
    return Uncertainty(half_width=half_width, model_error=model_error, value=value,
                       source=source, resolution=resolution)


def annotate_changes(frames, changes, *, tolerance: float | None = None,
                     gtol: float = DEFAULT_GTOL) -> tuple:
    """Changes with estimate, method, evaluations and uncertainty filled in.

    Parameters
    ----------
    frames : sequence of trackscan.model.Frame
        Tracked frames in scan order (frames added by refinement carry
        ``refine``).
    changes : sequence of trackscan.model.Change
        The tracking result's changes.
    tolerance : float, optional
        The refine tolerance, recorded with each change.  Without one (and
        without frames made by refinement) a change carries no ``refine``
        record.
    gtol : float
        Gradient tolerance the frames were analysed with.

    Returns
    -------
    tuple of trackscan.model.Change
        New objects (``dataclasses.replace``); `changes` are not modified.
    """
    out = []
    for ch in changes:
        ctx = change_context(frames, ch)
        v0, v1 = (float(x) for x in ch.bracket)
        lo, hi = min(v0, v1), max(v0, v1)
        width = hi - lo
        mid = 0.5 * (v0 + v1)
        method = ("bisection-midpoint" if ctx.evaluations
                  else ch.estimate_method or "bracket-midpoint")
        estimate, model_error, resolution = mid, None, None
        fit_record = None
        info = {"initial_bracket": [float(x) for x in ctx.base]}
        refined = bool(ctx.evaluations) or tolerance is not None
        spec = conflict_spec(ch)
        side = fold_side(ch)
        if spec is not None:
            samples = conflict_samples(frames, spec)
            fit = fit_crossing(samples, lo=lo, hi=hi)
            if fit is not None:
                fit_record = fit.to_dict()
                if lo < fit.estimate < hi:
                    estimate, method = fit.estimate, CROSSING
                    model_error = MODEL_SAFETY * fit.error
                    resolution = _conflict_resolution(samples, frames, ch.between)
        elif side is not None:
            samples = fold_samples(frames, side, gtol=gtol)
            fit = fit_fold(samples, absent=side.absent)
            if fit is not None:
                fit_record = fit.to_dict()
                if lo < fit.estimate < hi and fit.truncation is not None:
                    estimate, method = fit.estimate, "fold-extrapolation"
                    # the order-drop difference, and the spread to the
                    # estimate from the other indicator (lambda^2), which
                    # catches frames too far out for the order drop to see
                    model_error = MODEL_SAFETY * fit.truncation
                    if fit.estimate_lambda2 is not None:
                        model_error = max(model_error, CROSS_CHECK_WEIGHT * abs(fit.estimate - fit.estimate_lambda2))
                    floors = [p.separation_floor_bohr for p in ch.resolution.pairs
                              if tuple(p.tracks) == tuple(side.tracks)] if ch.resolution else []
                    resolution = _fold_resolution(samples, max(floors, default=0.0) or 0.0)
                else:
                    fit_record["outside_bracket"] = True
        if tolerance is not None:
            w0 = abs(ctx.base[1] - ctx.base[0])
            info["tolerance"] = float(tolerance)
            info["converged"] = bool(width <= tolerance)
            info["bisection_evaluations"] = bisection_count(w0, tolerance)
        new = dataclasses.replace(
            ch, evaluations=ctx.evaluations, estimate=float(estimate), estimate_method=method,
            uncertainty=quoted_uncertainty(0.5 * width, model_error=model_error,
                                           resolution=resolution),
            # a change that no refinement touched does not mention refinement
            refine=info if refined else None, fit=fit_record)
        if tolerance is not None and not info["converged"]:
            lim = resolution_limit(new)
            if lim is not None:
                info["resolution_limit"] = float(lim)
        out.append(new)
    return tuple(out)


def resolution_limit(change) -> float | None:
    """The ± below which new frames cannot narrow an annotated change, or None.

    A change is limited by its grids when half its bracket is within the
    resolution term (the grid's own catastrophe can lie anywhere inside it).
    Without a resolution term (no fold indicator), a change whose frames
    beside the bracket are below what the grids resolve
    (``resolution_limited``) is limited at its quoted ±.  Returns that limit
    (coordinate units), or None when more frames still help.  (The density
    difference of a fold pair falls as the cube of its separation, so the
    pair can be below the density floor while its separation, which places
    the fold, is still well resolved: the resolution term decides.)
    """
    u = change.uncertainty
    if u is None:
        return None
    if u.resolution is not None:
        return u.resolution if u.half_width <= u.resolution else None
    if change.resolution_limited:
        return u.value
    return None
