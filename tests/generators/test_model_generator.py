"""Cubes of the built-in promolecular model, checked with ASE's cube reader."""

import numpy as np
import pytest

from trackscan.generators import make_generator
from trackscan.io.generator_config import parse_generator_config
from trackscan.promolecule import MODEL_LABEL, Promolecule

ase_cube = pytest.importorskip("ase.io.cube")


def test_promolecule_cube_read_by_ase(tmp_path):
    (tmp_path / "start.xyz").write_text("3\nHOF\nO 0 0 0\nH 0 0 0.97\nF 1.40 0 -0.36\n")
    cfg = parse_generator_config(
        {"geometry": {"xyz": "start.xyz", "drive": {"angle": [2, 1, 3]}},
         "promolecule": {"spacing": 0.25, "margin": 3.0}}, path=tmp_path / "scan.yaml")
    gen = make_generator(cfg)
    assert MODEL_LABEL in gen.describe()
    out = gen.generate(95.0, tmp_path / "frames" / "a.cube")
    # the one model-density signal: the cube's first comment line, which the
    # frame analysis turns into the frame's density_model flag
    assert out.path.read_text().splitlines()[0].startswith(MODEL_LABEL)
    with open(out.path) as fh:
        data = ase_cube.read_cube(fh)
    atoms, values, origin = data["atoms"], data["data"], data["origin"]
    # ASE returns positions and origin in angstrom; the density in e/bohr^3
    bohr = 0.529177210903
    geom = gen.geometry(95.0)
    np.testing.assert_allclose(atoms.get_positions() / bohr, geom.positions, atol=1e-6)
    np.testing.assert_array_equal(atoms.get_atomic_numbers(), [8, 1, 9])
    h = 0.25
    idx = np.array([[0, 0, 0], [7, 9, 11], [12, 13, 12]])
    pts = origin / bohr + idx * h
    expected = Promolecule(geom.numbers, geom.positions).value(pts)
    got = values[tuple(idx.T)]
    np.testing.assert_allclose(got, expected, rtol=1e-5)  # 6 significant digits in the file
    with open(out.path) as fh:
        assert fh.readline().strip() == MODEL_LABEL
    # the driven angle H-O-F of the geometry written beside the cube
    a, b = geom.positions[1] - geom.positions[0], geom.positions[2] - geom.positions[0]
    assert np.degrees(np.arccos(a @ b / np.linalg.norm(a) / np.linalg.norm(b))) == \
        pytest.approx(95.0, abs=1e-8)
    assert out.geometry.is_file()


def test_model_cube_is_labelled_in_frame_output(tmp_path, capsys):
    # a cube of the built-in model says so in `trackscan frame` and its JSON
    import json

    from trackscan.cli import main
    from trackscan.io.cube import write_cube
    from trackscan.promolecule import promolecule_grid

    grid = promolecule_grid([1, 1], [[0, 0, -0.7], [0, 0, 0.7]], spacing=0.2, margin=3.0)
    write_cube(tmp_path / "h2.cube", grid, comments=(MODEL_LABEL, "H2"))
    write_cube(tmp_path / "plain.cube", grid, comments=("density from elsewhere", ""))
    assert main(["frame", str(tmp_path / "h2.cube"), "--json", str(tmp_path / "h2.json")]) == 0
    assert "a model density" in capsys.readouterr().out
    assert json.loads((tmp_path / "h2.json").read_text())["grid"]["density_model"] == MODEL_LABEL
    assert main(["frame", str(tmp_path / "plain.cube"), "--json", str(tmp_path / "p.json")]) == 0
    assert "a model density" not in capsys.readouterr().out
    assert "density_model" not in json.loads((tmp_path / "p.json").read_text())["grid"]
