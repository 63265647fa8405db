"""Where to compute the next frames of a change bracket.

Two kinds of proposal:

* **bisection** (and its (P+1)-section for P points per round): the
  baseline, with no model of the indicators;
* **path-offset interpolation** for conflicts: the signed offset of the
  switching bond path from the intervening bond CP changes sign at the
  conflict (METHODS.md section 2), so Brent-style inverse interpolation
  with the same safeguards applies
  (:func:`trackscan.refine.crossing.propose_crossing`);
* **fold extrapolation**: on the side of the bracket where the coalescing
  pair of critical points still exists, the fold normal form
  ``V = kappa x^3 / 6 + u x`` with ``u ∝ s - s*`` gives a squared separation
  ``d^2 ∝ |s - s*|`` and a vanishing Hessian eigenvalue ``|lambda| ∝
  |s - s*|^(1/2)`` (../shared/METHODS.md section 2).  ``s`` is therefore a
  smooth function of ``d^2`` with ``s(0) = s*``: an inverse interpolation of
  ``s`` against ``d^2`` through the samples nearest the bracket, evaluated at
  ``d^2 = 0``, extrapolates ``s*``.  The step is safeguarded in the manner
  of Dekker [1]_ and Brent [2]_ (scheme (B) of METHODS.md section 7).

Beyond the fold the pair does not exist, so the indicator is one-sided: only
an existence bit is known there, and regula falsi or Illinois steps do not
apply.

All functions here are pure: they take numbers and return a
:class:`Proposal`; the refine loop (:mod:`trackscan.refine.loop`) collects the
samples from tracked frames.

References
----------
.. [1] T. J. Dekker, "Finding a zero by means of successive linear
   interpolation", in *Constructive Aspects of the Fundamental Theorem of
   Algebra*, B. Dejon and P. Henrici (eds.), Wiley (1969) [from memory].
.. [2] R. P. Brent, *Algorithms for Minimization without Derivatives*,
   Prentice-Hall (1973), chapter 4 [from memory].
.. [3] T. Poston and I. Stewart, *Catastrophe Theory and its Applications*,
   Pitman (1978) (fold normal form) [from memory].
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

from trackscan.model import VALUE_DECIMALS

__all__ = ["FoldSample", "FoldFit", "Proposal", "bisection_count", "bisection_points",
           "fit_fold", "keeps_guarantee", "allowance_left", "section_rounds", "propose_bisection", "propose_fold", "allocate_slots",
           "BISECTION", "FOLD", "DECIMALS", "ALLOWANCE"]

BISECTION = "bisection"
FOLD = "fold-extrapolation"

#: Proposed values are rounded to this many decimals (the resolution of
#: generated frame names, ``frame_p1.234567.cube``; defined in the model).
DECIMALS = VALUE_DECIMALS

#: Worst-case allowance of the model steps, in rounds beyond plain
#: (n+1)-section of the initial bracket (see :func:`keeps_guarantee`).  No
#: off-centre probe can match bisection in the worst case (its wider side
#: is more than half the bracket), so a fast scheme needs some allowance;
#: this one bounds every refinement by the bisection count plus ALLOWANCE.
ALLOWANCE = 3

#: Share of the tolerance given to each side of the final straddle (two
#: probes at ``estimate -/+ STRADDLE * tol`` bound a bracket ``2 * STRADDLE *
#: tol`` < tol, with room for the rounding to DECIMALS).
STRADDLE = 0.45


@dataclass(frozen=True)
class FoldSample:
    """The coalescing pair in one frame on the side where it exists.

    Attributes
    ----------
    value : float
        Coordinate value of the frame.
    d2 : float
        Squared distance between the two critical points, bohr^2.
    lambda2 : float or None
        Squared vanishing Hessian eigenvalue (a.u.), e.g. the product of the
        eigenvalues nearest zero at the two points.
    d2_error : float
        Uncertainty of `d2` from the positions of the two points, bohr^2.
    """

    value: float
    d2: float
    lambda2: float | None = None
    d2_error: float = 0.0


@dataclass(frozen=True)
class FoldFit:
    """Extrapolated fold location.

    Attributes
    ----------
    estimate : float
        ``s*`` from ``d^2`` (the primary indicator).
    error : float or None
        The model's own error estimate: the change of the extrapolation
        when the interpolation order drops by one, combined in quadrature
        with `noise` (None with two samples).
    order : int
        Degree of the inverse interpolation (1: secant, 2: quadratic).
    samples : int
        Samples used.
    estimate_lambda2 : float or None
        ``s*`` from ``lambda^2`` with the same order (a cross-check).
    noise : float
        Part of the error propagated from the samples' ``d2_error``.
    truncation : float or None
        Part of the error from the interpolation order alone.
    """

    estimate: float
    error: float | None
    order: int
    samples: int
    estimate_lambda2: float | None = None
    noise: float = 0.0
    truncation: float | None = None

    def to_dict(self) -> dict:
        d = {"indicator": "d2", "estimate": self.estimate, "error": self.error,
             "truncation": self.truncation, "noise": self.noise, "order": self.order,
             "samples": self.samples}
        if self.estimate_lambda2 is not None:
            d["estimate_lambda2"] = self.estimate_lambda2
        return d


@dataclass(frozen=True)
class Proposal:
    """Next coordinate values for one bracket.

    Attributes
    ----------
    values : tuple of float
        Strictly inside the bracket, rounded to :data:`DECIMALS`.
    method : {'bisection', 'fold-extrapolation'}
    reason : str
        Why this method was used (for logs and the refine record).
    fit : FoldFit or None
    expected : tuple of str
        For fold steps, the side each value is expected on (``"present"`` or
        ``"absent"``); empty for bisection.
    delta : float or None
        For model steps, the half-width of the model's uncertainty interval.
    crossing : trackscan.refine.crossing.CrossingFit or None
        For conflict steps, the interpolated zero of the path offset.
    """

    values: tuple
    method: str
    reason: str = ""
    fit: FoldFit | None = None
    expected: tuple = field(default_factory=tuple)
    delta: float | None = None
    crossing: object = None


def bisection_count(width: float, tol: float) -> int:
    """Bisection steps that take a bracket of `width` to at most `tol`.

    Examples
    --------
    >>> bisection_count(1.0, 1e-3)
    10
    """
    if width <= tol:
        return 0
    return int(math.ceil(math.log2(width / tol) - 1e-12))


def section_rounds(width: float, tol: float, n: int = 1) -> int:
    """Rounds of (n+1)-section that take a bracket of `width` to at most `tol`.

    Examples
    --------
    >>> section_rounds(1.0, 1e-3, 1), section_rounds(1.0, 1e-3, 3)
    (10, 5)
    """
    if width <= tol:
        return 0
    return int(math.ceil(math.log(width / tol) / math.log(n + 1) - 1e-12))


def keeps_guarantee(lo: float, hi: float, *, tol: float, n: int = 1,
                    evaluations: int = 0, initial_width: float | None = None) -> bool:
    """True when a model step now still leaves bisection's worst case within reach.

    With ``I = rounds spent + (n+1)-section rounds still needed from the
    current bracket``, a bisection round keeps ``I`` constant and any other
    round raises it by at most one (the bracket never grows).  Allowing a
    model round only while ``I < budget``, with ``budget`` the (n+1)-section
    count of the initial bracket plus :data:`ALLOWANCE`, keeps ``I <=
    budget`` after every round, and at the end ``I`` is the number of
    rounds used: no refinement ever needs more than bisection plus
    ALLOWANCE rounds, whatever the model predicts.

    Parameters
    ----------
    lo, hi : float
        The current bracket.
    tol : float
    n : int
        Values per round.
    evaluations : int
        New frames already spent on this change.
    initial_width : float, optional
        Width of the bracket before refinement (default: the current one).

    References
    ----------
    .. [1] R. P. Brent, *Algorithms for Minimization without Derivatives*,
       Prentice-Hall (1973), ch. 4: safeguarded steps whose worst case stays
       within a fixed multiple of bisection.
    """
    return allowance_left(lo, hi, tol=tol, n=n, evaluations=evaluations,
                          initial_width=initial_width) > 0


def allowance_left(lo: float, hi: float, *, tol: float, n: int = 1, evaluations: int = 0,
                   initial_width: float | None = None) -> int:
    """Model rounds still allowed now: ``budget - I`` of :func:`keeps_guarantee`."""
    width = abs(hi - lo)
    w0 = initial_width if initial_width else width
    spent = int(math.ceil(evaluations / max(n, 1)))
    budget = section_rounds(w0, tol, n) + ALLOWANCE
    return budget - spent - section_rounds(width, tol, n)


def _inside(values, lo, hi):
    """Rounded values strictly inside (lo, hi), unique, sorted."""
    a, b = min(lo, hi), max(lo, hi)
    out = []
    for v in values:
        r = round(float(v), DECIMALS)
        if a < r < b and r not in out:
            out.append(r)
    return tuple(sorted(out))


def bisection_points(lo: float, hi: float, n: int = 1) -> tuple:
    """The n points of the (n+1)-section of [lo, hi].

    Examples
    --------
    >>> bisection_points(0.0, 1.0, 3)
    (0.25, 0.5, 0.75)
    """
    if n < 1:
        raise ValueError(f"n must be at least 1, got {n}")
    return _inside([lo + (hi - lo) * i / (n + 1) for i in range(1, n + 1)], lo, hi)


def propose_bisection(lo: float, hi: float, n: int = 1, *, reason: str = "") -> Proposal:
    """Bisection ((n+1)-section) proposal for the bracket [lo, hi]."""
    return Proposal(bisection_points(lo, hi, n), BISECTION, reason)


def _neville_at_zero(ys, xs) -> float:
    """Value at y = 0 of the polynomial x(y) through the points (ys, xs)."""
    p = list(xs)
    n = len(ys)
    for k in range(1, n):
        for i in range(n - k):
            den = ys[i + k] - ys[i]
            p[i] = (ys[i + k] * p[i] - ys[i] * p[i + 1]) / den
    return p[0]


def _usable(samples, absent):
    """Samples nearest the bracket whose indicator falls towards it."""
    ordered = sorted(samples, key=lambda s: abs(s.value - absent))
    out = []
    for s in ordered:
        if not (math.isfinite(s.d2) and s.d2 > 0):
            break
        if out and not s.d2 > out[-1].d2:   # d^2 must grow away from the fold
            break
        out.append(s)
    return out


def fit_fold(samples, *, absent: float, max_order: int = 2) -> FoldFit | None:
    """Extrapolate the fold location from the pair's squared separation.

    Parameters
    ----------
    samples : sequence of FoldSample
        Frames on the side where the pair exists (any order).
    absent : float
        The bracket end where the pair no longer exists.
    max_order : int
        Highest degree of the inverse interpolation ``s(d^2)``.

    Returns
    -------
    FoldFit or None
        None when fewer than two samples next to the bracket have ``d^2``
        decreasing towards it (the pair is not behaving like a fold).

    Notes
    -----
    Near a fold ``d^2`` is a smooth function of ``s`` with a simple zero at
    ``s*``, so its inverse ``s(d^2)`` is smooth too; interpolating it through
    the ``k`` samples nearest the bracket (Neville's scheme) and evaluating
    at ``d^2 = 0`` is inverse polynomial interpolation, as in the inverse
    quadratic steps of Brent's method [2]_.  The error estimate is the
    difference between the degree-k and degree-(k-1) results.

    Examples
    --------
    On an exact fold ``d^2 = 2 (1.3 - s)``:

    >>> fit = fit_fold([FoldSample(s, 2 * (1.3 - s)) for s in (1.0, 1.1, 1.2)], absent=1.4)
    >>> round(fit.estimate, 12)
    1.3
    """
    use = _usable(samples, absent)
    if len(use) < 2:
        return None
    k = min(len(use), max_order + 1)
    pts = use[:k]
    ys, xs = [s.d2 for s in pts], [s.value for s in pts]
    est = _neville_at_zero(ys, xs)
    noise2 = 0.0
    for i, smp in enumerate(pts):
        if smp.d2_error > 0:
            moved = list(ys)
            moved[i] = ys[i] + smp.d2_error
            try:
                noise2 += (_neville_at_zero(moved, xs) - est) ** 2
            except ZeroDivisionError:
                return None
    noise = math.sqrt(noise2)
    err = trunc = None
    if k >= 3:
        trunc = abs(est - _neville_at_zero(ys[:-1], xs[:-1]))
        err = math.hypot(trunc, noise)
    est_l = None
    lam = [s for s in pts if s.lambda2 is not None and s.lambda2 > 0]
    if len(lam) == len(pts) and all(b.lambda2 > a.lambda2 for a, b in zip(lam, lam[1:])):
        est_l = _neville_at_zero([s.lambda2 for s in lam], [s.value for s in lam])
    if not math.isfinite(est):
        return None
    return FoldFit(est, err, k - 1, k, est_l, noise, trunc)


def propose_fold(present: float, absent: float, samples, *, tol: float, n: int = 1,
                 evaluations: int = 0, initial_width: float | None = None,
                 previous_delta: float | None = None, surprised: bool = False) -> Proposal:
    """Safeguarded fold-aware proposal for one bracket.

    Parameters
    ----------
    present, absent : float
        Bracket ends: the pair exists at `present`, not at `absent`.
    samples : sequence of FoldSample
        Frames on the `present` side (the nearest ones matter).
    tol : float
        Target bracket width (coordinate units).
    n : int
        Number of values wanted this round.
    evaluations : int
        New frames already spent on this change.
    initial_width : float, optional
        Width of the bracket before refinement (default: the current one).
    previous_delta : float, optional
        The model uncertainty ``delta`` of the previous fold step on this
        change; the model must at least halve it each step (Brent's
        criterion applied to the model's uncertainty) until it reaches its
        floor ``0.45 tol``.
    surprised : bool
        True when the last fold step's expectation was contradicted (a probe
        expected on the present side found the pair gone, or vice versa);
        one bisection step follows, as in Dekker's safeguard.

    Returns
    -------
    Proposal

    Notes
    -----
    With ``t`` the distance from `present` towards `absent`, the fit gives
    ``t_est`` and a truncation error ``e``; ``delta = max(0.45 tol, 2 e)`` (METHODS.md
    section 7, scheme (B), with the error estimate of :func:`fit_fold`
    standing in for the change of successive estimates).  With one value per
    round the probe goes to ``t_est + delta`` (expected: absent) when that
    alone closes the bracket below `tol` or when it is the last model step
    the allowance permits; otherwise to ``t_est - delta``
    (expected: pair present) while that lies inside the bracket -- each such
    frame sharpens the fit -- and then to ``t_est + delta``.  With n >= 2
    values, n points are spread evenly over ``[t_est - delta, t_est +
    delta]``.  Bisection is used instead when the fit fails, when its root
    is outside the bracket, when ``2 delta`` is not below half the bracket
    (the model would not beat a bisection), when ``delta`` did not halve
    since the previous fold step, after a surprise, or whenever the step could
    end worse than bisection (:func:`keeps_guarantee`: the worst case is the
    bisection count plus :data:`ALLOWANCE` rounds), while on a clean fold the
    uncertainty shrinks superlinearly (the secant-like order of the inverse
    interpolation).

    The step uses the truncation part of the fit's error only: the position
    noise part (:attr:`FoldFit.noise`) comes from a deliberately pessimistic
    model and is reported, not steered by; the existence bit of every probe
    keeps the bracket exact whatever the model's error, and a contradicted
    expectation triggers bisection.
    """
    width = abs(absent - present)
    lo, hi = min(present, absent), max(present, absent)
    w0 = initial_width if initial_width else width
    if width <= 0:
        raise ValueError("empty bracket")
    if surprised:
        return propose_bisection(lo, hi, n, reason="the last fold step was contradicted")
    left = allowance_left(lo, hi, tol=tol, n=n, evaluations=evaluations, initial_width=w0)
    if left <= 0:
        return propose_bisection(lo, hi, n, reason="fold steps used their allowance over "
                                                   "bisection")
    fit = fit_fold(samples, absent=absent)
    if fit is None:
        return propose_bisection(lo, hi, n, reason="fewer than two frames with the pair "
                                                   "approaching the bracket")
    sign = 1.0 if absent > present else -1.0
    t_est = (fit.estimate - present) * sign
    if not 0.0 < t_est < width:
        return Proposal(bisection_points(lo, hi, n), BISECTION,
                        "the extrapolated fold lies outside the bracket", fit)
    err = fit.truncation if fit.truncation is not None else 0.25 * t_est
    delta = max(STRADDLE * tol, 2.0 * err)
    if 2.0 * delta >= 0.5 * width:
        return Proposal(bisection_points(lo, hi, n), BISECTION,
                        "the fold model is less certain than a bisection step", fit)
    floor = STRADDLE * tol
    if previous_delta is not None and delta > floor * (1 + 1e-9) \
            and delta > 0.5 * previous_delta:
        return Proposal(bisection_points(lo, hi, n), BISECTION,
                        "the fold model's uncertainty did not halve", fit)
    margin = min(0.01 * width, 0.1 * tol)

    def at(t):
        return present + sign * t

    if n == 1:
        closes = t_est + delta < width - margin
        if closes and (t_est + delta < tol or left == 1):
            # this probe finishes the bracket, or is the last model step allowed
            t, side = t_est + delta, "absent"
        elif t_est - delta > margin:
            t, side = t_est - delta, "present"
        elif closes:
            t, side = t_est + delta, "absent"
        else:
            return Proposal(bisection_points(lo, hi, n), BISECTION,
                            "both bracket ends lie within the model's uncertainty", fit)
        values = _inside([at(t)], lo, hi)
        expected = (side,)
    else:
        ts = [t_est - delta + 2.0 * delta * i / (n - 1) for i in range(n)]
        ts = [min(max(t, margin), width - margin) for t in ts]
        pairs = sorted({round(at(t), DECIMALS): ("present" if t < t_est else "absent")
                        for t in ts}.items())
        pairs = [(v, e) for v, e in pairs if lo < v < hi]
        values = tuple(v for v, _ in pairs)
        # only the outermost points carry an expectation (the model's error
        # is up to delta; the inner ones may fall either side)
        expected = tuple(e if i in (0, len(pairs) - 1) else None for i, (_, e) in enumerate(pairs))
    if not values:
        return Proposal(bisection_points(lo, hi, n), BISECTION,
                        "the model step falls on a bracket end", fit)
    return Proposal(values, FOLD, "extrapolated from d^2", fit, expected, delta)


def allocate_slots(widths, jobs: int) -> list:
    """Share `jobs` evaluations of one round among open brackets.

    Parameters
    ----------
    widths : sequence of float
        Bracket width over tolerance of each open change (larger first gets
        more).
    jobs : int

    Returns
    -------
    list of int
        Values to propose per bracket (some may be 0 when there are more
        brackets than jobs).  Deterministic: ties go to the earlier bracket.

    Examples
    --------
    >>> allocate_slots([4.0, 100.0], 3)
    [1, 2]
    """
    m = len(widths)
    slots = [0] * m
    order = sorted(range(m), key=lambda i: (-widths[i], i))
    for j in range(jobs):
        slots[order[j % m]] += 1 if m else 0
    return slots

