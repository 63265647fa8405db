"""The refine loop: propose values, compute frames there, track again, repeat.

The loop knows model frames and changes only (:mod:`trackscan.model`);
where frames come from is the caller's `evaluate` callback (a generator with
a cube on disk and a record entry written before it returns, or an analytic
field in a test).  All the loop's state lives in the frames themselves: a
frame made by refinement carries a ``refine`` record
(:class:`trackscan.model.ProbeRecord`: round, method, model estimate,
expected side), so an interrupted refine that is restarted with the frames computed so
far makes exactly the proposals it would have made next, and repeats no
calculation.
"""

from __future__ import annotations

import dataclasses
import logging
import math
from dataclasses import dataclass, field

from trackscan.analysis.runner import check_jobs
from trackscan.errors import InputError
from trackscan.model import ProbeRecord
from trackscan.progress import report
from trackscan.refine.crossing import CROSSING, propose_crossing
from trackscan.refine.indicators import (
    DEFAULT_GTOL, conflict_samples, conflict_spec, fold_samples, fold_side, is_fold,
)
from trackscan.refine.proposals import (
    DECIMALS, FOLD, allocate_slots, propose_bisection, propose_fold,
)

__all__ = ["Probe", "RefineResult", "ChangeContext", "change_context", "plan_round",
           "refine_frames", "check_options", "REFINE_KEY", "MIN_TOLERANCE"]

logger = logging.getLogger(__name__)

REFINE_KEY = "refine"
"""Key of the refine bookkeeping in a frame dict and in a record entry."""

#: Smallest tolerance: proposals are rounded to 1e-6 (the resolution of
#: generated frame names), so brackets cannot usefully be narrower than 1e-5.
MIN_TOLERANCE = 1e-5

#: Proposal methods that come from a model (their probes carry expectations).
MODEL_METHODS = (FOLD, CROSSING)


@dataclass(frozen=True)
class Probe:
    """One value to compute, with the bookkeeping to store beside the frame.

    Attributes
    ----------
    value : float
    meta : dict
        ``round``, ``method``, ``bracket`` (the bracket it refines, scan
        order), and for fold steps ``delta`` and ``expected``.
    """

    value: float
    meta: dict


@dataclass(frozen=True)
class ChangeContext:
    """What the loop knows about one change.

    Attributes
    ----------
    change : trackscan.model.Change
    width : float
    base : tuple of float
        The bracket formed by the nearest frames not made by refinement.
    evaluations : int
        Refinement frames inside `base`.
    last : list of dict
        Refine records of the latest round inside `base`.
    rounds : list of list of dict
        All refine records inside `base`, grouped by round (oldest first).
    """

    change: object
    width: float
    base: tuple
    evaluations: int
    last: list
    rounds: list = field(default_factory=list)


@dataclass
class RefineResult:
    """Outcome of :func:`refine_frames`.

    Attributes
    ----------
    tracked : trackscan.tracking.TrackingResult
        The last tracking result.
    frames : list of trackscan.model.Frame
        Every frame, untracked, in the order evaluated.
    evaluations : int
        Frames computed by this call.
    total_evaluations : int
        Frames made by refinement, including earlier (interrupted) runs.
    rounds : int
    converged : bool
        Every change bracket is at most the tolerance.
    limited : bool
        The loop stopped because the brackets left open are below what the
        grids resolve (``message`` gives the limit).
    message : str
        Why the loop stopped.
    """

    tracked: object
    frames: list
    evaluations: int = 0
    total_evaluations: int = 0
    rounds: int = 0
    converged: bool = False
    limited: bool = False
    message: str = ""
    history: list = field(default_factory=list)


def _is_refined(frame) -> bool:
    return frame.refine is not None


def _record(frame) -> dict:
    """A frame's refine record as a dict, with its value."""
    return dict(frame.refine.to_dict(), value=float(frame.value))


