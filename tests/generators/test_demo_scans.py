"""The demo scans in scans/: they load, and show the change they promise."""

import json
import shutil
from pathlib import Path

import numpy as np
import pytest
import yaml
from scipy.optimize import fsolve

from trackscan.cli import main
from trackscan.generators import make_generator
from trackscan.io.manifest import load_manifest
from trackscan.promolecule import Promolecule

SCANS = Path(__file__).resolve().parents[2] / "scans"


def _fold_angle(gen, guess=65.85):
    """Angle where the C1-C2 bond CP meets the ring CP, on the exact model field.

    Solves grad rho = 0 and det(Hessian) = 0 for the position and the angle
    together (the degenerate critical point of the fold), with SciPy.
    """
    def equations(u):
        geo = gen.geometry(u[3])
        _, g, h = Promolecule(geo.numbers, geo.positions).evaluate(u[None, :3])
        return np.r_[g[0], np.linalg.det(h[0])] * 100.0

    p = gen.geometry(guess).positions
    start = 0.5 * (0.5 * (p[0] + p[1]) + p[:3].mean(axis=0))
    sol, info, ier, msg = fsolve(equations, np.r_[start, guess], full_output=True, xtol=1e-12)
    assert np.abs(equations(sol)).max() < 1e-10, msg
    return float(sol[3])


def test_demo_manifests_load():
    for name in ("cyclopropane-opening", "vinylidene-shift"):
        m = load_manifest(SCANS / name / "scan.yaml")
        assert m.generator is not None and len(m.frames) >= 9
        assert all(e.generated for e in m.frames)


def test_promolecule_demo_runs_and_finds_the_fold(tmp_path, capsys):
    out = tmp_path / "demo"
    assert main(["demo", "--out", str(out)]) == 0
    printed = capsys.readouterr().out
    assert "promolecular model" in printed and str(out) in printed
    scan = json.loads((out / "scan.json").read_text())
    assert "promolecular model" in scan["scan"]["density_source"]
    assert (out / "report.html").is_file()
    assert "promolecular model" in (out / "report.html").read_text(encoding="utf-8")
    assert all(f["poincare_hopf"]["holds"] for f in scan["frames"])
    folds = [c for c in scan["changes"] if c["mechanism"] == "fold"]
    assert len(folds) == 1
    # the bracket holds the fold located independently on the analytic field
    m = load_manifest(out / "input" / "scan.yaml")
    s_star = _fold_angle(make_generator(m.generator, coordinate=m.coordinate))
    assert 65.5 < s_star < 66.2
    lo, hi = sorted(folds[0]["bracket"])
    assert lo < s_star < hi
    # the demo refined the bracket (listed frames are 3 degrees apart)
    assert hi - lo <= 0.5 + 1e-9
    assert len(scan["frames"]) > 9            # 9 listed + the refinement frames


@pytest.mark.slow
def test_pyscf_demo_switches_partner(tmp_path):
    pytest.importorskip("pyscf")
    # the PySCF demo around its change only (4 of its 11 frames)
    src = SCANS / "vinylidene-shift"
    work = tmp_path / "scan"
    work.mkdir()
    shutil.copy(src / "path.xyz", work)
    data = yaml.safe_load((src / "scan.yaml").read_text())
    data["frames"]["values"] = [0.4, 0.5, 0.6, 0.7]
    (work / "scan.yaml").write_text(yaml.safe_dump(data))
    assert main(["analyze", str(work / "scan.yaml"), "--out", str(tmp_path / "out")]) == 0
    scan = json.loads((tmp_path / "out" / "scan.json").read_text())
    assert scan["scan"]["density_source"] == "PySCF RHF/6-31g"
    switched = [ev for c in scan["changes"] for ev in c["events"]
                if ev["kind"] == "bond_switched"]
    assert switched, scan["changes"]
    assert sorted(switched[0]["atoms_before"]) == [1, 4]
    assert sorted(switched[0]["atoms_after"]) == [2, 4]


def test_plane_demo_manifest_loads():
    m = load_manifest(SCANS / "h3-plane" / "scan.yaml")
    values = {e.values for e in m.frames}       # (refine runs may have added frames)
    assert m.dimensions == 2 and all(e.generated for e in m.frames)
    assert {(d, a) for d in (0.75, 0.9, 1.05, 1.2, 1.35)
            for a in (40.0, 50.0, 60.0, 70.0, 80.0)} <= values
    assert [c.kind for c in m.coordinates] == ["distance", "angle"]
