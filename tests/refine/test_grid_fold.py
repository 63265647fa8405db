"""Acceptance on cubes: the model fold refined through ``trackscan refine``.

Same three-atom model as test_fold_acceptance.py, but every frame is a cube
file at 0.1 bohr spacing made by the manifest's promolecule generator and
analysed on the interpolated grid.  s* is solved on the analytic field with
SciPy (fold_model.solve_fold).

What the grid allows: at 0.1 bohr the interpolated field's own fold lies
within about 1e-5 bohr of the analytic s* (its gradient is off by about
1e-6 a.u. near the pair, and the pair's soft eigenvalue vanishes at the
fold, so the point positions -- and the last frame that still shows two
points -- shift).  A tolerance of 1e-4 bohr (1e-3 of the 0.1 bohr bracket)
keeps s* inside the bracket; at 1e-5 the bracket closes on the grid's fold
and may miss s* by a few 1e-6.
"""

import importlib.util
import json
from pathlib import Path

from trackscan.cli import main

_spec = importlib.util.spec_from_file_location(
    "fold_model", Path(__file__).with_name("fold_model.py"))
fm = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(fm)

TOL = 1e-4


def test_refine_cubes_at_0p1_bohr(tmp_path, capsys):
    s_star = fm.solve_fold(fm.DEATH_GUESS)
    manifest = fm.write_scan(tmp_path / "scan", [2.6, 2.7, 2.8, 2.9, 3.0], spacing=0.1,
                             margin=1.6)
    out = tmp_path / "out"
    assert main(["refine", str(manifest), "--tolerance", str(TOL), "--out", str(out)]) == 0
    text = capsys.readouterr().out
    assert "fold-extrapolation" in text
    scan = json.loads((out / "scan.json").read_text())
    (ch,) = scan["changes"]
    lo, hi = sorted(ch["bracket"])
    assert hi - lo <= TOL
    assert lo < s_star < hi
    assert ch["evaluations"] <= 5
    assert ch["refine"]["bisection_evaluations"] == 10
    assert abs(ch["estimate"] - s_star) <= hi - lo
    # every new frame is a cube on disk, recorded beside the frames
    record = json.loads((tmp_path / "scan" / "frames" / "record.json").read_text())["frames"]
    made = [r for r in record if "refine" in r]
    assert len(made) == ch["evaluations"] == scan["scan"]["refine"]["evaluations"]
    for r in made:
        assert (tmp_path / "scan" / "frames" / r["file"]).is_file()
    assert (out / "report.html").is_file()
    # a second run has nothing left to do and computes nothing
    assert main(["refine", str(manifest), "--tolerance", str(TOL), "--out", str(out),
                 "--no-report"]) == 0
    assert "0 new frame(s) this run" in capsys.readouterr().out
