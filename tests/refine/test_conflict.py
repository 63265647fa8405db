"""Conflicts: the signed path offset brackets the switch faster than bisection.

Model: two promolecular carbon atoms at (-1.3, 0, 0) and (1.3, 0, 0) bohr
and a hydrogen at (s, 2.5, 0).  The hydrogen's single bond path ends at C1
for s < 0 and at C2 for s > 0; at s = 0 it runs into the C1-C2 bond CP (a
conflict).  s* = 0 exactly, by the mirror symmetry x -> -x of the geometry
(no computation needed).  The scan's frames straddle it asymmetrically, so
a midpoint never lands on it by accident.
"""

import numpy as np
import pytest

from trackscan.model import Frame

from trackscan.promolecule import Promolecule, promolecule_grid
from trackscan.refine import annotate_changes, bisection_count, refine_frames
from trackscan.refine.crossing import SignedSample, fit_crossing
from trackscan.settings import AnalysisSettings
from trackscan.topology import analyze_frame

Z = [6, 6, 1]
TOL = 1e-4


def _positions(s):
    return np.array([[-1.3, 0.0, 0.0], [1.3, 0.0, 0.0], [s, 2.5, 0.0]])


def _frame(s, calls):
    calls.append(s)
    seeds = promolecule_grid(Z, _positions(s), spacing=0.3, margin=2.5)
    f = analyze_frame(seeds, AnalysisSettings(), field=Promolecule(Z, _positions(s))).to_dict()
    f["value"] = float(s)
    f["source"] = f"model at s={s!r}"
    f["grid"]["spacing_bohr"] = [float("nan")] * 3       # exact field: no interpolation floor
    f["grid"]["significant_digits"] = 17
    return Frame.from_dict(f)


def test_fit_crossing_is_exact_for_a_linear_offset():
    samples = [SignedSample(v, 3.0 * (v - 0.0123)) for v in (-0.1, 0.0, 0.05, 0.2)]
    fit = fit_crossing(samples, lo=0.0, hi=0.05)
    assert fit.estimate == pytest.approx(0.0123, abs=1e-12)
    # a sample on the wrong side is not a sign change: no fit
    assert fit_crossing([SignedSample(0.0, -1.0), SignedSample(0.05, -0.5)], lo=0.0,
                        hi=0.05) is None


def test_conflict_refined_by_path_offset():
    calls = []
    frames = [_frame(s, calls) for s in (-0.23, -0.13, -0.03, 0.07, 0.17)]
    calls.clear()
    result = refine_frames(frames, evaluate=lambda ps: [_frame(p.value, calls) for p in ps],
                           tolerance=TOL)
    changes = [c.to_dict() for c in annotate_changes(result.tracked.frames,
                                                     result.tracked.changes, tolerance=TOL)]
    (ch,) = changes
    assert ch["mechanism"] == "conflict"
    assert [e["kind"] for e in ch["events"]] == ["bond_switched"]
    lo, hi = sorted(ch["bracket"])
    assert hi - lo <= TOL and lo < 0.0 < hi
    assert bisection_count(0.1, TOL) == 10
    assert ch["evaluations"] == len(calls) <= 6
    assert ch["estimate_method"] == "path-offset-interpolation"
    assert abs(ch["estimate"]) < 0.1 * TOL       # far inside the bracket
