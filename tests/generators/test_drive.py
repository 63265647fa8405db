"""Geometry drives: rigid coordinate scans and trajectory interpolation."""

import numpy as np
import pytest
from scipy.spatial.transform import Rotation

from trackscan.errors import ConfigError, GeneratorError
from trackscan.generators.geometry import (
    CoordinateDrive, TrajectoryDrive, connectivity, kabsch_align, moving_fragment,
    value_from_comment,
)
from trackscan.io.xyz import XYZFrame
from trackscan.units import ANGSTROM_IN_BOHR

A = ANGSTROM_IN_BOHR

# propanol-like chain C1-C2-C3-O4 with hydrogens (angstrom; rough but bonded)
CHAIN = np.array([
    [0.000, 0.000, 0.000],    # 1 C
    [1.530, 0.000, 0.000],    # 2 C
    [2.040, 1.440, 0.000],    # 3 C
    [3.460, 1.480, 0.100],    # 4 O
    [-0.370, 1.020, 0.000],   # 5 H on C1
    [-0.370, -0.510, 0.890],  # 6 H on C1
    [1.900, -0.520, -0.890],  # 7 H on C2
    [1.690, 1.960, 0.890],    # 8 H on C3
    [3.780, 2.380, 0.150],    # 9 H on O4
])
Z_CHAIN = [6, 6, 6, 8, 1, 1, 1, 1, 1]


def _np_angle(p, i, j, k):
    a, b = p[i - 1] - p[j - 1], p[k - 1] - p[j - 1]
    return np.degrees(np.arccos(a @ b / np.linalg.norm(a) / np.linalg.norm(b)))


def _np_dihedral(p, i, j, k, l):
    # independent formula (atan2 form; IUPAC sign: positive = clockwise
    # looking along j->k, Blondel & Karplus, J. Comput. Chem. 17, 1132, 1996)
    b1, b2, b3 = p[j - 1] - p[i - 1], p[k - 1] - p[j - 1], p[l - 1] - p[k - 1]
    n1, n2 = np.cross(b1, b2), np.cross(b2, b3)
    return np.degrees(np.arctan2(np.cross(n1, n2) @ b2 / np.linalg.norm(b2), n1 @ n2))


@pytest.fixture
def chain():
    return XYZFrame(Z_CHAIN, CHAIN * A)


def test_connectivity_of_chain(chain):
    g = connectivity(chain.numbers, chain.positions)
    assert sorted(tuple(sorted(e)) for e in g.edges) == [
        (0, 1), (0, 4), (0, 5), (1, 2), (1, 6), (2, 3), (2, 7), (3, 8)]


def test_distance_drive_moves_side_of_last_atom(chain):
    d = CoordinateDrive(chain, "distance", [2, 3])
    assert d.moving == (3, 4, 8, 9)
    g = d.geometry(1.75)
    p = g.positions
    assert np.linalg.norm(p[2] - p[1]) / A == pytest.approx(1.75, abs=1e-8)
    fixed = [0, 1, 4, 5, 6]
    np.testing.assert_array_equal(p[fixed], chain.positions[fixed])
    # the moving fragment is translated rigidly
    moved = np.array(d.moving) - 1
    shift = p[moved] - chain.positions[moved]
    np.testing.assert_allclose(shift, np.broadcast_to(shift[0], shift.shape), atol=1e-12)
    assert "value=1.75" in g.comment


def test_distance_drive_reversed_atoms_moves_other_side(chain):
    d = CoordinateDrive(chain, "distance", [3, 2])
    assert d.moving == (1, 2, 5, 6, 7)


