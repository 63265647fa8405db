"""Reruns change nothing: the same command on the same inputs adds no frame
and writes byte-identical scan.json (issue 11); analyze after refine keeps
the refinement record; a scan never refined does not mention refinement."""

import json

import pytest

from trackscan.cli import main


def _frames(out):
    return sorted(p.name for p in (out / "input" / "frames").glob("*.cube"))


@pytest.mark.slow
def test_demo_twice_is_idempotent_and_analyze_keeps_the_record(tmp_path, capsys):
    out = tmp_path / "demo"
    assert main(["demo", "--out", str(out)]) == 0
    first, frames1 = (out / "scan.json").read_bytes(), _frames(out)
    scan = json.loads(first)
    assert scan["scan"]["refine"]["evaluations"] >= 1
    (change,) = scan["changes"]
    assert change["mechanism"] == "fold"
    u = change["uncertainty"]
    assert u["value"] <= u["half_width"] and u["source"] in ("bracket", "model", "resolution")
    assert main(["demo", "--out", str(out)]) == 0
    assert _frames(out) == frames1                      # no new frame the second time
    assert (out / "scan.json").read_bytes() == first    # byte-identical
    printed = capsys.readouterr().out
    assert "±" in printed and "fold" in printed

    # analyze of the refined manifest writes the same statement and keeps the record
    again = tmp_path / "again"
    assert main(["analyze", str(out / "input" / "scan.yaml"), "--out", str(again)]) == 0
    scan2 = json.loads((again / "scan.json").read_text())
    assert scan2["scan"]["refine"] == scan["scan"]["refine"]
    assert scan2["changes"] == scan["changes"]
    assert scan2["frames"] == scan["frames"]


@pytest.mark.slow
def test_never_refined_scan_does_not_mention_refinement(tmp_path):
    out = tmp_path / "plain"
    assert main(["demo", "--no-refine", "--out", str(out)]) == 0
    scan = json.loads((out / "scan.json").read_text())
    assert "refine" not in scan["scan"]
    assert scan["changes"] and all("refine" not in c for c in scan["changes"])
    assert all("refine" not in f for f in scan["frames"])
    for name in ("report.md", "report.html"):
        text = (out / name).read_text(encoding="utf-8").lower()
        assert "refinement narrowed" not in text
