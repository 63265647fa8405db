"""Proposals on synthetic indicators whose fold location is known exactly.

The indicator d^2(s) below is a polynomial with a simple root at s*, the
shape the fold normal form gives near a fold (METHODS.md section 2: d^2 is
linear in s - s*) plus curvature; existence of the pair is the sign of
s* - s.  Everything is exact arithmetic on known functions, so the checks
are identities (inverse interpolation reproduces s* for an exactly linear
d^2) and counts against the bisection count log2(W / tol).
"""

import numpy as np
import pytest

from trackscan.refine.proposals import (
    BISECTION, FOLD, FoldSample, allocate_slots, bisection_count, bisection_points, fit_fold,
    propose_fold,
)


def test_bisection_points_and_count():
    assert bisection_points(1.0, 2.0) == (1.5,)
    assert bisection_points(2.0, 1.0, 3) == (1.25, 1.5, 1.75)
    assert bisection_count(0.1, 1e-4) == 10          # 0.1 / 2**10 < 1e-4 < 0.1 / 2**9
    assert bisection_count(1.0, 1.0) == 0
    with pytest.raises(ValueError):
        bisection_points(0.0, 1.0, 0)


def test_fit_is_exact_for_a_linear_indicator():
    s_star = 1.2345678901
    samples = [FoldSample(s, 3.0 * (s_star - s)) for s in (1.0, 1.1, 1.2)]
    fit = fit_fold(samples, absent=1.3)
    assert fit.estimate == pytest.approx(s_star, abs=1e-12)
    assert fit.order == 2 and fit.truncation == pytest.approx(0.0, abs=1e-12)


def test_fit_on_the_high_side_and_with_curvature():
    # the pair exists above s* (a birth read backwards); d^2 has curvature
    s_star = 0.5
    d2 = lambda s: 2.0 * (s - s_star) + 0.8 * (s - s_star) ** 2
    fit = fit_fold([FoldSample(s, d2(s)) for s in (0.9, 0.7, 0.6)], absent=0.45)
    # quadratic inverse interpolation of a quadratic: error O(h1 h2 h3) in the third order
    assert abs(fit.estimate - s_star) < 5e-3
    assert abs(fit.estimate - s_star) <= 3 * fit.error


def test_fit_refuses_a_pair_moving_apart():
    samples = [FoldSample(1.0, 0.5), FoldSample(1.1, 0.7)]   # d^2 grows towards the bracket
    assert fit_fold(samples, absent=1.2) is None


def test_model_root_outside_the_bracket_bisects():
    samples = [FoldSample(s, 1.0 * (2.0 - s)) for s in (1.0, 1.1, 1.2)]   # root at 2.0
    p = propose_fold(1.2, 1.3, samples, tol=1e-3)
    assert p.method == BISECTION and p.values == (1.25,)


def test_surprise_bisects():
    samples = [FoldSample(s, 1.0 * (1.25 - s)) for s in (1.0, 1.1, 1.2)]
    assert propose_fold(1.2, 1.3, samples, tol=1e-3).method == FOLD
    assert propose_fold(1.2, 1.3, samples, tol=1e-3, surprised=True).method == BISECTION


def test_values_strictly_inside_and_rounded():
    samples = [FoldSample(s, 1.0 * (1.2999999 - s)) for s in (1.0, 1.1, 1.2)]
    for n in (1, 2, 4):
        p = propose_fold(1.2, 1.3, samples, tol=1e-4, n=n)
        assert p.values and all(1.2 < v < 1.3 for v in p.values)
        assert all(round(v, 6) == v for v in p.values)


def test_allocate_slots():
    assert allocate_slots([4.0, 100.0], 3) == [1, 2]
    assert allocate_slots([4.0, 100.0, 7.0], 2) == [0, 1, 1]
    assert sum(allocate_slots([1.0], 5)) == 5


