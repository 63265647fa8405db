"""``trackscan refine --suggest``: values to compute elsewhere, with geometries.

The scan's frames are cube files (written here from the model) and the
manifest has a geometry drive but no density source.  The suggested XYZ
files are read back with ASE's reader (outside the project) and the driven
H1-H3 distance measured on them must equal the printed value.
"""

import importlib.util
import json
import re
from pathlib import Path

import numpy as np
import pytest

from trackscan.cli import main
from trackscan.io.cube import write_cube
from trackscan.io.manifest import load_manifest
from trackscan.promolecule import promolecule_grid
from trackscan.refine.scan import load_frames

ase_io = pytest.importorskip("ase.io")

_spec = importlib.util.spec_from_file_location(
    "fold_model", Path(__file__).with_name("fold_model.py"))
fm = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(fm)


def test_suggest_writes_geometries_at_the_proposed_values(tmp_path, capsys):
    folder = tmp_path / "scan"
    (folder / "cubes").mkdir(parents=True)
    frames = []
    for s in (2.6, 2.7, 2.8, 2.9, 3.0):
        name = f"cubes/h3_{s:.1f}.cube"
        write_cube(folder / name, promolecule_grid([1, 1, 1], fm.positions(s), spacing=0.2,
                                                   margin=1.6))
        frames.append((name, s))
    manifest = fm.write_scan(folder, None, frames=frames, density=False)
    out = tmp_path / "out"
    assert main(["refine", str(manifest), "--suggest", "--tolerance", "1e-3", "--jobs", "2",
                 "--out", str(out)]) == 0
    text = capsys.readouterr().out
    rows = re.findall(r"^\s+(\d+\.\d+) bohr\s+(\S+)\s+(\S+\.xyz)$", text, re.M)
    assert len(rows) == 2, text
    for value, method, xyz in rows:
        assert 2.8 < float(value) < 2.9              # inside the only change bracket
        atoms = ase_io.read(xyz, format="xyz")
        d = np.linalg.norm(atoms.positions[2] - atoms.positions[0]) / fm.BOHR_IN_ANGSTROM
        assert d == pytest.approx(float(value), abs=2e-6)
        # the fixed atoms stay where they were
        assert np.linalg.norm(atoms.positions[1] - atoms.positions[0]) / fm.BOHR_IN_ANGSTROM \
            == pytest.approx(fm.H1H2, abs=1e-6)
    listed = json.loads((out / "suggested" / "suggested.json").read_text())["suggestions"]
    assert sorted(s["value"] for s in listed) == sorted(float(v) for v, _, _ in rows)
    # the researcher computes the two densities and adds the cubes: the next
    # suggestions lie in the narrowed bracket, which still holds s*
    s_star = fm.solve_fold(fm.DEATH_GUESS)
    for value, _, _ in rows:
        name = f"cubes/new_{value}.cube"
        write_cube(folder / name, promolecule_grid([1, 1, 1], fm.positions(float(value)),
                                                   spacing=0.2, margin=1.6))
        frames.append((name, float(value)))
    fm.write_scan(folder, None, frames=frames, density=False)
    assert main(["refine", str(manifest), "--suggest", "--tolerance", "1e-3", "--jobs", "2",
                 "--out", str(out)]) == 0
    again = re.findall(r"^\s+(\d+\.\d+) bohr", capsys.readouterr().out, re.M)
    done = sorted(float(v) for v, _, _ in rows)
    lo = max([v for v in done if v < s_star], default=2.8)
    hi = min([v for v in done if v > s_star], default=2.9)
    assert again and all(lo < float(v) < hi for v in again)
    assert hi - lo < 0.05
    # and the added frames are known as the suggestions they answer
    _, frames_now = load_frames(load_manifest(manifest), cache_dir=out / ".cache",
                                suggested_dir=out / "suggested")
    answered = sorted(f.value for f in frames_now if f.refine is not None)
    assert answered == done
    # without --suggest a geometry-only manifest cannot compute frames: one-line error
    assert main(["refine", str(manifest), "--tolerance", "1e-3", "--out", str(out)]) == 2
    assert "--suggest" in capsys.readouterr().err
