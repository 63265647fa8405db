"""Cross-checks of the cube reader against outside references.

PySCF writes the density (RHF/6-31G* water) with its own cube writer
(``pyscf.tools.cubegen.density``); ASE's independent reader
(``ase.io.cube``) must agree with ours on values, atoms and geometry, and the
integral of the density must equal the electron count.
"""

import numpy as np
import pytest

from trackscan.io.cube import read_cube, write_cube
from trackscan.units import BOHR_IN_ANGSTROM

pyscf = pytest.importorskip("pyscf")
ase_cube = pytest.importorskip("ase.io.cube")

# Experimental water geometry, r(OH) = 0.9572 Å, angle 104.52° (common
# practice; METHODS.md section 4), in Å.
WATER = "O 0 0 0.1173; H 0 0.7572 -0.4692; H 0 -0.7572 -0.4692"


@pytest.fixture(scope="module")
def water_cube(tmp_path_factory):
    from pyscf import gto, scf
    from pyscf.tools import cubegen

    mol = gto.M(atom=WATER, basis="6-31g*", verbose=0)
    mf = scf.RHF(mol).run()
    assert mf.converged
    path = tmp_path_factory.mktemp("water") / "water.cube"
    cubegen.density(mol, str(path), mf.make_rdm1(), resolution=0.2, margin=4.0)
    return path, mol


def test_agrees_with_ase_reader(water_cube):
    path, mol = water_cube
    ours = read_cube(path)
    with open(path) as fh:
        ref = ase_cube.read_cube(fh)
    # ASE returns angstrom; ours is bohr.
    np.testing.assert_array_equal(ours.values, ref["data"])
    np.testing.assert_allclose(ours.origin * BOHR_IN_ANGSTROM, ref["origin"], atol=1e-6)
    np.testing.assert_allclose(ours.axes * BOHR_IN_ANGSTROM, ref["spacing"], atol=1e-6)
    np.testing.assert_allclose(ours.positions * BOHR_IN_ANGSTROM, ref["atoms"].positions, atol=1e-6)
    assert list(ours.numbers) == list(ref["atoms"].numbers)
    # and against PySCF's own geometry (bohr)
    np.testing.assert_allclose(ours.positions, mol.atom_coords(), atol=1e-5)


def test_electron_count(water_cube):
    path, _ = water_cube
    grid = read_cube(path)
    assert np.all(grid.spacing < 0.21)
    # Riemann sum at ~0.2 bohr spacing: 10 electrons within 1 %.
    assert grid.integral() == pytest.approx(10.0, rel=0.01)


def test_our_writer_is_read_by_ase(water_cube, tmp_path):
    path, _ = water_cube
    ours = read_cube(path)
    out = tmp_path / "rewritten.cube"
    write_cube(out, ours, digits=10)
    with open(out) as fh:
        ref = ase_cube.read_cube(fh)
    np.testing.assert_allclose(ref["data"], ours.values, rtol=1e-9, atol=1e-300)
    np.testing.assert_allclose(ref["atoms"].positions, ours.positions * BOHR_IN_ANGSTROM, atol=1e-6)
