"""The typed scan model reads and writes the JSON contract without loss."""

import json
from pathlib import Path

import pytest

from trackscan.analysis.scanjson import dumps_scan
from trackscan.model import Change, CriticalPoint, Frame, ScanFormatError, ScanResult

GOLDEN = Path(__file__).resolve().parents[1] / "golden"


@pytest.mark.parametrize("name", ["cyclopropane-demo", "cyclopropane-refine",
                                  "vinylidene-analyze"])
def test_round_trip_is_byte_identical(name):
    text = (GOLDEN / f"{name}.json").read_text(encoding="utf-8")
    scan = ScanResult.from_dict(json.loads(text))
    assert len(scan.frames) >= 3 and len(scan.changes) == 1
    assert dumps_scan(scan.to_dict()) == text


def test_typed_fields_and_views():
    data = json.loads((GOLDEN / "cyclopropane-demo.json").read_text(encoding="utf-8"))
    scan = ScanResult.from_dict(data)
    (change,) = scan.changes
    assert change.mechanism == "fold"
    pairs = change.fold_pairs()
    assert len(pairs) == 1
    kinds = sorted(e.kind for e in pairs[0])
    assert kinds == ["bond_broken", "ring_lost"]
    before, after = scan.change_frames(change)
    assert before.counts["ring"] == 1 and after.counts["ring"] == 0
    assert before.positions.shape == (len(before.atoms), 3)
    assert all(isinstance(cp, CriticalPoint) for cp in before.critical_points)
    assert "frames" in repr(scan)


def test_unknown_keys_are_kept():
    data = json.loads((GOLDEN / "vinylidene-analyze.json").read_text(encoding="utf-8"))
    data["frames"][0]["core_model"] = [{"atom": 1, "missing_electrons": 28}]
    data["changes"][0]["future_key"] = {"a": [1, 2]}
    back = ScanResult.from_dict(data).to_dict()
    assert back["frames"][0]["core_model"] == [{"atom": 1, "missing_electrons": 28}]
    assert back["changes"][0]["future_key"] == {"a": [1, 2]}


@pytest.mark.parametrize("mutate, where", [
    (lambda d: d["frames"][1]["critical_points"][2].update(kind="saddle"),
     "frames[1].critical_points[2].kind"),
    (lambda d: d["frames"][0].pop("atoms"), "frames[0].atoms: missing"),
    (lambda d: d["changes"][0].update(mechanism="maybe"), "changes[0].mechanism"),
    (lambda d: d["changes"][0]["events"][0].update(kind="bond_bent"), "changes[0].events[0].kind"),
    (lambda d: d.update(frames={}), "frames: expected a list"),
    (lambda d: d.pop("scan"), "scan: missing"),
])
def test_errors_name_the_key_path(mutate, where):
    data = json.loads((GOLDEN / "vinylidene-analyze.json").read_text(encoding="utf-8"))
    mutate(data)
    with pytest.raises(ScanFormatError, match=where.replace("[", r"\[").replace("]", r"\]")):
        ScanResult.from_dict(data)


def test_objects_are_frozen():
    data = json.loads((GOLDEN / "vinylidene-analyze.json").read_text(encoding="utf-8"))
    frame = Frame.from_dict(data["frames"][0], "frames[0]")
    with pytest.raises(AttributeError):
        frame.value = 3.0
    change = Change.from_dict(data["changes"][0])
    assert isinstance(change.events, tuple) and isinstance(change.bracket, tuple)
