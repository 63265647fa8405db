"""Acceptance: a biaryl twist (biphenyl, RHF/STO-3G) against the analytic reference.

In planar biphenyl the ortho hydrogens H2...H2' and H6...H6' are about 1.8 Å
apart and each pair is linked by a weak H...H bond path that closes a ring
with the inter-ring bond (Matta, Hernandez-Trujillo, Tang and Bader, Chem.
Eur. J. 9, 1940 (2003), :DOI:`10.1002/chem.200204626`; from memory).  As the
rings turn, each H...H bond CP meets its ring CP and both vanish (a fold), on
both sides at once by symmetry.

The frames are computed here with PySCF (RHF/STO-3G, an idealised geometry:
ring C-C 1.39 Å, inter-ring C-C 1.49 Å, C-H 1.08 Å; common values, from
memory, not optimised).  The reference molecular graph of every frame comes
from PySCF's ANALYTIC density (tests/tracking/analytic_reference.py); the
product reads only the cubes, through ``trackscan init`` (dihedral
C2-C1-C1'-C2' measured from the cubes) and ``trackscan analyze``.

Measured on the analytic density (this test's reference): the H...H paths are
present at 0, 12, 22 and 25 degrees and gone at 30.  Three frames, 12, 22 and
32 degrees, on a 0.25 bohr grid, show it.  CPU on one core: about 10 s per
frame for SCF, sampling and reference (plus the analysis), ~35 s in all.
"""

import importlib.util
import json
from pathlib import Path

import numpy as np
import pytest

pyscf = pytest.importorskip("pyscf")

from trackscan.cli import main  # noqa: E402
from trackscan.io.cube import write_cube  # noqa: E402
from trackscan.units import ANGSTROM_IN_BOHR  # noqa: E402

_spec = importlib.util.spec_from_file_location(
    "analytic_reference", Path(__file__).resolve().parents[1] / "tracking" / "analytic_reference.py")
ref = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(ref)

pytestmark = pytest.mark.slow

TWISTS = [12.0, 22.0, 32.0]       # degrees; listed to init out of order below
SPACING = 0.25
MARGIN = 2.5
HH_PAIRS = [(13, 18), (17, 22)]   # H on C2 / C2', H on C6 / C6' (1-based)
DIHEDRAL = ["2", "1", "7", "8"]   # C2-C1-C1'-C2'


def biphenyl(twist_deg):
    """Biphenyl along x with the rings turned by +-twist/2 about the inter-ring bond.

    Atoms: C1-C6 (ring 1, C1 ipso), C7-C12 (ring 2, C7 ipso), then the H of
    C2-C6 and of C8-C12.  Positions in bohr.
    """
    rcc, rinter, rch = 1.39, 1.49, 1.08
    carbons = []
    for s in (-1.0, 1.0):
        cx = s * (rinter / 2 + rcc)
        for m in range(6):
            a = np.radians(60 * m)
            carbons.append([cx - s * rcc * np.cos(a), rcc * np.sin(a), 0.0])
    carbons = np.array(carbons)
    hs = []
    for ring in (carbons[:6], carbons[6:]):
        centre = ring.mean(axis=0)
        for p in ring[1:]:
            u = (p - centre) / np.linalg.norm(p - centre)
            hs.append(p + rch * u)
    pos = np.vstack([carbons, hs])

    def rot(a):
        return np.array([[1, 0, 0], [0, np.cos(a), -np.sin(a)], [0, np.sin(a), np.cos(a)]])

    t = np.radians(twist_deg)
    one = list(range(0, 6)) + list(range(12, 17))
    two = list(range(6, 12)) + list(range(17, 22))
    pos[one] = pos[one] @ rot(-t / 2).T      # dihedral C2-C1-C7-C8 = +twist
    pos[two] = pos[two] @ rot(t / 2).T
    return [(s, p * ANGSTROM_IN_BOHR) for s, p in zip(["C"] * 12 + ["H"] * 10, pos)]


@pytest.fixture(scope="session")
def twist_scan(tmp_path_factory):
    root = tmp_path_factory.mktemp("biaryl")
    (root / "cubes").mkdir()
    graphs = []
    for k, twist in enumerate(TWISTS):
        mol, dm, grid = ref.scf_density_grid(biphenyl(twist), basis="sto-3g", spacing=SPACING,
                                             margin=MARGIN)
        write_cube(root / "cubes" / f"twist_{2 - k}.cube", grid)     # names out of scan order
        graph = ref.molecular_graph(ref.AnalyticDensity(mol, dm), grid.positions,
                                    seed_nuclei=True)
        assert graph["poincare_hopf"] == 1, graph
        graphs.append(graph)
    manifest = root / "scan.yaml"
    assert main(["init", str(root / "cubes"), "--dihedral", *DIHEDRAL, "--name", "biphenyl",
                 "--out", str(manifest)]) == 0
    assert main(["analyze", str(manifest), "--out", str(root / "out"), "--no-report"]) == 0
    scan = json.loads((root / "out" / "scan.json").read_text(encoding="utf-8"))
    return {"graphs": graphs, "scan": scan}


def test_reference_sees_both_hh_paths_vanish_together(twist_scan):
    graphs = twist_scan["graphs"]
    for g, present in zip(graphs, (True, True, False)):
        assert all((pair in g["bonds"]) == present for pair in HH_PAIRS)
    expected = ref.expected_changes(TWISTS, graphs)
    assert [e["between"] for e in expected] == [[1, 2]]
    assert expected[0]["broken"] == HH_PAIRS and expected[0]["rings"] == -2


def test_twist_gives_one_fold_with_both_hh_paths_and_rings(twist_scan):
    scan = twist_scan["scan"]
    assert [round(f["value"], 4) for f in scan["frames"]] == TWISTS    # measured by init
    assert all(f["poincare_hopf"]["holds"] for f in scan["frames"])
    expected = ref.expected_changes(TWISTS, twist_scan["graphs"])
    assert ref.found_changes(scan) == expected
    (ch,) = scan["changes"]
    assert ch["mechanism"] == "fold"
    assert ch["bracket"] == [22.0, 32.0]
    broken = sorted(tuple(sorted(e["atoms"])) for e in ch["events"] if e["kind"] == "bond_broken")
    assert broken == HH_PAIRS
    assert sum(e["kind"] == "ring_lost" for e in ch["events"]) == 2
    # frame graphs agree with the reference frame by frame
    for f, g in zip(scan["frames"], twist_scan["graphs"]):
        assert sorted(tuple(sorted(p["atoms"])) for p in f["bond_paths"]) == \
            sorted(tuple(sorted(b)) for b in g["bonds"])
        assert f["counts"]["ring"] == g["counts"]["ring"]
