"""Parts of the report: events in words, view planes, fold pairs, density on a plane."""

from __future__ import annotations

import importlib.util
from pathlib import Path

import numpy as np
import pytest

from trackscan.promolecule import MODEL_LABEL, Promolecule, promolecule_grid
from trackscan.report import load_scan
from trackscan.report.change_geometry import best_plane, fold_pair, involved_atoms
from trackscan.report.density_map import contour_levels, density_map_figure, density_on_plane
from trackscan.report.tables import frame_table
from trackscan.report.wording import change_words, coord_decimals, resolution_words
from trackscan.units import ANGSTROM_IN_BOHR


def _fixture():
    path = Path(__file__).with_name("report_fixtures.py")
    spec = importlib.util.spec_from_file_location("report_fixtures", path)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module.ring_opening_scan()


def _with_change(change):
    scan = _fixture()
    scan["changes"] = [dict({"between": [1, 2], "bracket": [1.7, 1.9]}, **change)]
    return load_scan(scan)


@pytest.mark.parametrize("change, words", [
    ({"mechanism": "conflict",
      "events": [{"kind": "bond_switched", "atoms_before": [1, 3], "atoms_after": [2, 3]}]},
     "bond path C1–C3 switched to C2–C3"),
    ({"mechanism": "fold", "events": [{"kind": "bond_formed", "atoms": [1, 2], "track": "T-b",
                                       "fold_with": "T-r"},
                                      {"kind": "ring_formed", "track": "T-r", "fold_with": "T-b"}]},
     "bond path C1–C2 formed; ring CP formed (fold with the bond CP of C1–C2)"),
    ({"mechanism": "fold", "events": [{"kind": "ring_lost", "track": "T-r9",
                                       "fold_with": "T-cage"},
                                      {"kind": "cage_lost", "track": "T-cage",
                                       "fold_with": "T-r9"}]},
     "ring CP lost; cage CP lost (fold with the ring CP)"),
    ({"mechanism": "unresolved", "events": [{"kind": "ring_lost"}]}, "ring CP lost"),
    ({"mechanism": "mixed", "events": [{"kind": "attractor_formed", "atoms": [1, 2]}]},
     "non-nuclear attractor between C1, C2 formed"),
    ({"mechanism": "fold", "events": []}, "no events recorded"),
])
def test_events_in_the_shared_words(change, words):
    scan = _with_change(change)
    assert change_words(scan, scan.changes[0]) == words


def test_unresolved_change_and_incomplete_frame_are_warned_in_the_frame_table():
    raw = _fixture()
    raw["frames"][2]["complete"] = False
    raw["changes"][0]["mechanism"] = "unresolved"
    raw["changes"][0]["note"] = "pair below the resolution floor"
    table = frame_table(load_scan(raw))
    warn = {row[0]: row[-1] for row in table.rows}
    assert len(warn) == 4
    assert "incomplete" in warn["2"]
    assert "change 1 unresolved: pair below the resolution floor" in warn["1"]
    assert "change 1 unresolved" in warn["2"] and warn["0"] == "—"


def test_resolution_words_follow_the_fold_normal_form():
    scan = load_scan(_fixture())
    text = resolution_words(scan, scan.changes[0])
    # d_min = d * margin**(-1/3) = 0.3 * 37.5**(-1/3) = 0.0896 bohr = 0.0474 Å
    assert "d ≈ 0.047 Å" in text
    # |s_k - s*| * margin**(-2/3) = |1.7 - 1.8312345| * 37.5**(-2/3) = 0.01174
    assert "≈ 0.012 Å" in text


def test_coordinate_decimals_keep_bracket_ends_apart():
    assert coord_decimals(2.0, 2.1) == 3
    assert coord_decimals(width=3e-6) == 8
    d = coord_decimals(width=1e-5)
    assert f"{2.0712345:.{d}f}" != f"{2.0712445:.{d}f}"


def test_best_plane_of_points_on_a_known_plane():
    rng = np.random.default_rng(3)
    normal = np.array([1.0, -2.0, 0.5]) / np.linalg.norm([1.0, -2.0, 0.5])
    a = np.cross(normal, [0, 0, 1.0])
    a /= np.linalg.norm(a)
    b = np.cross(normal, a)
    pts = 1.5 + rng.normal(size=(7, 1)) * a + rng.normal(size=(7, 1)) * b
    plane = best_plane(pts)
    assert abs(abs(plane.normal @ normal) - 1) < 1e-12
    assert np.allclose(plane.height(pts), 0, atol=1e-12)
    assert np.allclose(plane.lift(plane.project(pts)), pts, atol=1e-12)


