"""Acceptance: refine locates the folds of a model density in few new frames.

The model (tests/refine/fold_model.py) is three promolecular hydrogen atoms
with two folds along the H1-H3 distance s; their locations s* are solved on
the analytic field with SciPy root finding (gradient zero and a singular
in-plane Hessian), independently of trackscan's topology and refine code.

Frames of the analytic model are analysed on the exact field
(``analyze_frame(grid, field=...)``; the coarse grid only seeds the search),
so the only limits are the critical-point search tolerances.  From brackets
of width W = 0.1 bohr the refine loop must reach width <= 1e-3 W around s*
with at most 5 new frames each; bisection needs ceil(log2(1000)) = 10.
"""

import importlib.util
from pathlib import Path

import pytest

from trackscan.model import Frame

from trackscan.promolecule import promolecule_grid
from trackscan.refine import annotate_changes, bisection_count, refine_frames
from trackscan.settings import AnalysisSettings
from trackscan.topology import analyze_frame

_spec = importlib.util.spec_from_file_location(
    "fold_model", Path(__file__).with_name("fold_model.py"))
fm = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(fm)

W = 0.1
TOL = 1e-3 * W


@pytest.fixture(scope="module")
def folds():
    return fm.solve_fold(fm.BIRTH_GUESS), fm.solve_fold(fm.DEATH_GUESS)


def analytic_frame(s, calls):
    """Frame dict of the exact model field at s (no cube, no interpolation)."""
    calls.append(s)
    pos = fm.positions(s)
    seeds = promolecule_grid([1, 1, 1], pos, spacing=0.3, margin=2.5)
    frame = analyze_frame(seeds, AnalysisSettings(), field=fm.field(s)).to_dict()
    frame["value"] = float(s)
    frame["source"] = f"analytic model at s={s!r}"
    # an exact field: no interpolation floor, all digits significant
    frame["grid"]["spacing_bohr"] = [float("nan")] * 3
    frame["grid"]["significant_digits"] = 17
    return Frame.from_dict(frame)


def _refine(values, *, jobs=1):
    calls = []
    frames = [analytic_frame(s, calls) for s in values]
    calls.clear()
    result = refine_frames(frames, evaluate=lambda probes: [analytic_frame(p.value, calls)
                                                            for p in probes],
                           tolerance=TOL, jobs=jobs)
    changes = [c.to_dict() for c in annotate_changes(result.tracked.frames,
                                                     result.tracked.changes, tolerance=TOL)]
    return result, changes, calls


def test_both_folds_within_five_frames_each(folds):
    values = [2.2, 2.3, 2.4, 2.5, 2.6, 2.7, 2.8, 2.9, 3.0]
    result, changes, calls = _refine(values)
    assert result.converged
    assert len(changes) == 2
    assert bisection_count(W, TOL) == 10
    for ch, s_star in zip(sorted(changes, key=lambda c: c["estimate"]), folds):
        lo, hi = sorted(ch["bracket"])
        assert hi - lo <= TOL
        assert lo < s_star < hi
        assert ch["evaluations"] <= 5, ch
        assert ch["refine"]["bisection_evaluations"] == 10
        assert ch["estimate_method"] == "fold-extrapolation"
        # the extrapolation is far better than the bracket
        assert abs(ch["estimate"] - s_star) < 1e-6
        assert abs(ch["estimate"] - s_star) <= max(ch["uncertainty"]["model_error"], 1e-7)
    assert len(calls) == len(set(calls)) == sum(ch["evaluations"] for ch in changes)
    assert len(calls) <= 10


def test_two_values_per_round(folds):
    result, changes, calls = _refine([2.7, 2.8, 2.9, 3.0], jobs=2)
    (ch,) = changes
    lo, hi = sorted(ch["bracket"])
    assert hi - lo <= TOL and lo < folds[1] < hi
    assert result.rounds <= 4
    assert ch["evaluations"] == len(calls) <= 8


def test_budget_and_descending_scan(folds):
    # the same fold, frames listed in descending order, budget of two frames
    calls = []
    frames = [analytic_frame(s, calls) for s in (3.0, 2.9, 2.8, 2.7)]
    calls.clear()
    result = refine_frames(frames, evaluate=lambda ps: [analytic_frame(p.value, calls)
                                                        for p in ps],
                           tolerance=TOL, max_evaluations=2)
    assert not result.converged and "budget" in result.message
    assert len(calls) == result.evaluations == 2
    assert result.tracked.direction == "descending"
    (ch,) = result.tracked.to_dict()["changes"]
    a, b = ch["bracket"]
    assert a > b and b < folds[1] < a                  # scan order: old structure first
    # two fold steps probe the side where the pair exists: that end is
    # already within W/100 of s* (the other end moves at the last step)
    assert folds[1] - b < 0.01 * W
    # more budget later: the loop continues from the frames made so far
    more = refine_frames(result.frames, evaluate=lambda ps: [analytic_frame(p.value, calls)
                                                             for p in ps], tolerance=TOL)
    assert more.converged and more.total_evaluations == len(calls) <= 5


def test_bad_tolerance_is_input_error():
    from trackscan.errors import InputError

    with pytest.raises(InputError, match="tolerance"):
        refine_frames([], evaluate=None, tolerance=1e-9)
