"""Tracking logic on SYNTHETIC frame dicts (tests/tracking/synthetic.py).

The inputs are hand-built to the frame contract; the expected changes follow
from how each scenario is built (a fold pair that annihilates, a bond path
that switches ends, a pair that lives in one frame only, ...).
"""

import copy
import importlib.util
import json
from pathlib import Path

import numpy as np
import pytest

from trackscan.errors import ConsistencyError, InputError
from trackscan.model import Change
from trackscan.tracking import TrackingSettings, describe_change
from trackscan.tracking import track_scan as _track_scan


def track_scan(frames, **kw):
    """The tracking result in its contract form (what scan.json carries)."""
    return _track_scan(frames, **kw).to_dict()
from trackscan.tracking.align import kabsch

_spec = importlib.util.spec_from_file_location("tracking_synthetic",
                                               Path(__file__).with_name("synthetic.py"))
S = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(S)


def _changes(result):
    return json.dumps(result["changes"], sort_keys=True)


def test_fold_ring_opening():
    r = track_scan(S.ring_opening_scan())
    assert [f["structure"] for f in r["frames"]] == [1, 1, 1, 2, 2, 2]
    (ch,) = r["changes"]
    assert ch["between"] == [2, 3] and ch["bracket"] == [2.0, 3.0]
    assert ch["mechanism"] == "fold"
    assert ch["estimate"] == 2.5 and ch["estimate_method"] == "bracket-midpoint"
    kinds = sorted((e["kind"], tuple(e.get("atoms", ()))) for e in ch["events"])
    assert kinds == [("bond_broken", (1, 3)), ("ring_lost", (1, 2, 3))]
    assert ch["structure_type_changed"] is True
    assert ch["resolution"]["resolved"] and ch["resolution"]["margin"] > 1
    assert describe_change(Change.from_dict(ch), ["C", "C", "C"]) == "bond path C1–C3 broken; ring CP lost"
    # the bond CP keeps one track while it exists
    tracks = [{cp["id"]: cp["track"] for cp in f["critical_points"]} for f in r["frames"]]
    assert len({t["b3"] for t in tracks[:3]}) == 1
    assert all(t["n2"] == "nucleus-2" for t in tracks)


def test_conflict_switch():
    r = track_scan(S.conflict_scan())
    (ch,) = r["changes"]
    assert ch["between"] == [2, 3] and ch["mechanism"] == "conflict"
    (ev,) = ch["events"]
    assert ev["kind"] == "bond_switched"
    assert ev["atoms_before"] == [1, 3] and ev["atoms_after"] == [2, 3]
    # C1-H3 and C2-H3 with C1-C2: the same graph up to relabelling
    assert ch["structure_type_changed"] is False
    assert describe_change(Change.from_dict(ch), ["C", "C", "H"]) == "bond path C1–H3 switched to C2–H3"


def test_out_of_order_listing_gives_same_changes():
    frames = S.ring_opening_scan()
    ref = track_scan(frames)
    rng = np.random.default_rng(7)
    perm = rng.permutation(len(frames))
    while np.all(np.diff([frames[i]["value"] for i in perm]) < 0):
        perm = rng.permutation(len(frames))
    shuffled = track_scan([frames[i] for i in perm])
    assert _changes(shuffled) == _changes(ref)
    assert [f["value"] for f in shuffled["frames"]] == [f["value"] for f in ref["frames"]]


@pytest.mark.parametrize("scan", [S.ring_opening_scan, S.conflict_scan])
def test_rotated_frames_give_same_changes(scan):
    frames = scan()
    ref = track_scan(frames)
    rng = np.random.default_rng(3)
    moved = [S.rotate_frame(f, S.random_rotation(rng), rng.normal(scale=5.0, size=3))
             for f in frames]
    got = track_scan(moved)
    assert _changes(got) == _changes(ref)
    ref_tracks = [[cp["track"] for cp in f["critical_points"]] for f in ref["frames"]]
    got_tracks = [[cp["track"] for cp in f["critical_points"]] for f in got["frames"]]
    assert got_tracks == ref_tracks


def test_rotation_without_alignment_would_break_matching():
    # Guard that the rotated-frames test is not vacuous: the CPs of the moved
    # frames are far apart in raw coordinates, beyond the matching gate.
    frames = S.ring_opening_scan()
    rng = np.random.default_rng(3)
    moved = [S.rotate_frame(f, S.random_rotation(rng), rng.normal(scale=5.0, size=3))
             for f in frames]
    a = np.array(moved[0]["critical_points"][3]["position_bohr"])
    b = np.array(moved[1]["critical_points"][3]["position_bohr"])
    assert np.linalg.norm(a - b) > TrackingSettings().match_gate + 1.0