def test_plane_of_two_atoms_uses_context_for_the_second_direction():
    plane = best_plane([[0, 0, 0], [2.0, 0, 0]], context=[[1.0, 0, 3.0]])
    assert abs(plane.normal @ [0, 1.0, 0]) == pytest.approx(1.0)
    assert plane.height([[1.0, 0, 3.0]])[0] == pytest.approx(0.0)


def test_fold_pair_comes_from_the_change_and_involved_atoms_of_the_fixture_fold():
    scan = load_scan(_fixture())
    pair = fold_pair(scan, scan.changes[0])
    assert [cp.id for cp in pair.cps] == ["b3", "r1"] and pair.side == "before"
    assert pair.frame.index == 1
    assert involved_atoms(scan, scan.changes[0]) == [1, 2, 3]
    # an attractor + bond-CP fold (not a bond/ring pair) is read from fold_with as well
    raw = _fixture()
    raw["frames"][1]["critical_points"].append(
        {"id": "a1", "track": "T-a1", "kind": "non_nuclear", "rank": 3, "signature": -3,
         "position_bohr": [0.0, 0.2, 0.0], "rho": 0.12, "laplacian": -0.1,
         "eigenvalues": [-0.2, -0.1, -0.05]})
    raw["changes"][0]["events"] = [
        {"kind": "attractor_lost", "cp": "a1", "track": "T-a1", "fold_with": "T-b12"},
        {"kind": "bond_broken", "atoms": [1, 2], "cp": "b3", "track": "T-b12",
         "fold_with": "T-a1"}]
    scan = load_scan(raw)
    pair = fold_pair(scan, scan.changes[0])
    assert pair is not None and [cp.kind for cp in pair.cps] == ["non_nuclear", "bond"]


def test_density_on_plane_matches_the_analytic_model():
    # reference: the analytic promolecular density (exact value at each point)
    pos = np.array([[-1.6, 0, 0], [1.6, 0, 0], [0, 2.7, 0.0]])
    grid = promolecule_grid([6, 6, 6], pos, spacing=0.15, margin=4.0)
    model = Promolecule([6, 6, 6], pos)
    plane = best_plane(pos)
    pts = plane.lift(np.random.default_rng(0).uniform(-3, 3, (2000, 2)))
    got, exact = density_on_plane(grid, pts), model.value(pts)
    rel = np.abs(got - exact) / exact
    # tolerance of a contour map: levels 1, 2, 5 x 10^n are a factor >= 2 apart, so 1 %
    # moves no line visibly (measured: 1.6e-4 at worst, near the nuclei, 2e-6 median)
    assert np.max(rel) < 1e-2
    assert np.median(rel) < 1e-4
    assert np.isnan(density_on_plane(grid, [[50.0, 0, 0]]))[0]


def test_contour_levels_are_one_two_five_decades():
    levels = contour_levels([3e-4, 0.7], floor=1e-4)
    assert list(levels) == pytest.approx([5e-4, 1e-3, 2e-3, 5e-3, 1e-2, 2e-2, 5e-2, 0.1, 0.2, 0.5])


def test_density_map_falls_back_to_the_model_without_cubes():
    raw = _fixture()
    raw["scan"]["density_source"] = MODEL_LABEL
    scan = load_scan(raw)
    fig, note = density_map_figure(scan, scan.changes[0], 1)
    assert note is None and fig is not None and fig.png.startswith(b"\x89PNG")
    assert fig.svg.lstrip().startswith(b"<?xml") and fig.pdf.startswith(b"%PDF")
    assert "evaluated exactly" in fig.caption
    raw["scan"]["density_source"] = "cube files from elsewhere"
    fig, note = density_map_figure(load_scan(raw), load_scan(raw).changes[0], 1)
    assert fig is None and "frames/f01.cube" in note


def test_contour_levels_are_capped_below_the_cores():
    from trackscan.report.density_map import CONTOUR_CAP
    levels = contour_levels([1e-5, 120.0])      # a core reaches 10^2 a.u.
    assert len(levels) > 0 and levels.max() <= CONTOUR_CAP and levels.min() >= 1e-3


