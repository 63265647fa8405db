"""Proposals from a two-sided indicator: the signed path offset of a conflict.

At a conflict a bond path switches partner by running into another bond CP;
the signed offset of the path from that point changes sign there
(../shared/METHODS.md section 2), so the indicator exists on both sides of
the change and Brent-style bracketing with inverse interpolation applies
[1]_.  The step logic and safeguards mirror
:func:`trackscan.refine.proposals.propose_fold`.

References
----------
.. [1] R. P. Brent, *Algorithms for Minimization without Derivatives*,
   Prentice-Hall (1973), chapter 4 [from memory].
.. [2] M. Dowell and P. Jarratt, "A modified regula falsi method for
   computing the root of an equation", BIT 11, 168 (1971)
   :DOI:`10.1007/BF01934364` [from memory].
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from trackscan.refine.proposals import (
    BISECTION, DECIMALS, STRADDLE, Proposal, _neville_at_zero, keeps_guarantee,
    bisection_points, propose_bisection,
)

__all__ = ["CROSSING", "SignedSample", "CrossingFit", "fit_crossing", "propose_crossing"]


CROSSING = "path-offset-interpolation"


@dataclass(frozen=True)
class SignedSample:
    """A two-sided indicator in one frame (e.g. a signed path offset, bohr)."""

    value: float
    g: float


@dataclass(frozen=True)
class CrossingFit:
    """Interpolated zero of a sign-changing indicator.

    Attributes
    ----------
    estimate : float
    error : float
        Change of the estimate when the secant through the two bracket ends
        replaces the inverse interpolation (0 with only those two samples).
    samples : int
    """

    estimate: float
    error: float
    samples: int

    def to_dict(self) -> dict:
        return {"indicator": "path offset", "estimate": self.estimate, "error": self.error,
                "samples": self.samples}


def fit_crossing(samples, *, lo: float, hi: float) -> CrossingFit | None:
    """Zero of a two-sided indicator by inverse interpolation, Brent style.

    Parameters
    ----------
    samples : sequence of SignedSample
        Frames at or outside the bracket ends.
    lo, hi : float
        The bracket.

    Returns
    -------
    CrossingFit or None
        None unless the samples at `lo` and `hi` exist and have opposite
        signs, and every sample has the sign of its side.

    Notes
    -----
    Inverse quadratic interpolation through the three samples nearest the
    bracket (two on one side, one on the other), falling back to the secant
    through the two ends, as in Brent's method [1]_.

    Examples
    --------
    >>> f = fit_crossing([SignedSample(v, 2.0 * (v - 0.3)) for v in (0.1, 0.2, 0.4)],
    ...                  lo=0.2, hi=0.4)
    >>> round(f.estimate, 12)
    0.3
    """
    below = sorted((s for s in samples if s.value <= lo), key=lambda s: -s.value)
    above = sorted((s for s in samples if s.value >= hi), key=lambda s: s.value)
    if not below or not above or below[0].value != lo or above[0].value != hi:
        return None
    sgn = math.copysign(1.0, below[0].g)
    if below[0].g == 0 or above[0].g == 0 or math.copysign(1.0, above[0].g) == sgn:
        return None
    if any(math.copysign(1.0, s.g) != sgn or s.g == 0 for s in below) or \
            any(math.copysign(1.0, s.g) == sgn or s.g == 0 for s in above):
        return None
    a, b = below[0], above[0]
    secant = a.value - a.g * (b.value - a.value) / (b.g - a.g)
    third = [s for s in (below[1:2] + above[1:2])]
    if not third:
        return CrossingFit(secant, 0.0, 2)
    c = min(third, key=lambda s: min(abs(s.value - lo), abs(s.value - hi)))
    pts = [a, b, c]
    ys = [s.g for s in pts]
    if len(set(ys)) < 3:
        return CrossingFit(secant, 0.0, 2)
    est = _neville_at_zero(ys, [s.value for s in pts])
    if not (lo < est < hi):
        est = secant
    return CrossingFit(est, abs(est - secant), 3)


def propose_crossing(lo: float, hi: float, samples, *, tol: float, n: int = 1,
                     evaluations: int = 0, initial_width: float | None = None,
                     previous_delta: float | None = None, surprised: bool = False,
                     stale: str | None = None, stale_rounds: int = 0) -> Proposal:
    """Safeguarded proposal from a sign-changing indicator (a conflict).

    Parameters
    ----------
    lo, hi : float
        Bracket, lo < hi.
    samples : sequence of SignedSample
    tol, n, evaluations, initial_width, previous_delta
        As for :func:`propose_fold`.
    surprised : bool
        Accepted for symmetry with :func:`propose_fold` and ignored: a frame
        on the unexpected side still carries the two-sided indicator, so
        the fit improves anyway; the Illinois step handles a fit that keeps
        falling short.
    stale : {'lo', 'hi'} or None
        The bracket end kept through the last `stale_rounds` rounds (every
        new frame fell on the other side).
    stale_rounds : int

    Returns
    -------
    Proposal
        ``expected`` holds ``"below"`` or ``"above"``: the side of the zero
        each value is expected on.

    Notes
    -----
    ``delta = max(0.45 tol, 2 e)`` around the estimate; with one value the
    probe goes to the far side of the estimate from the nearer bracket end
    (so the expected outcome leaves a bracket ``|estimate - end| + delta``),
    each frame sharpening the interpolation on its side.  The safeguards of
    :func:`propose_fold` apply (bisection on a failed fit, an estimate
    outside the bracket, a model no better than a bisection, a
    non-halving ``delta`` or a spent budget).
    """
    width = hi - lo
    w0 = initial_width if initial_width else width
    if width <= 0:
        raise ValueError("empty bracket")
    if not keeps_guarantee(lo, hi, tol=tol, n=n, evaluations=evaluations, initial_width=w0):
        return propose_bisection(lo, hi, n, reason="offset steps used their allowance over "
                                                   "bisection")
    fit = fit_crossing(samples, lo=lo, hi=hi)
    if fit is None:
        return propose_bisection(lo, hi, n, reason="no sign-changing path offset across the "
                                                   "bracket")
    margin = min(0.01 * width, 0.1 * tol)
    if stale in ("lo", "hi") and stale_rounds >= 2 and n == 1:
        return _illinois(lo, hi, samples, stale, stale_rounds, margin, fit)
    est = fit.estimate
    if not lo < est < hi:
        return propose_bisection(lo, hi, n, reason="the interpolated zero lies outside")
    err = fit.error if fit.samples >= 3 else 0.25 * min(est - lo, hi - est)
    delta = max(STRADDLE * tol, 2.0 * err)
    if 2.0 * delta >= 0.5 * width:
        return Proposal(bisection_points(lo, hi, n), BISECTION,
                        "the offset model is less certain than a bisection step")
    if previous_delta is not None and delta > STRADDLE * tol * (1 + 1e-9) \
            and delta > 0.5 * previous_delta:
        return Proposal(bisection_points(lo, hi, n), BISECTION,
                        "the offset model's uncertainty did not halve")
    if n == 1:
        toward_hi = (est - lo) < (hi - est)
        x = est + delta if toward_hi else est - delta
        if not lo + margin < x < hi - margin:
            x = est - delta if toward_hi else est + delta
        if not lo + margin < x < hi - margin:
            return Proposal(bisection_points(lo, hi, n), BISECTION,
                            "both bracket ends lie within the model's uncertainty")
        pairs = [(round(x, DECIMALS), "above" if x > est else "below")]
    else:
        xs = [min(max(est - delta + 2.0 * delta * i / (n - 1), lo + margin), hi - margin)
              for i in range(n)]
        pairs = sorted({round(x, DECIMALS): ("above" if x > est else "below") for x in xs}.items())
    pairs = [(v, e) for v, e in pairs if lo < v < hi]
    if not pairs:
        return propose_bisection(lo, hi, n, reason="the model step falls on a bracket end")
    expected = tuple(e if i in (0, len(pairs) - 1) else None for i, (_, e) in enumerate(pairs))
    step = Proposal(tuple(v for v, _ in pairs), CROSSING, "interpolated path offset", None,
                    expected, delta, fit)
    return _guarded(step, lo, hi, tol, n, evaluations, w0)


def _guarded(step: Proposal, lo, hi, tol, n, evaluations, w0) -> Proposal:
    """`step`, or bisection when it could end worse than bisection (keeps_guarantee)."""
    if step.method == BISECTION or keeps_guarantee(lo, hi, tol=tol, n=n, evaluations=evaluations,
                                                   initial_width=w0):
        return step
    return propose_bisection(lo, hi, n, reason="an offset step could end worse than bisection")


def _illinois(lo, hi, samples, stale, rounds, margin, fit) -> Proposal:
    """Secant step with the kept end's indicator halved per extra round (Illinois)."""
    a = next(s for s in samples if s.value == lo)
    b = next(s for s in samples if s.value == hi)
    scale = 0.5 ** (rounds - 1)
    ga, gb = (a.g * scale, b.g) if stale == "lo" else (a.g, b.g * scale)
    x = lo - ga * (hi - lo) / (gb - ga)
    x = round(min(max(x, lo + margin), hi - margin), DECIMALS)
    if not lo < x < hi:
        return propose_bisection(lo, hi, 1, reason="the Illinois step falls on a bracket end")
    return Proposal((x,), CROSSING, f"Illinois step (the {stale} end kept {rounds} rounds)",
                    None, (None,), None, fit)