def change_context(frames, change) -> ChangeContext:
    """Base bracket and refinement history of one change.

    Parameters
    ----------
    frames : sequence of trackscan.model.Frame
        Tracked frames in scan order.
    change : trackscan.model.Change
    """
    v0, v1 = (float(x) for x in change.bracket)
    lo, hi = min(v0, v1), max(v0, v1)
    base_vals = sorted(float(f.value) for f in frames if not _is_refined(f))
    below = [v for v in base_vals if v <= lo]
    above = [v for v in base_vals if v >= hi]
    b_lo = below[-1] if below else lo
    b_hi = above[0] if above else hi
    inside = [f for f in frames if _is_refined(f) and b_lo < float(f.value) < b_hi]
    groups: dict = {}
    for f in inside:
        groups.setdefault(int(f.refine.round or 0), []).append(_record(f))
    rounds = [sorted(groups[r], key=lambda rec: rec["value"]) for r in sorted(groups)]
    last = rounds[-1] if rounds else []
    base = (b_lo, b_hi) if v0 <= v1 else (b_hi, b_lo)
    return ChangeContext(change, hi - lo, base, len(inside), last, rounds)


def _stale(ctx: ChangeContext):
    """The bracket end every recent round left in place, and for how many rounds."""
    v0, v1 = (float(x) for x in ctx.change.bracket)
    lo, hi = min(v0, v1), max(v0, v1)
    side, count = None, 0
    for recs in reversed(ctx.rounds):
        if all(r["value"] <= lo for r in recs):
            s = "hi"
        elif all(r["value"] >= hi for r in recs):
            s = "lo"
        else:
            break
        if side not in (None, s):
            break
        side, count = s, count + 1
    return side, count


def _surprised(ctx: ChangeContext, side) -> bool:
    """Did the last model step find its probe on the side it did not expect?

    `side` is the change's FoldSide (expectations ``present``/``absent``), or
    None for value-based expectations (``below``/``above`` the change).
    """
    v0, v1 = (float(x) for x in ctx.change.bracket)
    lo = min(v0, v1)
    for rec in ctx.last:
        if rec.get("method") not in MODEL_METHODS or not rec.get("expected"):
            continue
        want = rec["expected"]
        if want in ("present", "absent"):
            if side is None:
                continue
            sign = 1.0 if side.absent > side.present else -1.0
            got = "present" if (rec["value"] - side.present) * sign <= 0 else "absent"
        else:
            got = "below" if rec["value"] <= lo else "above"
        if got != want:
            return True
    return False


def _previous_delta(ctx: ChangeContext):
    deltas = [r.get("delta") for r in ctx.last if r.get("method") in MODEL_METHODS]
    deltas = [d for d in deltas if isinstance(d, (int, float))]
    return max(deltas) if deltas else None


def propose_for_change(tracked_frames, ctx: ChangeContext, *, tolerance: float, n: int,
                       gtol: float = DEFAULT_GTOL):
    """Proposal for one open change.

    Fold changes: fold extrapolation; conflicts with one switch between two
    atoms: path-offset interpolation; anything else: bisection.
    """
    ch = ctx.change
    v0, v1 = (float(x) for x in ch.bracket)
    lo, hi = min(v0, v1), max(v0, v1)
    common = dict(tol=tolerance, n=n, evaluations=ctx.evaluations,
                  initial_width=abs(ctx.base[1] - ctx.base[0]),
                  previous_delta=_previous_delta(ctx))
    spec = conflict_spec(ch)
    if spec is not None:
        stale, rounds = _stale(ctx)
        return propose_crossing(lo, hi, conflict_samples(tracked_frames, spec), stale=stale,
                                stale_rounds=rounds, **common)
    side = fold_side(ch)
    if side is None:
        why = ("tracking recorded no fold pair" if is_fold(ch) else
               f"no indicator for a {ch.mechanism} change")
        return propose_bisection(lo, hi, n, reason=why)
    samples = fold_samples(tracked_frames, side, gtol=gtol)
    return propose_fold(side.present, side.absent, samples,
                        surprised=_surprised(ctx, side), **common)