def test_descending_scan_runs_backwards():
    frames = S.ring_opening_scan()[::-1]
    r = track_scan(frames)
    assert r["direction"] == "descending"
    (ch,) = r["changes"]
    assert ch["bracket"] == [3.0, 2.0] and ch["between"] == [2, 3]
    assert sorted(e["kind"] for e in ch["events"]) == ["bond_formed", "ring_formed"]
    assert ch["mechanism"] == "fold"


def _flicker_scan(drho):
    frames = []
    for s in range(6):
        p = np.array([[0.0, 0, 0], [2.8, 0, 0], [1.4, 2.4, 0]])
        cps = [S.bond_cp("b1", 0.5 * (p[0] + p[1]), (1, 2)),
               S.bond_cp("b2", 0.5 * (p[1] + p[2]), (2, 3))]
        if s == 3:
            centre = np.array([0.6, 1.0, 0.0])
            cps.append(S.bond_cp("b3", centre - [0.05, 0, 0], (1, 3), rho=0.08))
            cps.append(S.ring_cp("r1", centre + [0.05, 0, 0], (1, 2, 3), rho=0.08 - drho))
        frames.append(S.frame(float(s), S.TRIANGLE_Z, p, cps))
    return frames


def test_single_frame_flicker_below_significance_is_unresolved():
    r = track_scan(_flicker_scan(1e-7))
    assert [c["between"] for c in r["changes"]] == [[2, 3], [3, 4]]
    for ch in r["changes"]:
        assert ch["mechanism"] == "unresolved"
        assert ch["mechanism_candidate"] == "fold"
        # the flicker is in scan position 3, the 4th listed frame (labels count from 1)
        assert "noise" in ch["note"] and "frame 4" in ch["note"]


def test_single_frame_pair_with_clear_density_difference_is_a_fold():
    r = track_scan(_flicker_scan(2e-3))
    assert [c["mechanism"] for c in r["changes"]] == ["fold", "fold"]
    assert "note" not in r["changes"][0]


def test_missing_from_single_frame_is_noise_when_tiny():
    frames = _flicker_scan(1e-7)
    # invert: the pair is present everywhere but frame 3
    pair = [cp for cp in frames[3]["critical_points"] if cp["id"] in ("b3", "r1")]
    inv = []
    for k, f in enumerate(frames):
        g = copy.deepcopy(f)
        if k == 3:
            g["critical_points"] = [cp for cp in g["critical_points"] if cp["id"] not in ("b3", "r1")]
            g["bond_paths"] = [p for p in g["bond_paths"] if p["cp"] != "b3"]
        else:
            g["critical_points"] = g["critical_points"] + copy.deepcopy(pair)
            g["bond_paths"] = g["bond_paths"] + [{"cp": "b3", "atoms": [1, 3]}]
        inv.append(g)
    r = track_scan(inv)
    assert [c["between"] for c in r["changes"]] == [[2, 3], [3, 4]]
    assert all(c["mechanism"] == "unresolved" and "noise" in c["note"] for c in r["changes"])


def test_poincare_hopf_failure_is_unresolved():
    frames = S.ring_opening_scan()
    frames[3]["complete"] = False
    frames[3]["poincare_hopf"]["holds"] = False
    r = track_scan(frames)
    (ch,) = r["changes"]
    assert ch["mechanism"] == "unresolved" and ch["mechanism_candidate"] == "fold"
    assert "frame 4 fails Poincaré–Hopf" in ch["note"]  # scan position 3, listed frame 4
    assert r["incomplete_frames"] == [3]


def test_resolution_floor_depends_on_each_frames_grid():
    # kappa chosen so that the last pair (d = 0.42 bohr) differs by ~6e-6:
    # resolved on a 0.1 bohr grid (floor 3e-6), not on a 0.2 bohr grid (4.8e-5).
    fine = S.ring_opening_scan(kappa=1e-3)
    (ch,) = track_scan(fine)["changes"]
    assert ch["mechanism"] == "fold" and ch["resolution"]["resolved"]
    coarse = S.ring_opening_scan(kappa=1e-3)
    coarse[2]["grid"]["spacing_bohr"] = [0.2, 0.2, 0.2]
    (ch,) = track_scan(coarse)["changes"]
    assert ch["resolution"]["spacing_bohr"] == [0.2, 0.1]
    # below the floor the mechanism is kept (read from the approach) and the
    # change says it is limited by the grid (issue 11)
    assert not ch["resolution"]["resolved"] and ch["mechanism"] == "fold"
    assert ch["resolution_limited"] is True
    assert "below the resolution floor" in ch["note"]