def test_angle_drive_reaches_value_and_is_rigid(chain):
    d = CoordinateDrive(chain, "angle", [1, 2, 3])
    for target in (60.0, 95.5, 150.0, 179.9):
        p = d.geometry(target).positions
        assert _np_angle(p, 1, 2, 3) == pytest.approx(target, abs=1e-8)
        np.testing.assert_array_equal(p[[0, 1, 4, 5, 6]], chain.positions[[0, 1, 4, 5, 6]])
        moved = np.array(d.moving) - 1
        d0 = np.linalg.norm(chain.positions[moved][:, None] - chain.positions[moved][None], axis=2)
        d1 = np.linalg.norm(p[moved][:, None] - p[moved][None], axis=2)
        np.testing.assert_allclose(d1, d0, atol=1e-10)
        # distance to the pivot is kept
        assert np.linalg.norm(p[2] - p[1]) == pytest.approx(
            np.linalg.norm(chain.positions[2] - chain.positions[1]), abs=1e-12)


def test_angle_drive_from_linear_start():
    lin = XYZFrame([6, 6, 6], np.array([[0, 0, 0], [1.3, 0, 0], [2.6, 0, 0]]) * A)
    d = CoordinateDrive(lin, "angle", [1, 2, 3])
    assert d.start_value == pytest.approx(180.0)
    assert _np_angle(d.geometry(120.0).positions, 1, 2, 3) == pytest.approx(120.0, abs=1e-8)


def test_dihedral_drive(chain):
    d = CoordinateDrive(chain, "dihedral", [1, 2, 3, 4])
    assert d.moving == (3, 4, 8, 9)
    for target in (-179.0, -60.0, 0.0, 60.0, 180.0):
        p = d.geometry(target).positions
        got = _np_dihedral(p, 1, 2, 3, 4)
        assert (got - target + 180) % 360 - 180 == pytest.approx(0.0, abs=1e-8)
        np.testing.assert_array_equal(p[[0, 1, 4, 5, 6]], chain.positions[[0, 1, 4, 5, 6]])


def test_units_bohr_and_radian(chain):
    d = CoordinateDrive(chain, "distance", [2, 3], unit="bohr")
    p = d.geometry(3.3).positions
    assert np.linalg.norm(p[2] - p[1]) == pytest.approx(3.3, abs=1e-10)
    a = CoordinateDrive(chain, "angle", [1, 2, 3], unit="radian")
    assert np.radians(_np_angle(a.geometry(2.0).positions, 1, 2, 3)) == pytest.approx(2.0, abs=1e-10)
    with pytest.raises(ConfigError):
        CoordinateDrive(chain, "angle", [1, 2, 3], unit="bohr")


def test_ring_bond_moves_only_last_atom_and_its_hydrogens():
    # cyclopropane, C1-C2 stretched: C2 and its two H move; C3 (in the ring) stays
    r, h = 1.51, 1.09
    c = np.array([[0, 0, 0], [r, 0, 0], [r / 2, r * np.sqrt(3) / 2, 0]])
    centre = c.mean(axis=0)
    pos = list(c)
    for k in range(3):
        out = (c[k] - centre) / np.linalg.norm(c[k] - centre)
        for s in (1, -1):
            pos.append(c[k] + h * (0.55 * out + s * 0.835 * np.array([0, 0, 1])))
    frame = XYZFrame([6, 6, 6, 1, 1, 1, 1, 1, 1], np.array(pos) * A)
    d = CoordinateDrive(frame, "distance", [1, 2])
    assert d.moving == (2, 6, 7)
    p = d.geometry(2.2).positions
    assert np.linalg.norm(p[1] - p[0]) / A == pytest.approx(2.2, abs=1e-8)


def test_explicit_move_list(chain):
    d = CoordinateDrive(chain, "distance", [2, 3], move=[3, 8])
    assert d.moving == (3, 8)
    p = d.geometry(1.9).positions
    np.testing.assert_array_equal(p[3], chain.positions[3])
    with pytest.raises(ConfigError, match="must include"):
        CoordinateDrive(chain, "distance", [2, 3], move=[2, 3])


def test_bad_drives(chain):
    with pytest.raises(ConfigError, match="1-based"):
        CoordinateDrive(chain, "distance", [1, 10])
    with pytest.raises(ConfigError, match="distinct"):
        CoordinateDrive(chain, "angle", [1, 1, 2])
    d = CoordinateDrive(chain, "angle", [1, 2, 3])
    with pytest.raises(GeneratorError):
        d.geometry(190.0)
    with pytest.raises(GeneratorError):
        CoordinateDrive(chain, "distance", [1, 2]).geometry(-1.0)


