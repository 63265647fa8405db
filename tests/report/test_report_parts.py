"""Parts of the report: events in words, view planes, fold pairs, density on a plane."""

from __future__ import annotations

import importlib.util
from pathlib import Path

import numpy as np
import pytest

from trackscan.promolecule import MODEL_LABEL, Promolecule, promolecule_grid
from trackscan.report import load_scan
from trackscan.report.change_geometry import best_plane, coalescing_pair, involved_atoms
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
     "bond path C1–C3 switches to C2–C3"),
    ({"mechanism": "fold", "events": [{"kind": "bond_formed", "atoms": [1, 2]},
                                      {"kind": "ring_formed"}]},
     "bond path C1–C2 forms; ring CP is born together with the bond CP (fold)"),
    ({"mechanism": "fold", "events": [{"kind": "ring_lost", "fold_with": "T-cage"},
                                      {"kind": "cage_lost", "fold_with": "T-r9"}]},
     "ring CP disappears; cage CP annihilates with the ring CP (fold)"),
    ({"mechanism": "unresolved", "events": [{"kind": "ring_lost"}]}, "ring CP disappears"),
    ({"mechanism": "mixed", "events": [{"kind": "attractor_formed", "atoms": [1, 2]}]},
     "non-nuclear attractor between C1, C2 appears"),
    ({"mechanism": "fold", "events": []}, "no events recorded"),
])
def test_events_in_plain_words(change, words):
    scan = _with_change(change)
    assert change_words(scan.changes[0], scan) == words


def test_unresolved_change_and_incomplete_frame_are_warned_in_the_frame_table():
    raw = _fixture()
    raw["frames"][2]["complete"] = False
    raw["changes"][0]["mechanism"] = "unresolved"
    raw["changes"][0]["note"] = "pair below the resolution floor"
    table = frame_table(load_scan(raw))
    warn = {row[0]: row[-1] for row in table.rows}
    assert "incomplete" in warn["2"]
    assert "change 1 unresolved: pair below the resolution floor" in warn["1"]
    assert "change 1 unresolved" in warn["2"] and warn["0"] == "—"


def test_resolution_words_follow_the_fold_normal_form():
    scan = load_scan(_fixture())
    text = resolution_words(scan.changes[0], scan)
    # d_min = d * margin**(-1/3) = 0.3 * 37.5**(-1/3) = 0.0896 bohr
    assert "d ≈ 0.09 bohr" in text
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


def test_coalescing_pair_and_involved_atoms_of_the_fixture_fold():
    scan = load_scan(_fixture())
    a, b, side = coalescing_pair(scan, scan.changes[0])
    assert {a["id"], b["id"]} == {"b3", "r1"} and side == "before"
    assert involved_atoms(scan, scan.changes[0]) == [1, 2, 3]


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
    levels = contour_levels([3e-4, 0.7])
    assert list(levels) == pytest.approx([5e-4, 1e-3, 2e-3, 5e-3, 1e-2, 2e-2, 5e-2, 0.1, 0.2, 0.5])


def test_density_map_falls_back_to_the_model_without_cubes():
    raw = _fixture()
    raw["scan"]["density_source"] = MODEL_LABEL
    scan = load_scan(raw)
    fig, note = density_map_figure(scan, scan.changes[0], 1)
    assert note is None and fig is not None and fig.png.startswith(b"\x89PNG")
    assert "evaluated exactly" in fig.caption
    raw["scan"]["density_source"] = "cube files from elsewhere"
    fig, note = density_map_figure(load_scan(raw), load_scan(raw).changes[0], 1)
    assert fig is None and "frames/f01.cube" in note


def test_fold_distance_plot_for_folds_and_unresolved_fold_candidates_only():
    from trackscan.report.plots import fold_distance_plot, fold_series
    raw = _fixture()
    scan = load_scan(raw)
    label, x, d = fold_series(scan, scan.changes[0])
    # the bond CP b3 and ring CP r1 exist in frames 0 and 1 only; distance from scan.json
    frames = {f["index"]: f for f in raw["frames"]}
    want = []
    for i in (0, 1):
        cps = {cp["id"]: cp["position_bohr"] for cp in frames[i]["critical_points"]}
        want.append(np.linalg.norm(np.subtract(cps["b3"], cps["r1"])) / ANGSTROM_IN_BOHR)
    assert list(x) == [1.5, 1.7] and d == pytest.approx(want, rel=1e-9)
    assert label == "bond CP C1–C2 · ring CP"
    raw["changes"][0].update(mechanism="unresolved", mechanism_candidate="fold")
    assert fold_distance_plot(load_scan(raw)) is not None
    raw["changes"][0].update(mechanism="conflict", mechanism_candidate=None)
    assert fold_distance_plot(load_scan(raw)) is None


def test_descending_scan_runs_left_to_right_in_plots():
    from trackscan.report.plots import counts_plot
    raw = _fixture()
    for f in raw["frames"]:
        f["index"] = 3 - f["index"]
    scan = load_scan(raw)
    assert scan.descending and [f["value"] for f in scan.frames] == [2.1, 1.9, 1.7, 1.5]
    assert not load_scan(_fixture()).descending
    assert counts_plot(scan) is not None


def test_resolution_words_when_the_pair_is_below_the_floor():
    raw = _fixture()
    pair = raw["changes"][0]["resolution"]["pairs"][0]
    pair.update(margin=0.125, rho_difference=6.6e-5)
    raw["changes"][0]["resolution"]["resolved"] = False
    scan = load_scan(raw)
    text = resolution_words(scan.changes[0], scan)
    # d_min = 0.3 * 0.125**(-1/3) = 0.6 bohr; reach = 0.1312345 * 0.125**(-2/3) = 0.52 Å
    assert "already below the floor" in text and "d ≳ 0.6 bohr" in text
    assert "≈ 0.52 Å from the fold" in text and "NOT resolved" in text


def test_fold_zoom_shows_the_frames_nearest_the_fold():
    import copy
    from trackscan.report.plots import ZOOM_FRAMES, fold_zoom_plot
    raw = _fixture()
    assert fold_zoom_plot(load_scan(raw), load_scan(raw).changes[0], 1) is None  # short scan
    with_pair, without = raw["frames"][1], raw["frames"][2:]
    frames = []
    values = [round(0.1 * i, 10) for i in range(1, 18)]      # 0.1 ... 1.7 Å
    for i, v in enumerate(values):
        f = copy.deepcopy(with_pair)
        f.update(index=i, value=v)
        frames.append(f)
    for j, f in enumerate(without):
        f.update(index=len(values) + j)
    raw["frames"] = frames + without
    raw["changes"][0]["between"] = [len(values) - 1, len(values)]
    scan = load_scan(raw)
    fig = fold_zoom_plot(scan, scan.changes[0], 1)
    assert fig is not None and fig.name == "fold_zoom_change1"
    assert f"the {ZOOM_FRAMES} frames nearest the fold" in fig.caption