def test_printed_precision_limits_the_floor():
    frames = S.ring_opening_scan(kappa=1e-3)     # pair rho ~ 0.08, drho ~ 6e-6
    for f in frames:
        f["grid"]["significant_digits"] = 3       # steps of 1e-4 at rho ~ 0.08
    (ch,) = track_scan(frames)["changes"]
    assert ch["mechanism"] == "fold" and ch["resolution_limited"] is True
    (ch,) = track_scan(frames, settings=TrackingSettings(printed_digits=3))["changes"]
    assert ch["mechanism"] == "fold" and ch["resolution_limited"] is True


def test_returning_structure_reuses_its_number():
    fwd = S.conflict_scan(n=4, s_switch=1.5)
    back = copy.deepcopy(fwd[:3][::-1])
    for i, f in enumerate(back):
        f["value"] = 4.0 + i
    r = track_scan(fwd + back)
    # frames: fwd 0 1 | 2 3, then copies of fwd 2 | 1 0
    assert [f["structure"] for f in r["frames"]] == [1, 1, 2, 2, 2, 1, 1]
    assert [c["between"] for c in r["changes"]] == [[1, 2], [4, 5]]
    assert [c["structures"] for c in r["changes"]] == [[1, 2], [2, 1]]


def test_unpartnered_death_is_unresolved():
    frames = S.conflict_scan()
    for f in frames[3:]:
        f["critical_points"] = [cp for cp in f["critical_points"] if cp["id"] != "b2"]
        f["bond_paths"] = [p for p in f["bond_paths"] if p["cp"] != "b2"]
    (ch,) = track_scan(frames)["changes"]
    assert ch["mechanism"] == "unresolved" and "without a fold partner" in ch["note"]
    assert [e["kind"] for e in ch["events"]] == ["bond_broken"]


def test_early_warning_before_a_fold_and_honest_without_one():
    r = track_scan(S.ring_opening_scan())
    (w,) = r["early_warnings"]
    assert w["track"] == "bond-3" and w["change_between"] == [2, 3]
    assert "nearest_ring_bohr" in w["indicators"]
    # d^2 is linear in s with its zero at s* = 2.5 by construction
    assert w["projected"]["nearest_ring_bohr"] == pytest.approx(2.5)
    truncated = track_scan(S.ring_opening_scan()[:3])
    assert truncated["changes"] == []
    (w,) = truncated["early_warnings"]
    assert w["change_between"] is None and "no structural change" in w["message"]
    assert track_scan(S.conflict_scan())["early_warnings"] == []


def test_bond_series_reports_indicators():
    r = track_scan(S.ring_opening_scan())
    (b3,) = [s for s in r["bond_tracks"] if s["track"] == "bond-3"]
    assert b3["frames"] == [0, 1, 2]
    d = np.array(b3["nearest_ring_bohr"])
    assert np.allclose(d, 0.6 * np.sqrt(2.5 - np.arange(3)))


def test_output_is_deterministic_and_input_untouched():
    frames = S.ring_opening_scan()
    before = json.dumps(frames, sort_keys=True)
    a = json.dumps(track_scan(frames), sort_keys=True)
    b = json.dumps(track_scan(copy.deepcopy(frames)), sort_keys=True)
    assert a == b
    assert json.dumps(frames, sort_keys=True) == before


def test_bad_input():
    with pytest.raises(InputError):
        track_scan([])
    frames = S.conflict_scan()
    frames[2]["atoms"][2]["Z"] = 8
    with pytest.raises(ConsistencyError):
        track_scan(frames)
    frames = S.conflict_scan()
    frames[2]["value"] = frames[1]["value"]
    with pytest.raises(ConsistencyError):
        track_scan(frames)
    with pytest.raises(InputError):
        track_scan([{"value": 1.0}])


