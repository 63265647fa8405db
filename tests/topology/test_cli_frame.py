"""``trackscan frame`` end to end on a small cube file."""

from __future__ import annotations

import json

import numpy as np

from trackscan.cli import main
from trackscan.io.cube import write_cube
from trackscan.promolecule import promolecule_grid


def _water_cube(path):
    pos = np.array([[0.0, 0.0, 0.0], [1.43, 0.0, 1.11], [-1.43, 0.0, 1.11]])
    write_cube(path, promolecule_grid([8, 1, 1], pos, spacing=0.2, margin=2.5))
    return path


def test_frame_prints_table_and_writes_json(tmp_path, capsys):
    cube = _water_cube(tmp_path / "water.cube")
    out = tmp_path / "sub" / "frame.json"
    assert main(["frame", str(cube), "--json", str(out)]) == 0
    text = capsys.readouterr().out
    assert "Poincaré–Hopf: n - b + r - c = 3 - 2 + 0 - 0 = 1 (expected 1): holds" in text
    assert "O1-H2" in text and "bond" in text
    frame = json.loads(out.read_text())
    assert frame["counts"]["bond"] == 2 and frame["complete"] is True
    # a second run writes the same bytes
    first = out.read_bytes()
    assert main(["frame", str(cube), "--json", str(out)]) == 0
    assert out.read_bytes() == first


def test_frame_bad_input_exits_2(tmp_path, capsys):
    bad = tmp_path / "bad.cube"
    bad.write_text("not a cube\n")
    assert main(["frame", str(bad)]) == 2
    err = capsys.readouterr().err
    assert "bad.cube" in err and len(err.strip().splitlines()) == 1
    cube = _water_cube(tmp_path / "w.cube")
    assert main(["frame", str(cube), "--density-floor", "-1"]) == 2