def test_fold_series_is_the_pair_distance_in_scan_json():
    from trackscan.report.fold_plots import fold_series
    raw = _fixture()
    scan = load_scan(raw)
    pair, x, d = fold_series(scan, scan.changes[0])
    frames = {f["index"]: f for f in raw["frames"]}
    want = []
    for i in (0, 1):
        cps = {cp["id"]: cp["position_bohr"] for cp in frames[i]["critical_points"]}
        want.append(np.linalg.norm(np.subtract(cps["b3"], cps["r1"])) / ANGSTROM_IN_BOHR)
    assert list(x) == [1.5, 1.7] and d == pytest.approx(want, rel=1e-9)
    raw["changes"][0].update(mechanism="conflict")
    for e in raw["changes"][0]["events"]:
        e.pop("fold_with")
    assert fold_series(load_scan(raw), load_scan(raw).changes[0]) is None


def test_inverse_interpolant_finds_the_zero_of_an_exact_fold():
    from trackscan.report.fold_plots import inverse_interpolant
    # d^2 = 2 (1.3 - s): s(d^2 = 0) = 1.3 exactly (same check as refine.proposals.fit_fold)
    s = np.array([1.0, 1.1, 1.2])
    model = inverse_interpolant(s, 2 * (1.3 - s))
    assert float(model(0.0)) == pytest.approx(1.3, abs=1e-12)


def test_descending_scan_runs_left_to_right_in_plots():
    from trackscan.report.plots import counts_plot
    raw = _fixture()
    for f in raw["frames"]:
        f["index"] = 3 - f["index"]
    scan = load_scan(raw)
    assert scan.descending and [f.value for f in scan.frames] == [2.1, 1.9, 1.7, 1.5]
    assert not load_scan(_fixture()).descending
    assert counts_plot(scan) is not None


def test_resolution_words_when_the_pair_is_below_the_floor():
    raw = _fixture()
    pair = raw["changes"][0]["resolution"]["pairs"][0]
    pair.update(margin=0.125, rho_difference=6.6e-5)
    raw["changes"][0]["resolution"]["resolved"] = False
    scan = load_scan(raw)
    text = resolution_words(scan, scan.changes[0])
    # d_min = 0.3 * 0.125**(-1/3) = 0.6 bohr = 0.32 Å; reach = 0.1312345 * 0.125**(-2/3) = 0.52 Å
    assert "already below the floor" in text and "d ≳ 0.32 Å" in text
    assert "≈ 0.52 Å from the estimate" in text and "NOT resolved" in text


def test_fold_figure_draws_the_fit_and_zooms_on_the_estimate():
    import copy
    from trackscan.report import fold_plots
    raw = _fixture()
    with_pair, without = raw["frames"][1], raw["frames"][2:]
    frames = []
    for i, v in enumerate(round(0.1 * i, 10) for i in range(1, 18)):      # 0.1 ... 1.7 Å
        f = copy.deepcopy(with_pair)
        f.update(index=i, value=v)
        frames.append(f)
    for j, f in enumerate(without):
        f.update(index=len(frames) + j)
    raw["frames"] = frames + without
    raw["changes"][0]["between"] = [16, 17]
    scan = load_scan(raw)
    captured = {}
    real = fold_plots.render

    def keep(fig):
        captured["fig"] = fig
        return real(fig)
    fold_plots.render = keep
    try:
        fig = fold_plots.fold_figure(scan, scan.changes[0], 1)
    finally:
        fold_plots.render = real
    assert fig is not None and fig.name == "fold_change1"
    ax_all, ax_zoom = [a for a in captured["fig"].axes if a.get_title(loc="left")]
    # the zoom is narrower than the whole scan and contains the estimate
    assert np.ptp(ax_zoom.get_xlim()) < 0.8 * np.ptp(ax_all.get_xlim())
    lo, hi = sorted(ax_zoom.get_xlim())
    assert lo < scan.changes[0].estimate < hi
    # the fitted line reaches d^2 = 0 (two samples: the straight line through them)
    fit = [ln for ln in ax_zoom.lines if len(ln.get_xdata()) == 100]
    assert len(fit) == 1 and min(fit[0].get_ydata()) == 0.0


def test_setting_meanings_drop_the_default_sentence_whole():
    """ "Default 2.5." is removed up to the sentence's period, not the decimal point."""
    import re

    from trackscan.report.settings_text import setting_meanings

    for group in ("settings", "tracking"):
        meanings = setting_meanings(group)
        assert meanings["fold_gate" if group == "tracking" else "gtol"][0]
        for name, (meaning, _) in meanings.items():
            assert not re.search(r"\.\d+\.$", meaning), (name, meaning)
            assert "Default" not in meaning and "METHODS.md" not in meaning, (name, meaning)
