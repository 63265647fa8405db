"""The common interface of density generators.

A generator turns a coordinate value into a density cube::

    gen = make_generator(config, coordinate=manifest.coordinate)
    gen.describe()                 # "PySCF RHF/6-31g", "promolecular model (...)", ...
    gen.geometry(1.75)             # XYZFrame (bohr), when there is a geometry drive
    out = gen.generate(1.75, "frames/frame_p1.750000.cube", workdir="frames")
    out.path, out.energy, out.cached

Every generator writes the cube atomically: a failure leaves no file (and an
older file at the same path untouched).
"""

from __future__ import annotations

import abc
import os
from dataclasses import dataclass
from pathlib import Path

from trackscan.errors import GeneratorError, InputError
from trackscan.io.cube import DEFAULT_MAX_POINTS
from trackscan.io.xyz import XYZFrame, write_xyz

__all__ = ["Generator", "GeneratedFrame", "GeometryOnly", "sibling", "check_grid_size",
           "MAX_GENERATED_POINTS"]

MAX_GENERATED_POINTS = DEFAULT_MAX_POINTS
"""Largest grid a generator builds (the cube reader's default ceiling)."""


def check_grid_size(positions, *, spacing: float, margin: float, value: float, path) -> None:
    """Refuse, before anything is allocated, a box around the atoms too large to sample.

    The box is that of :func:`trackscan.promolecule.grid_box` (PySCF's cube
    writer makes the same one, give or take a point per axis).  A typo in a
    drive (a distance of 1.0e6 instead of 1.06) otherwise builds a grid of
    gigabytes.

    Raises
    ------
    InputError
        Naming the value, the grid and the extent of the atoms.
    """
    import math

    import numpy as np

    pos = np.asarray(positions, dtype=np.float64).reshape(-1, 3)
    extent = pos.max(axis=0) - pos.min(axis=0) if len(pos) else np.zeros(3)
    if not np.all(np.isfinite(extent)):
        raise InputError(f"value {value:g}: the geometry is not finite", path)
    shape = [int(math.ceil((e + 2.0 * margin) / spacing - 1e-9)) + 1 for e in extent]
    n = math.prod(shape)
    if n > MAX_GENERATED_POINTS:
        raise InputError(f"value {value:g}: the grid around the atoms would have "
                         f"{'x'.join(map(str, shape))} = {n} points, more than the ceiling of "
                         f"{MAX_GENERATED_POINTS} (the atoms span {float(extent.max()):.4g} bohr; "
                         "is the value a typo?)", path)

_CUBE_SUFFIXES = (".cube.gz", ".cube.bz2", ".cube.xz", ".cube", ".cub")


def sibling(cube_path, suffix: str) -> Path:
    """A file beside a cube with the cube's name and another suffix.

    ``frames/f01.cube.gz`` with ``.xyz`` gives ``frames/f01.xyz``.
    """
    p = Path(cube_path)
    name = p.name
    for s in _CUBE_SUFFIXES:
        if name.lower().endswith(s):
            name = name[: -len(s)]
            break
    return p.with_name(name + suffix)


@dataclass(frozen=True)
class GeneratedFrame:
    """What a generator produced for one coordinate value.

    Attributes
    ----------
    path : Path
        The cube file (usable directly as a path: ``os.fspath(frame)``).
    value : float
        Coordinate value.
    energy : float or None
        Total energy (hartree), when the source computes one.
    cached : bool
        True when the result was taken from a previous run.
    geometry : Path or None
        XYZ file of the geometry, written beside the cube.
    log : Path or None
        Log of the external program, beside the cube.
    """

    path: Path
    value: float
    energy: float | None = None
    cached: bool = False
    geometry: Path | None = None
    log: Path | None = None

    def __fspath__(self) -> str:
        return os.fspath(self.path)


class Generator(abc.ABC):
    """Base class: a density source at any value of the scanned coordinate.

    Parameters
    ----------
    drive : CoordinateDrive or TrajectoryDrive, optional
        Source of geometries.

    Notes
    -----
    A model density (the built-in promolecule) says so in the cube's first
    comment line; the frame analysis reads that into the one model-density
    flag, ``grid.density_model`` (:attr:`trackscan.model.Frame.is_model_density`).
    """

    #: Subfolders of the work folder the generator writes besides the cube
    #: (claimed as trackscan's in the frames folder before it runs).
    scratch_folders = ()

    def __init__(self, drive=None):
        self.drive = drive

    @property
    def has_geometry(self) -> bool:
        """True when :meth:`geometry` can give a geometry."""
        return self.drive is not None

    def check(self) -> None:
        """Raise :class:`~trackscan.errors.InputError` when the source cannot run at all.

        (A missing or non-executable program.)  Called before any frame is
        made, and by ``trackscan check``.
        """

    @abc.abstractmethod
    def describe(self) -> str:
        """One line naming the density source, for reports."""

    def geometry(self, value: float) -> XYZFrame:
        """The geometry at coordinate `value`.

        Raises
        ------
        GeneratorError
            When the manifest has no ``generator.geometry`` or the value is
            out of range.
        """
        if self.drive is None:
            raise GeneratorError("this generator has no geometry drive "
                                 "(add generator.geometry to the manifest)")
        return self.drive.geometry(value)

    def write_geometry(self, value: float, path) -> Path | None:
        """Write the geometry at `value` to the XYZ file `path` (None without a drive)."""
        if self.drive is None:
            return None
        write_xyz(path, self.geometry(value))
        return Path(path)

    @abc.abstractmethod
    def generate(self, value: float, cube_path, workdir=None) -> GeneratedFrame:
        """Produce the density cube at coordinate `value`.

        Parameters
        ----------
        value : float
            Coordinate value (in the coordinate's unit).
        cube_path : str or os.PathLike
            Where the cube goes; written atomically.
        workdir : str or os.PathLike, optional
            Scratch/cache folder (default: the cube's folder).

        Returns
        -------
        GeneratedFrame

        Raises
        ------
        GeneratorError
            When the source fails; no cube is left at `cube_path`.
        """

    def __repr__(self) -> str:
        return f"<{type(self).__name__}: {self.describe()}>"


class GeometryOnly(Generator):
    """A geometry drive with no density source.

    :meth:`geometry` and :meth:`write_geometry` work (e.g. to suggest new
    frames to compute elsewhere); :meth:`generate` writes the geometry beside
    the requested cube and raises, so a model density never stands in for a
    missing quantum-chemical one.
    """

    def __init__(self, drive):
        if drive is None:
            raise ValueError("GeometryOnly needs a geometry drive")
        super().__init__(drive)

    def describe(self) -> str:
        return f"geometry only ({self.drive.describe()}); densities come from cube files"

    def generate(self, value: float, cube_path, workdir=None) -> GeneratedFrame:
        xyz = sibling(cube_path, ".xyz")
        self.write_geometry(value, xyz)
        raise GeneratorError(
            f"no density source in the manifest's generator section, so trackscan cannot make "
            f"{Path(cube_path).name} at coordinate value {value:g}; the geometry is in {xyz} - "
            "compute its density cube there, or add promolecule, pyscf or command")
