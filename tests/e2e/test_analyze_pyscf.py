"""Acceptance: ``trackscan analyze`` against an independent analytic reference.

Densities come from small PySCF calculations (RHF/STO-3G).  For every frame
the test computes the molecular graph on PySCF's ANALYTIC density (Newton on
the analytic derivatives and RK4 path tracing, tests/tracking/
analytic_reference.py, separate from the product's grid code) and derives
the changes of the scan from those graphs alone.  The product reads only the
cube files written from the same density matrices and must find the same
changes in the same brackets.

Scans:
* ozone, closing the O2-O1-O3 angle at fixed O-O = 2.5 bohr: the O2-O3 bond
  path and a ring CP appear together (a fold) between 76 and 68 degrees;
* the same scan with the molecule rotated differently in every frame;
* ozone symmetric stretch at a fixed angle of 116.8 degrees (false-positive
  control): no change.
"""

import importlib.util
import json
from pathlib import Path

import numpy as np
import pytest
import yaml

pyscf = pytest.importorskip("pyscf")

from trackscan.cli import main  # noqa: E402
from trackscan.io.cube import write_cube  # noqa: E402

_spec = importlib.util.spec_from_file_location(
    "analytic_reference", Path(__file__).resolve().parents[1] / "tracking" / "analytic_reference.py")
ref = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(ref)

pytestmark = pytest.mark.slow

SPACING = 0.15
MARGIN = 3.0
OZONE_ANGLES = [60.0, 68.0, 76.0, 86.0, 100.0]
STRETCH_R = [2.2, 2.4, 2.6, 2.8]


def _ozone(angle, rot=None, shift=0.0, r=2.5):
    t = np.radians(angle / 2)
    pos = np.array([[0, 0, 0], [r * np.sin(t), -r * np.cos(t), 0], [-r * np.sin(t), -r * np.cos(t), 0]])
    if rot is not None:
        pos = pos @ rot.T + shift
    return [("O", p) for p in pos]


def _frame(atoms, path, *, reference=True):
    """SCF, cube file and (optionally) analytic reference graph of one geometry."""
    mol, dm, grid = ref.scf_density_grid(atoms, basis="sto-3g", spacing=SPACING, margin=MARGIN)
    pos = grid.positions
    write_cube(path, grid)
    if not reference:
        return None
    graph = ref.molecular_graph(ref.AnalyticDensity(mol, dm), pos)
    assert graph["poincare_hopf"] == 1, graph
    return graph


def _rotation(k):
    rng = np.random.default_rng(40 + k)
    q, r = np.linalg.qr(rng.normal(size=(3, 3)))
    q = q * np.sign(np.diag(r))
    return q if np.linalg.det(q) > 0 else -q


def _write_manifest(path, name, label, unit, frames):
    data = {"name": name, "coordinate": {"label": label, "unit": unit},
            "frames": [{"file": str(f), "value": v} for f, v in frames]}
    path.write_text(yaml.safe_dump(data))
    return path


@pytest.fixture(scope="module")
def ozone(tmp_path_factory):
    root = tmp_path_factory.mktemp("ozone")
    graphs, frames, rot_frames = [], [], []
    for k, a in enumerate(OZONE_ANGLES):
        f = root / f"o3_{k}.cube"
        graphs.append(_frame(_ozone(a), f))
        frames.append((f, a))
        # the analytic graph does not depend on the orientation: no reference needed
        fr = root / f"o3_rot_{k}.cube"
        _frame(_ozone(a, _rotation(k), 2.0 * k), fr, reference=False)
        rot_frames.append((fr, a))
    listed = [frames[i] for i in (3, 0, 4, 2, 1)]
    return {
        "root": root, "graphs": graphs,
        "plain": _write_manifest(root / "o3.yaml", "ozone", "O2-O1-O3 angle", "degree", listed),
        "rotated": _write_manifest(root / "o3r.yaml", "ozone-rotated", "O2-O1-O3 angle",
                                   "degree", rot_frames),
    }


def _run(manifest, out):
    assert main(["analyze", str(manifest), "--out", str(out), "--no-report"]) == 0
    return json.loads((out / "scan.json").read_text(encoding="utf-8"))


@pytest.fixture(scope="module")
def ozone_scan(ozone):
    return _run(ozone["plain"], ozone["root"] / "out")


def test_ozone_matches_analytic_reference(ozone, ozone_scan):
    expected = ref.expected_changes(OZONE_ANGLES, ozone["graphs"])
    # the reference itself sees the ring open between 68 and 76 degrees
    assert [e["between"] for e in expected] == [[1, 2]]
    assert expected[0]["broken"] == [(2, 3)] and expected[0]["rings"] == -1
    scan = ozone_scan
    assert all(f["poincare_hopf"]["holds"] for f in scan["frames"])
    assert ref.found_changes(scan) == expected
    (ch,) = scan["changes"]
    assert ch["mechanism"] == "fold"
    assert ch["bracket"] == [68.0, 76.0]
    # frame graphs agree with the reference frame by frame
    for f, g in zip(scan["frames"], ozone["graphs"]):
        assert sorted(tuple(sorted(p["atoms"])) for p in f["bond_paths"]) == g["bonds"]
        assert f["counts"]["ring"] == g["counts"]["ring"]


def test_rotated_ozone_gives_same_changes(ozone, ozone_scan):
    plain = ozone_scan
    rotated = _run(ozone["rotated"], ozone["root"] / "out-rot")
    assert ref.found_changes(rotated) == ref.found_changes(plain)
    assert [c["mechanism"] for c in rotated["changes"]] == [c["mechanism"] for c in plain["changes"]]


def test_symmetric_stretch_has_no_change(tmp_path):
    graphs, frames = [], []
    for k, r in enumerate(STRETCH_R):
        f = tmp_path / f"stretch_{k}.cube"
        graphs.append(_frame(_ozone(116.8, r=r), f))
        frames.append((f, r))
    # reference: the same two O-O bond paths in every frame
    assert all(g["bonds"] == [(1, 2), (1, 3)] for g in graphs)
    assert ref.expected_changes(STRETCH_R, graphs) == []
    m = _write_manifest(tmp_path / "stretch.yaml", "ozone-stretch", "O1-O2 = O1-O3 distance",
                        "bohr", frames)
    scan = _run(m, tmp_path / "out")
    assert scan["changes"] == []
    assert len(scan["structures"]) == 1
