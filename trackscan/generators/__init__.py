"""Density sources: geometry drives and generators of density cubes.

From a validated ``generator`` manifest section
(:func:`trackscan.io.generator_config.parse_generator_config`)::

    from trackscan.generators import make_generator
    gen = make_generator(manifest.generator, coordinate=manifest.coordinate)
    frame = gen.generate(1.75, "frames/frame_p1.750000.cube")

Sources: ``promolecule`` (the built-in model), ``pyscf`` (extra ``qc``) and
``command`` (any external program).  A section with only ``geometry`` gives
a :class:`GeometryOnly` generator: it writes geometries (for calculations run
elsewhere) and refuses to make densities.
"""

from __future__ import annotations

from pathlib import Path

from trackscan.coordinates import measure
from trackscan.errors import ConfigError
from trackscan.generators.base import GeneratedFrame, Generator, GeometryOnly, sibling
from trackscan.io.generator_config import GeneratorConfig, GeometryConfig, parse_generator_config
from trackscan.generators.geometry import (
    CoordinateDrive, TrajectoryDrive, from_internal_unit, value_from_comment,
)
from trackscan.io.xyz import read_xyz
from trackscan.units import UNITS_OF_KIND, canonical_unit

__all__ = ["make_generator", "make_drive", "Generator", "GeneratedFrame", "GeometryOnly", "CoordinateDrive",
           "TrajectoryDrive", "parse_generator_config", "sibling"]

def _coordinate_unit(kind: str, coordinate) -> str | None:
    unit = canonical_unit(getattr(coordinate, "unit", None))
    return unit if unit in UNITS_OF_KIND.get(kind, ()) else None


def make_drive(geometry: GeometryConfig, *, coordinate=None, manifest=None):
    """Build the geometry drive of a ``generator.geometry`` section.

    Parameters
    ----------
    geometry : GeometryConfig
    coordinate : trackscan.io.manifest.Coordinate, optional
        The scan's coordinate: its unit applies to drive values (unless the
        drive names its own), and its measured definition gives trajectory
        frame values that neither ``values`` nor the comment lines give.
    manifest : Path, optional
        Named in errors.

    Returns
    -------
    CoordinateDrive or TrajectoryDrive

    Raises
    ------
    ParseError, ConfigError, ConsistencyError
    """
    if geometry.xyz is not None:
        d = geometry.drive
        base = read_xyz(geometry.xyz)[0]
        unit = d.unit or _coordinate_unit(d.kind, coordinate)
        try:
            return CoordinateDrive(base, d.kind, d.atoms, move=d.move, unit=unit)
        except ConfigError as exc:
            raise ConfigError(exc.message, manifest, exc.key) from None
    frames = read_xyz(geometry.trajectory)
    key = "generator.geometry"
    if geometry.values is not None:
        if len(geometry.values) != len(frames):
            raise ConfigError(f"{len(geometry.values)} values for {len(frames)} frames of "
                              f"{geometry.trajectory.name}", manifest, f"{key}.values")
        values = list(geometry.values)
    else:
        values = []
        for k, fr in enumerate(frames):
            v = value_from_comment(fr.comment)
            if v is None:
                v = _measured(fr, geometry, coordinate, manifest, k)
            values.append(v)
    return TrajectoryDrive(frames, values, source=str(geometry.trajectory))


def _measured(frame, geometry, coordinate, manifest, k):
    d = geometry.drive
    if d is not None:
        if max(d.atoms) > frame.n_atoms:
            raise ConfigError(f"atom {max(d.atoms)} does not exist in "
                              f"{geometry.trajectory.name}", manifest, "generator.geometry.drive")
        unit = d.unit or _coordinate_unit(d.kind, coordinate)
        return from_internal_unit(d.kind, measure(d.kind, d.atoms, frame.positions), unit)
    if coordinate is not None and getattr(coordinate, "kind", None):
        return coordinate.measure(frame.positions)
    raise ConfigError(f"frame {k + 1} of {geometry.trajectory.name} has no 'value=...' in its "
                      "comment line; give generator.geometry.values, a drive, or a measured "
                      "coordinate definition", manifest, "generator.geometry")


def make_generator(config: GeneratorConfig, manifest_dir=None, *, coordinate=None) -> Generator:
    """Build the generator a validated ``generator`` section describes.

    Parameters
    ----------
    config : GeneratorConfig
        From :func:`parse_generator_config` (paths already absolute).
    manifest_dir : str or os.PathLike, optional
        Folder against which a relative program path of a command is
        resolved (default: the manifest's folder recorded in `config`).
    coordinate : trackscan.io.manifest.Coordinate, optional
        Unit and measured definition of the scanned coordinate.

    Returns
    -------
    Generator
        :class:`~trackscan.generators.model.PromoleculeGenerator`,
        :class:`~trackscan.generators.pyscf_density.PySCFGenerator`,
        :class:`~trackscan.generators.command.CommandGenerator` or
        :class:`GeometryOnly`.
    """
    manifest = config.manifest
    base_dir = Path(manifest_dir) if manifest_dir is not None else (
        manifest.parent if manifest is not None else Path.cwd())
    drive = None
    if config.geometry is not None:
        drive = make_drive(config.geometry, coordinate=coordinate, manifest=manifest)
    if config.source == "none":
        return GeometryOnly(drive)
    if config.source == "promolecule":
        from trackscan.generators.model import PromoleculeGenerator
        _check_model_elements(drive, manifest)
        return PromoleculeGenerator(drive, config.options)
    if config.source == "pyscf":
        from trackscan.generators.pyscf_density import PySCFGenerator
        return PySCFGenerator(drive, config.options, manifest=manifest)
    if config.source == "command":
        from trackscan.generators.command import CommandGenerator
        return CommandGenerator(config.options, drive, base_dir=base_dir, manifest=manifest)
    raise ValueError(f"unknown generator source {config.source!r}")


def _check_model_elements(drive, manifest):
    from trackscan.promolecule import CLEMENTI_RAIMONDI
    numbers = drive.base.numbers if hasattr(drive, "base") else drive.numbers
    bad = sorted({int(z) for z in numbers if int(z) not in CLEMENTI_RAIMONDI})
    if bad:
        raise ConfigError(f"the promolecular model covers H-Ar only; the geometry has Z = {bad} "
                          "(use pyscf or command)", manifest, "generator.promolecule")
