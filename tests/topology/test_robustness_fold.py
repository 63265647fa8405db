"""Ring atoms next to a fold: the demo ring opening (promolecular model).

In ``scans/cyclopropane-opening`` the C1-C2 bond CP and the ring CP meet
and annihilate at 65.855 degrees (the scan's own comment, from Newton on the
analytic model).  Just before, the ring CP's smaller positive curvature is
almost zero and rays of the ring surface that reach C3 form a sliver a few
hundredths of a degree wide; the ring CP once listed only [1, 2] at 64
degrees.  Checked against an identity and an exact field: the boundary of
a ring surface is a ring of bond paths (Bader 1990, section 2.4), so a
three-membered ring lists the three atoms of the 3-cycle of bond paths,
both on the interpolated cube and on the analytic model itself.
"""

from __future__ import annotations

from pathlib import Path

import networkx as nx
import pytest

from trackscan.generators import make_generator
from trackscan.io.cube import read_cube
from trackscan.io.manifest import load_manifest
from trackscan.promolecule import Promolecule
from trackscan.topology import analyze_frame

SCAN = Path(__file__).resolve().parents[2] / "scans" / "cyclopropane-opening" / "scan.yaml"
ANGLES = [61.0, 64.0, 65.5, 65.8]        # all before the fold at 65.855 degrees


@pytest.fixture(scope="module")
def frames(tmp_path_factory):
    manifest = load_manifest(SCAN)
    gen = make_generator(manifest.generator, coordinate=manifest.coordinate)
    root = tmp_path_factory.mktemp("fold")
    out = {}
    for value in ANGLES:
        path = root / f"frame_{value:g}.cube"
        gen.generate(value, path)
        out[value] = read_cube(path)
    return out


def _three_cycle(topo):
    cycles = [c for c in nx.cycle_basis(nx.Graph(topo.graph)) if len(c) == 3]
    assert len(cycles) == 1, cycles
    return sorted(cycles[0])


@pytest.mark.parametrize("value", ANGLES)
def test_ring_cp_lists_all_three_ring_atoms_before_the_fold(frames, value):
    grid = frames[value]
    for field in (None, Promolecule(grid.numbers, grid.positions)):
        topo = analyze_frame(grid, field=field)
        assert topo.poincare_hopf["holds"]
        (ring,) = topo.by_kind("ring")
        assert sorted(ring.atoms) == _three_cycle(topo) == [1, 2, 3], (value, field, ring.atoms)