def test_moving_fragment_dihedral_in_ring_falls_back_to_last_atom():
    import networkx as nx
    g = nx.cycle_graph(6)          # ring 0..5
    g.add_edge(3, 6)               # a substituent on atom 3
    assert moving_fragment(g, "dihedral", [0, 1, 2, 3]) == [3, 6]


def test_kabsch_recovers_rotation():
    rng = np.random.default_rng(7)
    ref = rng.normal(size=(8, 3))
    rot = Rotation.random(random_state=3)
    mobile = rot.apply(ref) + np.array([1.0, -2.0, 0.5])
    np.testing.assert_allclose(kabsch_align(mobile, ref), ref, atol=1e-12)
    # cross-check against SciPy's own optimal rotation
    r_scipy, _ = Rotation.align_vectors(ref - ref.mean(0), mobile - mobile.mean(0))
    np.testing.assert_allclose(r_scipy.apply(mobile - mobile.mean(0)) + ref.mean(0),
                               kabsch_align(mobile, ref), atol=1e-10)


def test_value_from_comment():
    assert value_from_comment("value=1.25 scan point") == 1.25
    assert value_from_comment("step 3, value: -2e-1") == -0.2
    assert value_from_comment("  1.5 ") == 1.5
    assert value_from_comment("energy -76.3 Eh") is None
    assert value_from_comment("") is None


def test_trajectory_interpolates_after_alignment():
    rng = np.random.default_rng(11)
    p0 = rng.normal(size=(5, 3)) * 2
    p1 = p0 + rng.normal(size=(5, 3)) * 0.3
    rot = Rotation.random(random_state=5)
    # second frame as a QC code might write it: rotated and shifted
    f1 = XYZFrame([6, 1, 1, 8, 1], rot.apply(p1) + 3.0, "value=2.0")
    f0 = XYZFrame([6, 1, 1, 8, 1], p0, "value=1.0")
    t = TrajectoryDrive([f1, f0], [2.0, 1.0], source="traj.xyz")
    np.testing.assert_array_equal(t.geometry(1.0).positions, p0)
    aligned1 = kabsch_align(p1, p0)
    np.testing.assert_allclose(t.geometry(2.0).positions, aligned1, atol=1e-12)
    np.testing.assert_allclose(t.geometry(1.25).positions, 0.75 * p0 + 0.25 * aligned1,
                               atol=1e-12)
    # internal distances at the end frame are those of the file
    d = lambda p: np.linalg.norm(p[:, None] - p[None], axis=2)  # noqa: E731
    np.testing.assert_allclose(d(t.geometry(2.0).positions), d(p1), atol=1e-10)
    with pytest.raises(GeneratorError, match="outside"):
        t.geometry(2.5)
    assert "2 frames" in t.describe()


def test_trajectory_rejects_duplicates_and_other_atoms():
    a = XYZFrame([1, 1], [[0, 0, 0], [0, 0, 1.4]])
    b = XYZFrame([1, 1], [[0, 0, 0], [0, 0, 1.5]])
    with pytest.raises(ConfigError, match="share"):
        TrajectoryDrive([a, b], [1.0, 1.0])
    c = XYZFrame([1, 3], [[0, 0, 0], [0, 0, 1.5]])
    with pytest.raises(Exception, match="atom 2"):
        TrajectoryDrive([a, c], [1.0, 2.0])


def test_undefined_dihedral_is_an_error():
    # atoms 1-2-3 on a line: the dihedral 1-2-3-4 has no value to drive
    f = XYZFrame([6, 6, 6, 1], np.array([[0, 0, 0], [1.2, 0, 0], [2.4, 0, 0], [3, 1, 0]]) * A)
    with pytest.raises(GeneratorError, match="undefined"):
        CoordinateDrive(f, "dihedral", [1, 2, 3, 4]).geometry(30.0)
