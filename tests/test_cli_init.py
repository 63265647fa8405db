"""`trackscan init`: a manifest for a folder of cubes, then `analyze` on it at once.

The frames are three promolecular C3 triangles with the C1-C2 distance set by
construction (the reference values); init must measure, sort and list them.
"""

import json

import numpy as np
import pytest
import yaml

from trackscan.cli import main
from trackscan.io.cube import write_cube
from trackscan.io.manifest import load_manifest
from trackscan.promolecule import promolecule_grid
from trackscan.units import ANGSTROM_IN_BOHR

DISTANCES = {"c.cube": 1.30, "a.cube": 1.50, "b.cube": 1.40}     # Å, names out of order


@pytest.fixture(scope="module")
def cubes(tmp_path_factory):
    root = tmp_path_factory.mktemp("init")
    (root / "cubes").mkdir()
    for name, d in DISTANCES.items():
        x = d * ANGSTROM_IN_BOHR / 2
        pos = [[-x, 0.0, 0.0], [x, 0.0, 0.0], [0.0, 1.2 * ANGSTROM_IN_BOHR, 0.0]]
        write_cube(root / "cubes" / name, promolecule_grid([6, 6, 6], pos, spacing=0.25,
                                                           margin=3.0))
    return root


def test_init_then_analyze_works_at_once(cubes, monkeypatch, capsys):
    work = cubes / "work1"
    work.mkdir()
    monkeypatch.chdir(work)
    assert main(["init", "../cubes", "--distance", "1", "2", "--name", "c3 stretch"]) == 0
    out = capsys.readouterr().out
    assert "wrote scan.yaml" in out and "3 frames" in out
    text = (work / "scan.yaml").read_text()
    assert text.startswith("# Scan manifest written by `trackscan init`")
    data = yaml.safe_load(text)
    assert data["name"] == "c3-stretch"
    assert data["coordinate"] == {"label": "distance C1-C2", "unit": "angstrom",
                                  "distance": [1, 2]}
    assert [f["file"] for f in data["frames"]] == ["../cubes/c.cube", "../cubes/b.cube",
                                                    "../cubes/a.cube"]
    assert [f["value"] for f in data["frames"]] == pytest.approx([1.30, 1.40, 1.50], abs=1e-6)
    m = load_manifest(work / "scan.yaml")          # listed values pass the measured check
    assert len(m.frames) == 3
    assert main(["analyze", "scan.yaml", "--out", "out"]) == 0
    scan = json.loads((work / "out" / "scan.json").read_text())
    assert [round(f["value"], 6) for f in scan["frames"]] == [1.3, 1.4, 1.5]
    assert all(f["poincare_hopf"]["holds"] for f in scan["frames"])


def test_init_never_overwrites_and_paths_follow_out(cubes, monkeypatch, capsys):
    work = cubes / "work2"
    (work / "defs").mkdir(parents=True)
    monkeypatch.chdir(work)
    files = [str(cubes / "cubes" / n) for n in DISTANCES]
    assert main(["init", *files, "--angle", "1", "3", "2", "--out", "defs/angle.yaml"]) == 0
    data = yaml.safe_load((work / "defs" / "angle.yaml").read_text())
    # the apex angle grows with C1-C2: 2 atan(d / 2 / 1.2)
    assert [f["file"] for f in data["frames"]] == [f"../../cubes/{n}.cube" for n in "cba"]
    assert data["frames"][0]["value"] == pytest.approx(2 * np.degrees(np.arctan(0.65 / 1.2)),
                                                       abs=1e-5)
    before = (work / "defs" / "angle.yaml").read_bytes()
    capsys.readouterr()
    code = main(["init", *files, "--angle", "1", "3", "2", "--out", "defs/angle.yaml"])
    err = capsys.readouterr().err.strip().splitlines()
    assert code == 2 and len(err) == 1 and "exists already" in err[0]
    assert (work / "defs" / "angle.yaml").read_bytes() == before


def test_init_bad_input_is_one_line(cubes, monkeypatch, capsys):
    monkeypatch.chdir(cubes)
    for args, text in [(["cubes", "--distance", "1", "9"], "atom 9 does not exist"),
                       (["nothing.cube", "--distance", "1", "2"], "no such cube file"),
                       (["cubes", "--distance", "1", "1"], "different atoms")]:
        code = main(["init", *args, "--out", "x.yaml"])
        err = capsys.readouterr().err.strip().splitlines()
        assert code == 2 and len(err) == 1 and text in err[0], err
    assert not (cubes / "x.yaml").exists()
