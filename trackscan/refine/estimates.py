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
- ``uncertainty``: ``{"half_width": ..., "model_error": ...}`` -- half the
  bracket, and the extrapolation's own error estimate (difference between
  interpolation orders) when there is one;
- ``refine``: ``initial_bracket``, ``tolerance``, ``converged`` and
  ``bisection_evaluations`` (what plain bisection needs from the initial
  bracket to the tolerance), and for folds ``fold_fit``.
"""

from __future__ import annotations

import dataclasses

from trackscan.model import Uncertainty
from trackscan.refine.crossing import CROSSING, fit_crossing
from trackscan.refine.indicators import (
    DEFAULT_GTOL, conflict_samples, conflict_spec, fold_samples, fold_side,
)
from trackscan.refine.loop import change_context
from trackscan.refine.proposals import bisection_count, fit_fold

__all__ = ["annotate_changes"]


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
        The refine tolerance, recorded with each change.
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
        estimate, model_error = mid, None
        info = {"initial_bracket": [float(x) for x in ctx.base]}
        spec = conflict_spec(ch)
        side = fold_side(ch)
        if spec is not None:
            fit = fit_crossing(conflict_samples(frames, spec), lo=lo, hi=hi)
            if fit is not None:
                info["offset_fit"] = fit.to_dict()
                if lo < fit.estimate < hi:
                    estimate, method, model_error = fit.estimate, CROSSING, fit.error
        elif side is not None:
            fit = fit_fold(fold_samples(frames, side, gtol=gtol), absent=side.absent)
            if fit is not None:
                info["fold_fit"] = fit.to_dict()
                if lo < fit.estimate < hi:
                    estimate, method, model_error = fit.estimate, "fold-extrapolation", fit.error
                else:
                    info["fold_fit"]["outside_bracket"] = True
        if tolerance is not None:
            w0 = abs(ctx.base[1] - ctx.base[0])
            info["tolerance"] = float(tolerance)
            info["converged"] = bool(width <= tolerance)
            info["bisection_evaluations"] = bisection_count(w0, tolerance)
        out.append(dataclasses.replace(
            ch, evaluations=ctx.evaluations, estimate=float(estimate), estimate_method=method,
            uncertainty=Uncertainty(half_width=0.5 * width, model_error=model_error),
            refine=info))
    return tuple(out)