def test_kabsch_recovers_rotation_and_stays_proper():
    rng = np.random.default_rng(11)
    p = rng.normal(size=(7, 3))
    rot = S.random_rotation(rng)
    q = p @ rot.T + [1.0, -2.0, 0.5]
    r, t = kabsch(p, q)
    assert np.allclose(r, rot, atol=1e-10) and np.allclose(p @ r.T + t, q, atol=1e-10)
    mirror = p * [1, 1, -1]
    r2, _ = kabsch(mirror, p)
    assert np.linalg.det(r2) == pytest.approx(1.0)


def test_matching_gate_separates_far_jumps():
    frames = S.conflict_scan()
    # move bond CP b1 of frame 3 by 3 bohr: beyond the gate -> not the same point
    frames[3]["critical_points"][3]["position_bohr"][2] += 3.0
    r = track_scan(frames)
    t2 = {cp["id"]: cp["track"] for cp in r["frames"][2]["critical_points"]}
    t3 = {cp["id"]: cp["track"] for cp in r["frames"][3]["critical_points"]}
    assert t2["b1"] != t3["b1"]
    r2 = track_scan(frames, settings=TrackingSettings(match_gate=4.0))
    t2 = {cp["id"]: cp["track"] for cp in r2["frames"][2]["critical_points"]}
    t3 = {cp["id"]: cp["track"] for cp in r2["frames"][3]["critical_points"]}
    assert t2["b1"] == t3["b1"]


def test_open_bond_path_ends_do_not_break_tracking():
    frames = S.conflict_scan()
    frames[3]["bond_paths"][1]["atoms"] = [None, 3]
    frames[3]["bond_paths"][1]["complete"] = False
    r = track_scan(frames)
    # frame 3 differs only by its open path: both of its steps are unresolved
    # (not conflicts), and nothing claims a partner switch
    assert [c["between"] for c in r["changes"]] == [[2, 3], [3, 4]]
    for ch in r["changes"]:
        assert ch["mechanism"] == "unresolved"
        assert "does not reach an attractor" in ch["note"]
    assert not any(e["kind"] == "bond_switched" for c in r["changes"] for e in c["events"])


def test_separation_floor_marks_too_close_pairs_resolution_limited():
    # d = 0.01*sqrt(0.5) = 0.0071 bohr in frame 2, with a clear density difference
    frames = S.ring_opening_scan(c=0.01, kappa=1e5)
    (ch,) = track_scan(frames)["changes"]            # 0.1 bohr grid: floor 0.00125 bohr
    assert ch["mechanism"] == "fold"
    for f in frames:
        f["grid"]["spacing_bohr"] = [0.2, 0.2, 0.2]  # floor 0.01 bohr
    (ch,) = track_scan(frames)["changes"]
    (pair,) = ch["resolution"]["pairs"]
    assert pair["separation_bohr"] < pair["separation_floor_bohr"]
    assert pair["rho_difference"] > pair["rho_floor"]
    assert ch["mechanism"] == "fold" and ch["resolution_limited"] is True
    assert "separation" in ch["note"]


def test_periodic_cp_wrapping_across_the_cell_face_keeps_its_track():
    # SYNTHETIC periodic frames: a 4 bohr cubic cell; C1 and C2 sit near
    # opposite faces, bonded through the face, and drift by 0.04 bohr per
    # frame, so their bond CP wraps from x = 3.98 to x = 0.02.
    frames = []
    for k in range(4):
        d = 0.04 * k - 0.06
        p = np.array([[0.8 + d, 2.0, 2.0], [3.2 + d, 2.0, 2.0]])
        x = (4.0 + d) % 4.0
        f = S.frame(float(k), (6, 6), p, [S.bond_cp("b1", [x, 2.0, 2.0], (1, 2))], spacing=0.1)
        f["grid"].update({"periodic": True, "shape": [40, 40, 40],
                          "axes_bohr": [[0.1, 0, 0], [0, 0.1, 0], [0, 0, 0.1]]})
        frames.append(f)
    r = track_scan(frames)
    assert r["changes"] == []
    # raw distance 3.96 bohr across the face, far beyond the gate: only the
    # minimum image keeps one track
    assert {f["critical_points"][2]["track"] for f in r["frames"]} == {"bond-1"}


