"""Generator of SCF densities with PySCF (the ``qc`` extra).

For each coordinate value: build the molecule from the geometry drive, run
HF or Kohn–Sham DFT (guess: the density matrix converged at the nearest
coordinate value so far, as refinement jumps about inside a bracket), write the
density cube with :func:`pyscf.tools.cubegen.density` at the chosen spacing
and margin, and keep the converged density matrix, energy and cube in a
cache keyed by a hash of the geometry and settings, so a rerun costs
nothing.  An SCF that does not converge (after a second-order retry) is a
:class:`~trackscan.errors.GeneratorError` naming the geometry, never a
silent bad frame.

This is the only module of trackscan that imports PySCF.

References
----------
.. [1] Q. Sun et al., "Recent developments in the PySCF program package",
   J. Chem. Phys. 153, 024109 (2020). :DOI:`10.1063/5.0006074`
"""

from __future__ import annotations

import contextlib
import hashlib
import io
import json
import logging
import os
import shutil
from pathlib import Path

import numpy as np

from trackscan.elements import symbol
from trackscan.errors import ConfigError, GeneratorError, InputError
from trackscan.generators.base import GeneratedFrame, Generator, check_grid_size, sibling
from trackscan.io.generator_config import PySCFConfig
from trackscan.io.atomic import write_bytes_atomic
from trackscan.io.cube import read_cube
from trackscan.units import BOHR_IN_ANGSTROM

try:  # optional dependency
    from pyscf import dft, gto, scf
    from pyscf.tools import cubegen
except ImportError:  # pragma: no cover - exercised only without PySCF
    gto = None

__all__ = ["PySCFGenerator", "MissingPySCFError", "pyscf_available"]

logger = logging.getLogger(__name__)

_HF = ("HF", "RHF", "UHF", "ROHF")
_CACHE_TAG = "trackscan-pyscf-density/1"
_KEEP_GUESSES = 32


class MissingPySCFError(GeneratorError, ImportError):
    """PySCF is not installed (``pip install trackscan[qc]``)."""


def pyscf_available() -> bool:
    """True when PySCF can be imported."""
    return gto is not None


def _require():
    if gto is None:
        raise MissingPySCFError("the pyscf generator needs PySCF: pip install 'trackscan[qc]'")


def _geometry_text(geom) -> str:
    ang = geom.positions * BOHR_IN_ANGSTROM
    return "; ".join(f"{symbol(z)} {x:.4f} {y:.4f} {w:.4f}" for z, (x, y, w) in
                     zip(geom.numbers, ang))


