"""The demo scans give their expected events and mechanisms through ``analyze``.

The cyclopropane (promolecule) demo is checked on four of its frames in
test_analyze_cli.py (fold: C1-C2 bond path broken, ring CP lost, bracket
holding the fold located on the analytic model field).  Here: the PySCF
vinylidene demo around its change, where the migrating hydrogen's bond path
switches from C1 to C2 with unchanged CP counts, i.e. a conflict.
"""

import json
import shutil
from pathlib import Path

import pytest
import yaml

from trackscan.cli import main

SCANS = Path(__file__).resolve().parents[2] / "scans"


@pytest.mark.slow
def test_vinylidene_demo_is_a_conflict(tmp_path, capsys):
    pytest.importorskip("pyscf")
    src = SCANS / "vinylidene-shift"
    work = tmp_path / "scan"
    work.mkdir()
    shutil.copy(src / "path.xyz", work)
    data = yaml.safe_load((src / "scan.yaml").read_text())
    data["frames"]["values"] = [0.4, 0.5, 0.6]
    (work / "scan.yaml").write_text(yaml.safe_dump(data))
    out = tmp_path / "out"
    assert main(["analyze", str(work / "scan.yaml"), "--out", str(out), "--jobs", "2"]) == 0
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
