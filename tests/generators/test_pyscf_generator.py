"""PySCF generator: density cube, energy, cache, SCF failure (tiny molecules)."""

import time

import numpy as np
import pytest

pyscf = pytest.importorskip("pyscf")

from pyscf import gto, scf  # noqa: E402

from trackscan.errors import ConfigError, GeneratorError  # noqa: E402
from trackscan.generators import make_generator  # noqa: E402
from trackscan.io.generator_config import parse_generator_config  # noqa: E402
from trackscan.io.cube import read_cube  # noqa: E402

pytestmark = pytest.mark.slow

BOHR = 0.529177210903


def _gen(tmp_path, name="h2", **pyscf_opts):
    xyz = tmp_path / f"{name}.xyz"
    if not xyz.exists():
        xyz.write_text({"h2": "2\nH2\nH 0 0 0\nH 0 0 0.74\n",
                        "lih": "2\nLiH\nLi 0 0 0\nH 0 0 1.6\n"}[name])
    opts = {"method": "HF", "basis": "sto-3g", "spacing": 0.3, "margin": 2.5}
    opts.update(pyscf_opts)
    cfg = parse_generator_config({"geometry": {"xyz": f"{name}.xyz", "drive": {"distance": [1, 2]}},
                                  "pyscf": opts}, path=tmp_path / "scan.yaml")
    return make_generator(cfg)


@pytest.fixture(scope="module")
def h2_run(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("pyscf")
    gen = _gen(tmp)
    out = gen.generate(0.80, tmp / "frames" / "f080.cube", workdir=tmp / "frames")
    return tmp, gen, out


def test_energy_matches_direct_pyscf(h2_run):
    _, gen, out = h2_run
    assert gen.describe() == "PySCF RHF/sto-3g"
    mol = gto.M(atom=f"H 0 0 0; H 0 0 0.80", unit="Angstrom", basis="sto-3g", verbose=0)
    mf = scf.RHF(mol)
    mf.conv_tol = 1e-11
    e_ref = mf.kernel()
    assert out.energy == pytest.approx(e_ref, abs=1e-7)
    assert not out.cached


def test_cube_values_are_the_scf_density(h2_run):
    # density of an independent RHF run, evaluated by PySCF at grid points
    from pyscf.dft import numint

    _, _, out = h2_run
    grid = read_cube(out.path)
    mol = gto.M(atom=[(1, tuple(p)) for p in grid.positions], unit="Bohr", basis="sto-3g",
                verbose=0)
    mf = scf.RHF(mol)
    mf.conv_tol = 1e-11
    mf.kernel()
    idx = np.array([[i, j, k] for i in (0, 5, 10) for j in (3, grid.shape[1] // 2)
                    for k in (2, grid.shape[2] // 2, grid.shape[2] - 4)])
    pts = grid.position(idx)
    rho = numint.eval_rho(mol, numint.eval_ao(mol, pts), mf.make_rdm1())
    # the cube keeps 6 significant digits
    np.testing.assert_allclose(grid.values[tuple(idx.T)], rho, rtol=2e-5, atol=1e-12)


def test_cube_integrates_to_two_electrons_at_the_geometry(h2_run):
    _, gen, out = h2_run
    grid = read_cube(out.path)
    # 0.3 bohr grid over a 2.5 bohr margin: the Riemann sum of a smooth
    # STO-3G H2 density is good to ~1 %
    assert grid.integral() == pytest.approx(2.0, rel=2e-2)
    d = np.linalg.norm(grid.positions[1] - grid.positions[0]) * BOHR
    assert d == pytest.approx(0.80, abs=1e-6)
    np.testing.assert_allclose(grid.positions, gen.geometry(0.80).positions, atol=1e-6)


def test_rerun_is_taken_from_the_cache(h2_run):
    tmp, _, first = h2_run
    gen = _gen(tmp)                      # a new generator, as in a new process
    t0 = time.monotonic()
    out = gen.generate(0.80, tmp / "again" / "f080.cube", workdir=tmp / "frames")
    assert out.cached
    assert out.energy == first.energy
    assert time.monotonic() - t0 < 2.0
    np.testing.assert_array_equal(read_cube(out.path).values, read_cube(first.path).values)


def test_scf_non_convergence_names_the_geometry(tmp_path):
    # two SCF cycles (and two second-order ones) cannot reach 1e-13 Eh for
    # stretched LiH from the default guess
    gen = _gen(tmp_path, "lih", max_cycle=2, conv_tol=1e-13)
    with pytest.raises(GeneratorError, match=r"did not converge at coordinate value 2\.5 "
                                             r"\(geometry .*f\.xyz: Li 0\.0000 0\.0000"):
        gen.generate(2.5, tmp_path / "f.cube")
    assert not (tmp_path / "f.cube").exists()


def test_bad_method_and_spin(tmp_path):
    with pytest.raises(ConfigError) as info:
        _gen(tmp_path, method="NOT-A-FUNCTIONAL")
    assert info.value.key == "generator.pyscf.method"
    with pytest.raises(ConfigError) as info:
        _gen(tmp_path, spin=1)
    assert info.value.key == "generator.pyscf.spin"
