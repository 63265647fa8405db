"""The demo scans give their expected events and mechanisms through ``analyze``.

The cyclopropane (promolecule) demo is checked on four of its frames in
test_analyze_cli.py (fold: C1-C2 bond path broken, ring CP lost, bracket
holding the fold located on the analytic model field).  Here: the PySCF
vinylidene demo around its change, where the migrating hydrogen's bond path
switches from C1 to C2 with unchanged CP counts, i.e. a conflict.  The
expected change is also derived independently: HF/6-31G is recomputed in
the test at the demo's geometries and each frame's molecular graph is found
on the ANALYTIC density (tests/tracking/analytic_reference.py).
"""

import importlib.util
import json
import shutil
from pathlib import Path

import pytest
import yaml

from trackscan.cli import main
from trackscan.generators import make_generator
from trackscan.io.manifest import load_manifest

SCANS = Path(__file__).resolve().parents[2] / "scans"
_spec = importlib.util.spec_from_file_location(
    "analytic_reference", Path(__file__).resolve().parents[1] / "tracking" / "analytic_reference.py")
ref = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(ref)
VALUES = [0.4, 0.5, 0.6]


def _reference_graphs(manifest_path):
    from pyscf import gto, scf

    m = load_manifest(manifest_path)
    gen = make_generator(m.generator, coordinate=m.coordinate)
    graphs = []
    for v in VALUES:
        geo = gen.geometry(v)
        mol = gto.M(atom=[[int(z), tuple(p)] for z, p in zip(geo.numbers, geo.positions)],
                    basis="6-31g", unit="Bohr", verbose=0)
        mf = scf.RHF(mol)
        mf.conv_tol = 1e-10
        mf.kernel()
        assert mf.converged
        g = ref.molecular_graph(ref.AnalyticDensity(mol, mf.make_rdm1()), mol.atom_coords())
        assert g["poincare_hopf"] == 1
        graphs.append(g)
    return graphs


@pytest.mark.slow
def test_vinylidene_demo_is_a_conflict(tmp_path, capsys):
    pytest.importorskip("pyscf")
    src = SCANS / "vinylidene-shift"
    work = tmp_path / "scan"
    work.mkdir()
    shutil.copy(src / "path.xyz", work)
    data = yaml.safe_load((src / "scan.yaml").read_text())
    data["frames"]["values"] = VALUES
    (work / "scan.yaml").write_text(yaml.safe_dump(data))
    out = tmp_path / "out"
    assert main(["analyze", str(work / "scan.yaml"), "--out", str(out), "--jobs", "2",
                 "--no-report"]) == 0
    printed = capsys.readouterr().out
    scan = json.loads((out / "scan.json").read_text(encoding="utf-8"))
    assert all(f["poincare_hopf"]["holds"] for f in scan["frames"])
    (ch,) = scan["changes"]
    assert ch["mechanism"] == "conflict"
    assert [f["counts"] for f in scan["frames"]][0] == scan["frames"][-1]["counts"]
    (ev,) = ch["events"]
    assert ev["kind"] == "bond_switched"
    assert ev["atoms_before"] == [1, 4] and ev["atoms_after"] == [2, 4]
    # H2C=C (a carbon with two H) becomes HC-CH: the element-labelled graphs
    # are not isomorphic, so the structure type changes
    assert ch["structure_type_changed"] is True
    assert "bond path C1–H4 switched to C2–H4" in printed and "conflict" in printed
    # the analytic reference sees the same switch in the same bracket
    assert data["generator"]["pyscf"]["method"] == "HF"
    assert data["generator"]["pyscf"]["basis"].lower() == "6-31g"
    expected = ref.expected_changes(VALUES, _reference_graphs(work / "scan.yaml"))
    assert expected == [{"between": [1, 2], "bracket": [0.5, 0.6], "broken": [(1, 4)],
                         "formed": [(2, 4)], "rings": 0}]
    assert ref.found_changes(scan) == expected