def _simulate(s_star, d2, frames, tol, n=1):
    """Run proposals against an exact existence oracle; new frames used."""
    present = [v for v in frames if v < s_star]
    absent = [v for v in frames if v > s_star]
    w0 = min(absent) - max(present)
    evals, surprised, prev = 0, False, None
    while min(absent) - max(present) > tol:
        a, b = max(present), min(absent)
        p = propose_fold(a, b, [FoldSample(v, d2(v)) for v in present], tol=tol, n=n,
                         evaluations=evals, initial_width=w0, previous_delta=prev,
                         surprised=surprised)
        prev = p.delta if p.method == FOLD else None
        surprised = False
        for v, e in zip(p.values, p.expected or (None,) * len(p.values)):
            evals += 1
            got = "present" if v < s_star else "absent"
            (present if got == "present" else absent).append(v)
            surprised |= e is not None and e != got
        assert evals < 100
    assert max(present) < s_star < min(absent)
    return evals


@pytest.mark.parametrize("beta", [0.0, 0.6, -0.4, 2.0])
def test_fold_steps_beat_bisection_on_smooth_folds(beta):
    # frames every 0.1, s* at 37 positions inside the bracket [1.0, 1.1];
    # tolerance 1e-3 of the bracket: bisection needs 10 evaluations.
    counts = []
    for frac in np.linspace(0.02, 0.98, 37):
        s_star = 1.0 + 0.1 * frac + 1.3e-7
        d2 = lambda s, s0=s_star: 4.0 * (s0 - s) + beta * (s0 - s) ** 2 + 0.5 * (s0 - s) ** 3
        counts.append(_simulate(s_star, d2, [0.8, 0.9, 1.0, 1.1, 1.2], 1e-4))
    assert bisection_count(0.1, 1e-4) == 10
    assert max(counts) <= 5, counts            # bisection: 10 everywhere
    assert np.mean(counts) <= 4.5, counts


def test_noisy_indicator_never_loses_the_root():
    # d^2 with noise: the bracket must still contain s* (existence bits decide)
    rng = np.random.default_rng(7)
    noise = {}

    def d2(s):
        return 4.0 * (1.0437 - s) + noise.setdefault(s, 2e-4 * rng.standard_normal())

    evals = _simulate(1.0437, d2, [0.8, 0.9, 1.0, 1.1], 1e-4)
    assert evals <= 20


def test_two_points_per_round():
    s_star = 1.0612345
    d2 = lambda s: 4.0 * (s_star - s) + 0.6 * (s_star - s) ** 2
    evals = _simulate(s_star, d2, [0.8, 0.9, 1.0, 1.1], 1e-4, n=2)
    assert evals <= 8        # at most four rounds of two


@pytest.mark.parametrize("kind", ["offset", "steep", "noisy", "quartic"])
def test_worst_case_is_bisection_plus_allowance(kind):
    # Misleading indicators: the d^2 model points at the wrong place, so the
    # existence bits keep contradicting it; the count must still stay within
    # the bisection count plus ALLOWANCE (keeps_guarantee's invariant).
    from trackscan.refine.proposals import ALLOWANCE
    rng = np.random.default_rng(11)
    worst = 0
    for frac in np.linspace(0.03, 0.97, 25):
        s_star = 1.0 + 0.1 * frac + 1.1e-7
        if kind == "offset":       # predicts a fold 0.03 beyond the real one
            d2 = lambda s, s0=s_star: 4.0 * (s0 + 0.03 - s)
        elif kind == "steep":      # strongly curved, root far from s*
            d2 = lambda s, s0=s_star: (s0 - s) ** 3 + 0.05 * (1.2 - s)
        elif kind == "quartic":    # d^2 ~ (s* - s)^4: the fold model creeps (25 frames unguarded)
            d2 = lambda s, s0=s_star: (s0 - s) ** 4
        else:
            d2 = lambda s, s0=s_star: 4.0 * (s0 - s) + 0.05 * rng.standard_normal()
        worst = max(worst, _simulate(s_star, d2, [0.8, 0.9, 1.0, 1.1, 1.2], 1e-4))
    assert worst <= bisection_count(0.1, 1e-4) + ALLOWANCE