def plan_round(tracked, *, tolerance: float, jobs: int = 1, round_number: int = 1,
               budget: int | None = None, gtol: float = DEFAULT_GTOL, skip=()) -> list:
    """The probes of one round of refinement.

    Parameters
    ----------
    tracked : trackscan.tracking.TrackingResult
        Result of :func:`trackscan.tracking.track_scan`.
    tolerance : float
        Target bracket width (coordinate units).
    jobs : int
        Values per round, shared among the open brackets
        (:func:`~trackscan.refine.proposals.allocate_slots`).
    round_number : int
    budget : int, optional
        At most this many probes.
    gtol : float
        Gradient tolerance of the critical-point search (position errors of
        the fold samples).
    skip : collection of tuple
        Brackets of changes not to refine (limited by grid resolution).

    Returns
    -------
    list of Probe
        Sorted by value; empty when every bracket is at most `tolerance`.
    """
    frames = tracked.frames
    existing = {round(float(f.value), DECIMALS) for f in frames}
    contexts = [change_context(frames, ch) for ch in tracked.changes]
    open_ = [c for c in contexts if c.width > tolerance and tuple(c.change.bracket) not in skip]
    if not open_:
        return []
    slots = allocate_slots([c.width / tolerance for c in open_], jobs)
    probes = []
    for ctx, n in zip(open_, slots):
        if n == 0:
            continue
        prop = propose_for_change(frames, ctx, tolerance=tolerance, n=n, gtol=gtol)
        logger.info("bracket %s: %s %s (%s)", list(ctx.change.bracket), prop.method,
                    list(prop.values), prop.reason)
        expected = prop.expected or (None,) * len(prop.values)
        for v, e in zip(prop.values, expected):
            if v in existing:
                continue
            existing.add(v)
            meta = {"round": int(round_number), "method": prop.method,
                    "bracket": [float(x) for x in ctx.change.bracket],
                    "tolerance": float(tolerance)}
            if prop.method in MODEL_METHODS:
                if prop.delta is not None:
                    meta["delta"] = float(prop.delta)
                if e is not None:
                    meta["expected"] = e
                fit = prop.fit if prop.fit is not None else prop.crossing
                meta["model_estimate"] = float(fit.estimate)
            probes.append(Probe(float(v), meta))
    probes.sort(key=lambda p: p.value)
    if budget is not None:
        probes = probes[:max(budget, 0)]
    return probes


def _resolution_limits(tracked, *, tolerance: float, gtol: float) -> dict:
    """Bracket -> grid-resolution limit of the open changes new frames cannot narrow."""
    from trackscan.refine.estimates import annotate_changes, resolution_limit

    out = {}
    for ch in annotate_changes(tracked.frames, tracked.changes, gtol=gtol):
        if ch.width <= tolerance:
            continue
        lim = resolution_limit(ch)
        if lim is not None:
            out[tuple(ch.bracket)] = lim
    return out


def check_options(*, tolerance, max_evaluations=None, jobs=1) -> None:
    """Raise InputError for a tolerance, budget or job count refine cannot use."""
    if isinstance(tolerance, bool) or not isinstance(tolerance, (int, float)) \
            or not math.isfinite(tolerance) or tolerance < MIN_TOLERANCE:
        raise InputError(f"--tolerance must be a number >= {MIN_TOLERANCE:g} (proposed values "
                         f"are rounded to {DECIMALS} decimals), got {tolerance!r}")
    if max_evaluations is not None and max_evaluations < 0:
        raise InputError(f"--max-evaluations must be >= 0, got {max_evaluations}")
    check_jobs(jobs)


