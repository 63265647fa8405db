"""The demo scans in scans/: they load, and show the change they promise."""

import json
import shutil
from pathlib import Path

import numpy as np
import pytest
import yaml

from trackscan.cli import main
from trackscan.generators import make_generator
from trackscan.io.manifest import load_manifest
from trackscan.promolecule import Promolecule

SCANS = Path(__file__).resolve().parents[2] / "scans"


def _newton(field, x, steps=300):
    for _ in range(steps):
        _, g, h = field.evaluate(x[None])
        step = np.linalg.solve(h[0], g[0])
        n = np.linalg.norm(step)
        x = x - (step if n < 0.02 else step * 0.02 / n)
        if np.linalg.norm(g[0]) < 1e-13:
            break
    return x, np.linalg.norm(g[0])


def _fold_angle(gen):
    """Angle where the C1-C2 bond CP meets the ring CP, on the exact model field.

    Follows both points by Newton from 60 degrees in small steps and
    bisects on their existence (they annihilate in a fold, so past s* Newton
    from the previous positions no longer finds two distinct points).
    """
    def pair(angle, xb, xr):
        geo = gen.geometry(angle)
        f = Promolecule(geo.numbers, geo.positions)
        b, gb = _newton(f, xb)
        r, gr = _newton(f, xr)
        ok = gb < 1e-10 and gr < 1e-10 and np.linalg.norm(b - r) > 1e-3
        return ok, b, r

    p = gen.geometry(60.0).positions
    xb, xr = 0.5 * (p[0] + p[1]), p[:3].mean(axis=0)
    lo = 60.0
    for a in np.arange(61.0, 70.0, 1.0):
        ok, b, r = pair(a, xb, xr)
        if not ok:
            hi = a
            break
        lo, xb, xr = a, b, r
    for _ in range(12):
        mid = 0.5 * (lo + hi)
        ok, b, r = pair(mid, xb, xr)
        if ok:
            lo, xb, xr = mid, b, r
        else:
            hi = mid
    return 0.5 * (lo + hi)


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