class PySCFGenerator(Generator):
    """HF or DFT densities from PySCF along a geometry drive.

    Parameters
    ----------
    drive : CoordinateDrive or TrajectoryDrive
    options : PySCFConfig
    manifest : Path, optional
        Named in configuration errors.

    Raises
    ------
    MissingPySCFError
        If PySCF is not installed.
    ConfigError
        Unknown functional or basis, or a charge/spin the atoms cannot have
        (checked once, on the drive's first geometry).
    """

    #: Subfolder of the frames folder this generator writes (its cache).
    scratch_folders = ("pyscf-cache",)

    def __init__(self, drive, options: PySCFConfig = PySCFConfig(), *, manifest=None):
        _require()
        self._manifest = manifest
        if drive is None:
            raise ValueError("the pyscf generator needs a geometry drive")
        super().__init__(drive)
        self.options = options
        m = options.method.upper()
        if m in _HF:
            self._kind = m if m != "HF" else ("RHF" if options.spin == 0 else "UHF")
            self._xc = None
        else:
            try:
                dft.libxc.parse_xc(options.method)
            except Exception:  # PySCF raises several types for an unknown name
                raise ConfigError(f"unknown method {options.method!r}: use HF, RHF, UHF, ROHF "
                                  "or a DFT functional name such as B3LYP or PBE0",
                                  manifest, "generator.pyscf.method") from None
            self._kind = "RKS" if options.spin == 0 else "UKS"
            self._xc = options.method
        first = drive.base if hasattr(drive, "base") else drive.geometry(drive.values[0])
        self._build(first, key_errors=True)
        self._dms = {}     # coordinate value -> converged density matrix (SCF guesses)

    # -- description and keys -------------------------------------------
    def describe(self) -> str:
        if self._xc is None:
            label = self._kind
        else:
            label = ("U" if self._kind == "UKS" else "") + self._xc.upper()
        return f"PySCF {label}/{self.options.basis}"

    def _settings(self) -> dict:
        o = self.options
        return {"kind": self._kind, "xc": self._xc, "basis": o.basis, "charge": o.charge,
                "spin": o.spin, "conv_tol": o.conv_tol, "spacing": o.spacing,
                "margin": o.margin}

    def cache_key(self, geom) -> str:
        """Hash of the geometry (to 1e-8 bohr) and the settings."""
        payload = {"tag": _CACHE_TAG, "settings": self._settings(),
                   "numbers": [int(z) for z in geom.numbers],
                   "positions": [f"{x:.8f}" for x in np.asarray(geom.positions).ravel()]}
        text = json.dumps(payload, sort_keys=True)
        return hashlib.sha256(text.encode()).hexdigest()[:24]

    # -- PySCF ------------------------------------------------------------
    def _build(self, geom, *, key_errors=False):
        o = self.options
        atoms = [(int(z), tuple(float(c) for c in p)) for z, p in zip(geom.numbers, geom.positions)]
        try:
            return gto.M(atom=atoms, unit="Bohr", basis=o.basis, charge=o.charge, spin=o.spin,
                         verbose=0)
        except Exception as exc:  # basis not found, charge/spin inconsistent, ...
            msg = str(exc).strip().splitlines()[-1] if str(exc).strip() else type(exc).__name__
            if key_errors:
                text = msg.lower()
                key = "generator.pyscf.basis" if "basis" in text else "generator.pyscf.spin" \
                    if ("spin" in text or "electron" in text) else "generator.pyscf"
                raise ConfigError(f"PySCF cannot build the molecule: {msg}",
                                  self._manifest, key) from None
            raise GeneratorError(f"PySCF cannot build the molecule: {msg}") from None

    def _mean_field(self, mol):
        o = self.options
        if self._xc is None:
            mf = {"RHF": scf.RHF, "UHF": scf.UHF, "ROHF": scf.ROHF}[self._kind](mol)
        else:
            mf = (dft.RKS if self._kind == "RKS" else dft.UKS)(mol)
            mf.xc = self._xc
        mf.conv_tol = o.conv_tol
        mf.max_cycle = o.max_cycle
        mf.verbose = 0
        return mf

    def _remember(self, value, dm):
        self._dms[float(value)] = dm
        while len(self._dms) > _KEEP_GUESSES:
            self._dms.pop(next(iter(self._dms)))

    def _guess(self, mf, value):
        """Density matrix of the nearest coordinate value computed so far."""
        if not self._dms:
            return None
        near = min(self._dms, key=lambda v: (abs(v - value), v))
        dm = self._dms[near]
        nao = mf.mol.nao_nr()
        want = (2, nao, nao) if self._kind in ("UHF", "UKS") else (nao, nao)
        return dm if dm.shape == want else None

    def _scf(self, mol, value, xyz, geom):
        mf = self._mean_field(mol)
        e = mf.kernel(dm0=self._guess(mf, value))
        if not mf.converged:
            logger.info("SCF at %g did not converge in %d cycles; second-order retry",
                        value, self.options.max_cycle)
            mf2 = mf.newton()
            e = mf2.kernel(mf.make_rdm1())
            if mf2.converged:
                mf = mf2
        if not mf.converged:
            raise GeneratorError(
                f"{self.describe()}: SCF did not converge at coordinate value {value:g} "
                f"(geometry {xyz}: {_geometry_text(geom)} Å)")
        return mf.make_rdm1(), float(e)

    # -- generate -----------------------------------------------------------
    def generate(self, value: float, cube_path, workdir=None) -> GeneratedFrame:
        cube_path = Path(cube_path).absolute()
        workdir = Path(workdir).absolute() if workdir is not None else cube_path.parent
        cache = self.options.cache if self.options.cache is not None else workdir / "pyscf-cache"
        cache.mkdir(parents=True, exist_ok=True)
        geom = self.geometry(value)
        check_grid_size(geom.positions, spacing=self.options.spacing, margin=self.options.margin,
                        value=value, path=cube_path)
        xyz = sibling(cube_path, ".xyz")
        self.write_geometry(value, xyz)
        key = self.cache_key(geom)
        npz = cache / f"{key}.npz"
        cached_cube = cache / f"{key}.cube"
        dm = energy = None
        if npz.is_file():
            try:
                with np.load(npz) as data:
                    dm, energy = np.array(data["dm"]), float(data["energy"])
            except Exception:  # a damaged cache entry is recomputed
                logger.warning("ignoring unreadable cache entry %s", npz)
                dm = None
        if dm is not None and cached_cube.is_file():
            try:
                read_cube(cached_cube)
            except InputError:
                logger.warning("ignoring broken cached cube %s", cached_cube)
            else:
                _place(cached_cube, cube_path)
                self._remember(value, dm)
                logger.info("PySCF frame at %g taken from the cache (%s)", value, key)
                return GeneratedFrame(cube_path, float(value), energy, True, xyz)
        mol = self._build(geom)
        was_cached = dm is not None
        if dm is None:
            dm, energy = self._scf(mol, value, xyz, geom)
            buf = io.BytesIO()
            np.savez(buf, dm=dm, energy=energy, numbers=geom.numbers, positions=geom.positions,
                     settings=json.dumps(self._settings(), sort_keys=True))
            write_bytes_atomic(npz, buf.getvalue())
        self._remember(value, dm)
        tmp = cache / f".partial-{os.getpid()}-{key}.cube"
        try:
            density_dm = dm[0] + dm[1] if np.ndim(dm) == 3 else dm
            cubegen.density(mol, str(tmp), density_dm, resolution=self.options.spacing,
                            margin=self.options.margin)
            read_cube(tmp)
        except BaseException as exc:
            with contextlib.suppress(FileNotFoundError):
                tmp.unlink()
            if isinstance(exc, InputError):
                raise GeneratorError(f"PySCF wrote a broken cube at value {value:g}: "
                                     f"{exc.message}") from None
            raise
        os.replace(tmp, cached_cube)
        _place(cached_cube, cube_path)
        logger.info("PySCF frame at %g: E = %.8f Eh", value, energy)
        return GeneratedFrame(cube_path, float(value), energy, was_cached, xyz)


def _place(src: Path, dst: Path) -> None:
    """Put a copy (a hard link where possible) of `src` at `dst`, atomically."""
    dst.parent.mkdir(parents=True, exist_ok=True)
    tmp = dst.with_name(f".partial-{os.getpid()}-{dst.name}")
    with contextlib.suppress(FileNotFoundError):
        tmp.unlink()
    try:
        os.link(src, tmp)
    except OSError:
        shutil.copyfile(src, tmp)
    os.replace(tmp, dst)