def refine_frames(frames, *, evaluate, tolerance: float, max_evaluations: int | None = None,
                  jobs: int = 1, track=None, gtol: float = DEFAULT_GTOL,
                  progress=None) -> RefineResult:
    """Narrow every change bracket of a scan below `tolerance`.

    Parameters
    ----------
    frames : sequence of trackscan.model.Frame
        Analysed frames with ``value`` (any order).  Frames made by an
        earlier refine carry their ``refine`` record.
    evaluate : callable
        ``evaluate(probes) -> list of Frame``, one per :class:`Probe`, each
        with ``value`` set (``refine`` is set here from the probe's meta
        when the frame lacks it).  It
        must persist each frame before returning (that makes the loop
        resumable) and may compute them in parallel.
    tolerance : float
        Target bracket width, in coordinate units (at least
        :data:`MIN_TOLERANCE`).
    max_evaluations : int, optional
        Budget of refinement frames for the scan, counting those of earlier
        runs; None: no limit besides convergence.
    jobs : int
        Values per round.
    track : callable, optional
        ``track(frames) -> TrackingResult``; default
        :func:`trackscan.tracking.track_scan`.
    gtol : float
        Gradient tolerance the frames were analysed with.
    progress : callable, optional
        Receives ProgressEvent objects (task ``"refine"``).

    Returns
    -------
    RefineResult

    Raises
    ------
    InputError
        Bad tolerance, budget or jobs.
    """
    check_options(tolerance=tolerance, max_evaluations=max_evaluations, jobs=jobs)
    if track is None:
        from trackscan.tracking import track_scan as track
    frames = list(frames)
    values = [float(f.value) for f in frames]
    descending = len(values) > 1 and all(a > b for a, b in zip(values, values[1:]))
    inner_track = track

    def track(fr):
        # keep the scan's own direction when frames are appended
        return inner_track(sorted(fr, key=lambda f: float(f.value), reverse=descending))

    done_before = sum(1 for f in frames if _is_refined(f))
    rounds_before = max((int(f.refine.round or 0) for f in frames if _is_refined(f)),
                        default=0)
    result = RefineResult(tracked=track(frames), frames=frames, total_evaluations=done_before)
    round_number = rounds_before
    while True:
        budget = None if max_evaluations is None else max_evaluations - result.total_evaluations
        widths = [c.width for c in result.tracked.changes]
        limits = _resolution_limits(result.tracked, tolerance=tolerance, gtol=gtol)
        if all(w <= tolerance for w in widths):
            result.converged = True
            result.message = ("no structural change to refine" if not widths else
                              f"every bracket is at most {tolerance:g}")
            break
        if all(w <= tolerance or tuple(c.bracket) in limits
               for w, c in zip(widths, result.tracked.changes)):
            worst = max(limits.values())
            result.limited = True
            result.message = (f"limited by grid resolution: ±{worst:.2g} (brackets the grids "
                              f"resolve at best; --tolerance {tolerance:g} is met as far as "
                              "they allow)")
            break
        if budget is not None and budget <= 0:
            result.message = f"evaluation budget of {max_evaluations} spent"
            break
        round_number += 1
        probes = plan_round(result.tracked, tolerance=tolerance, jobs=jobs,
                            round_number=round_number, budget=budget, gtol=gtol,
                            skip=set(limits))
        if not probes:
            result.message = "no new value can be proposed (brackets at the value resolution)"
            break
        report(progress, "refine", result.total_evaluations, max_evaluations or 0,
               "values " + ", ".join(f"{p.value:g}" for p in probes))
        new = list(evaluate(probes))
        if len(new) != len(probes):
            raise ValueError(f"evaluate returned {len(new)} frames for {len(probes)} probes")
        for i, (p, f) in enumerate(zip(probes, new)):
            if f.refine is None:
                new[i] = f = dataclasses.replace(f, refine=ProbeRecord.from_dict(p.meta))
            if f.complete is False:
                logger.warning("the new frame at %g fails Poincare-Hopf: its critical points "
                               "may be incomplete, and the bracket decided from it with them",
                               p.value)
        result.frames.extend(new)
        result.evaluations += len(new)
        result.total_evaluations += len(new)
        result.rounds += 1
        result.history.append([{"value": p.value, **p.meta} for p in probes])
        result.tracked = track(result.frames)
    report(progress, "refine", result.total_evaluations, result.total_evaluations,
           result.message)
    logger.info("refine: %s after %d new frames in %d rounds", result.message,
                result.evaluations, result.rounds)
    return result
