"""Output folders and the hand-over between analyze, refine and report.

- trackscan never writes into a folder holding files it did not write;
- analysing a refined scan again keeps refinement's estimates and counts;
- analyze writes the report beside scan.json.
"""

import importlib.util
import json
from pathlib import Path

from trackscan.cli import main
from trackscan.io.output import MARKER

_spec = importlib.util.spec_from_file_location(
    "fold_model", Path(__file__).parents[1] / "refine" / "fold_model.py")
fm = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(fm)

VALUES = [2.7, 2.8, 2.9, 3.0]


def test_foreign_output_folder_is_refused(tmp_path, capsys):
    manifest = fm.write_scan(tmp_path / "scan", VALUES, spacing=0.2)
    out = tmp_path / "thesis"
    out.mkdir()
    (out / "report.html").write_text("my own notes")
    assert main(["analyze", str(manifest), "--out", str(out)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "did not write" in err[0] and "thesis" in err[0]
    assert sorted(p.name for p in out.iterdir()) == ["report.html"]
    assert (out / "report.html").read_text() == "my own notes"
    assert not (tmp_path / "scan" / "frames").exists()     # nothing generated either


def test_refined_scan_analysed_again_keeps_estimates(tmp_path, capsys):
    manifest = fm.write_scan(tmp_path / "scan", VALUES, spacing=0.2)
    out = tmp_path / "out"
    assert main(["refine", str(manifest), "--tolerance", "0.05", "--out", str(out),
                 "--no-report"]) == 0
    coarse = json.loads((out / "scan.json").read_text())
    assert not (out / "report.html").exists()
    assert main(["refine", str(manifest), "--tolerance", "1e-3", "--out", str(out),
                 "--no-report"]) == 0
    refined = json.loads((out / "scan.json").read_text())
    # a frame keeps its name when refinement adds frames (issue 14): listed frames
    # 1..N and the frames the first refinement computed, r1.., name the same values
    named = {f["label"]: f["value"] for f in coarse["frames"]}
    renamed = {f["label"]: f["value"] for f in refined["frames"]}
    assert len(renamed) > len(named) > len(VALUES)
    assert {k: renamed[k] for k in named} == named
    assert [f["label"] for f in refined["frames"] if f.get("refine") is None] == [
        str(n) for n in range(1, len(VALUES) + 1)]
    (ch,) = refined["changes"]
    lo, hi = (next(f for f in refined["frames"] if f["index"] == k) for k in ch["between"])
    assert ch["between_labels"] == [lo["label"], hi["label"]]
    assert (out / MARKER).is_file()
    assert main(["analyze", str(manifest), "--out", str(out)]) == 0
    again = json.loads((out / "scan.json").read_text())
    assert refined["changes"], "the model has a fold inside the scan"
    for a, b in zip(refined["changes"], again["changes"]):
        assert b["bracket"] == a["bracket"]
        assert b["evaluations"] == a["evaluations"] > 0
        assert b["estimate_method"] == a["estimate_method"] != "bracket-midpoint"
        assert b["estimate"] == a["estimate"]
    # the report was written by analyze, and it finds the cubes through scan.manifest
    assert (out / "report.html").is_file()
    assert again["scan"]["manifest"] == "../scan/scan.yaml"
    assert "cube not found" not in (out / "report.md").read_text()
    # --no-report: scan.json only, and the report of the earlier run goes (it would
    # describe another result); a file the researcher put there stays
    (out / "my_sketch.png").write_bytes(b"not trackscan's")
    report_files = {p.name for p in out.iterdir()} - {"scan.json", "my_sketch.png", MARKER}
    assert {"report.html", "report.md", "changes.csv"} <= report_files
    capsys.readouterr()
    assert main(["-q", "analyze", str(manifest), "--out", str(out), "--no-report"]) == 0
    cap = capsys.readouterr()
    assert "removed the report of an earlier run" in cap.err
    assert "report.html" not in cap.out
    left = {p.name for p in out.iterdir()}
    assert not any(p.endswith((".html", ".md", ".csv", ".svg", ".pdf", ".xyz")) for p in left)
    assert "my_sketch.png" in left and (out / "my_sketch.png").read_bytes() == b"not trackscan's"
    assert json.loads((out / "scan.json").read_text()) == again
    assert main(["-q", "report", str(out)]) == 0 and (out / "report.html").is_file()