def _nna_scan():
    """SYNTHETIC: two Li atoms with a non-nuclear attractor between them in
    frames 0-2 (bond paths Li1-a1 and a1-Li2); the attractor and one bond CP
    annihilate between frames 2 and 3, leaving one Li1-Li2 bond path."""
    S.ELEMENTS.setdefault(3, "Li")
    frames = []
    for s in range(5):
        p = np.array([[0.0, 0, 0], [5.0 - 0.1 * s, 0, 0]])
        mid = 0.5 * (p[0] + p[1])
        if s < 3:
            d = 0.5 * np.sqrt(2.5 - s)
            nna = {"id": "a1", "kind": "non_nuclear", "rank": 3, "signature": -3,
                   "position_bohr": [float(x) for x in mid + [d, 0, 0]], "rho": 0.011,
                   "laplacian": -0.01, "eigenvalues": [-0.01, -0.005, -0.001],
                   "ellipticity": None, "atoms": []}
            cps = [nna, S.bond_cp("b1", mid - [0.5, 0, 0], (1, "a1"), rho=0.010),
                   S.bond_cp("b2", mid + [2 * d, 0, 0], ("a1", 2), rho=0.0105)]
        else:
            cps = [S.bond_cp("b1", mid - [0.3, 0, 0], (1, 2), rho=0.010)]
        frames.append(S.frame(float(s), (3, 3), p, cps))
    return frames


def test_attractor_fold_with_its_path_rerouted_is_a_fold():
    r = track_scan(_nna_scan())
    (ch,) = r["changes"]
    assert ch["between"] == [2, 3] and ch["mechanism"] == "fold"
    kinds = sorted(e["kind"] for e in ch["events"])
    assert kinds == ["attractor_lost", "bond_broken", "bond_switched"]
    (sw,) = [e for e in ch["events"] if e["kind"] == "bond_switched"]
    assert sw["atoms_before"] == [1, "nna-1"] and sw["atoms_after"] == [1, 2] and sw["by_fold"]
    assert describe_change(Change.from_dict(ch), ["Li", "Li"]) == (
        "bond path Li2–nna-1 broken; bond path Li1–nna-1 switched to Li1–Li2; "
        "non-nuclear attractor lost")


def test_fold_and_switch_in_one_step_is_mixed():
    frames = S.ring_opening_scan()
    conflict = S.conflict_scan()
    # add a fourth atom H4 far from the ring, its path switching from C1 to C2
    for k, (f, g) in enumerate(zip(frames, conflict)):
        h = np.array(g["atoms"][2]["position_bohr"]) + [0.0, -8.0, 0.0]
        f["atoms"].append({"number": 4, "element": "H", "Z": 1, "position_bohr": list(h)})
        f["critical_points"].append({**S.bond_cp("b9", [0, 0, 0], ()), "id": "n4",
                                     "kind": "nuclear", "position_bohr": list(h), "atoms": [4]})
        to = 1 if k < 2.5 else 2
        q = np.array(f["atoms"][to - 1]["position_bohr"])
        f["critical_points"].append(S.bond_cp("b9", 0.5 * (q + h), (to, 4), rho=0.02))
        f["bond_paths"].append({"cp": "b9", "atoms": [to, 4]})
    (ch,) = track_scan(frames)["changes"]
    assert ch["mechanism"] == "mixed"
    assert sorted(e["kind"] for e in ch["events"]) == ["bond_broken", "bond_switched", "ring_lost"]


def test_cp_ids_and_order_within_frames_do_not_matter():
    frames = S.ring_opening_scan()
    ref = track_scan(frames)
    renamed = []
    for k, f in enumerate(frames):
        g = copy.deepcopy(f)
        ren = {cp["id"]: f"x{k}_{i}" for i, cp in enumerate(g["critical_points"])
               if cp["kind"] != "nuclear"}
        for cp in g["critical_points"]:
            cp["id"] = ren.get(cp["id"], cp["id"])
        for p in g["bond_paths"]:
            p["cp"] = ren[p["cp"]]
        g["critical_points"] = g["critical_points"][:3] + g["critical_points"][3:][::-1]
        renamed.append(g)
    got = track_scan(renamed)

    def essence(r):
        return [(c["between"], c["mechanism"],
                 sorted((e["kind"], tuple(e.get("atoms", ()))) for e in c["events"]))
                for c in r["changes"]]

    assert essence(got) == essence(ref)
    # the annihilating bond CP keeps one track through its renamed ids
    b = [{cp["track"] for cp in f["critical_points"] if cp["kind"] == "bond" and
          cp["atoms"] == [1, 3]} for f in got["frames"][:3]]
    assert len(set.union(*b)) == 1
