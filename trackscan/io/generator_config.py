"""The manifest's ``generator`` section: validated into frozen value objects.

Shape (every key optional, but a density source needs a geometry unless it is
a command that does not use ``{xyz}``)::

    generator:
      geometry:                        # where geometries come from
        xyz: start.xyz                 # base geometry (first frame of the file) ...
        drive: {distance: [1, 2]}      # ... with one driven coordinate
                                       #   (or angle: [i, j, k] / dihedral: [i, j, k, l];
                                       #   optional move: [..] and unit: bohr|angstrom|degree|radian)
        # or:  trajectory: relaxed-scan.xyz   (frames carry "value=..." comments,
        #      or give values: [..], or the coordinate's definition is measured)
      # one density source; with none, trackscan only writes geometries
      # (for calculations you run yourself) and never makes a density:
      promolecule: {spacing: 0.15, margin: 4.0}          # built-in model; bohr
      pyscf: {method: HF, basis: 6-31g, charge: 0, spin: 0, spacing: 0.2, margin: 4.0}
      command: ["my-qc-wrapper", "--at", "{value}", "--geom", "{xyz}", "--out", "{cube}"]
      timeout: 600                     # seconds per frame, command only (default 24 h)

Paths resolve relative to the manifest.  Wrong keys and values raise
:class:`~trackscan.errors.ConfigError` naming the key path, e.g.
``generator.geometry.drive``.
"""

from __future__ import annotations

import difflib
import re
from dataclasses import dataclass
from pathlib import Path

from trackscan.units import UNITS_OF_KIND, canonical_unit
from trackscan.coordinates import COORDINATE_KINDS
from trackscan.io.keycheck import KeyChecker

__all__ = ["GeneratorConfig", "GeometryConfig", "DriveConfig", "PromoleculeConfig",
           "PySCFConfig", "CommandConfig", "parse_generator_config", "PLACEHOLDERS"]

#: Placeholders a command template may use.
PLACEHOLDERS = ("value", "xyz", "cube", "workdir")

_TOP = ("geometry", "promolecule", "pyscf", "command", "timeout")
_GEOMETRY = ("xyz", "drive", "trajectory", "values")
_DRIVE = tuple(COORDINATE_KINDS) + ("move", "unit")
_PROMOLECULE = ("spacing", "margin")
_PYSCF = ("method", "basis", "charge", "spin", "spacing", "margin", "conv_tol", "max_cycle",
          "cache")
_PLACEHOLDER_RE = re.compile(r"\{([^{}]*)\}")


@dataclass(frozen=True)
class DriveConfig:
    """A driven internal coordinate (1-based atoms)."""

    kind: str
    atoms: tuple
    move: tuple | None = None
    unit: str | None = None


@dataclass(frozen=True)
class GeometryConfig:
    """Source of geometries: a base XYZ with a drive, or a trajectory file."""

    xyz: Path | None = None
    drive: DriveConfig | None = None
    trajectory: Path | None = None
    values: tuple | None = None


@dataclass(frozen=True)
class PromoleculeConfig:
    """Built-in model cubes: grid `spacing` and box `margin` (bohr)."""

    spacing: float = 0.15
    margin: float = 4.0


@dataclass(frozen=True)
class PySCFConfig:
    """PySCF densities.

    Attributes
    ----------
    method : str
        ``HF`` (restricted for spin 0, else unrestricted), ``RHF``, ``UHF``,
        ``ROHF``, or a DFT functional name PySCF knows (``B3LYP``, ``PBE0``...).
    basis : str
    charge, spin : int
        Total charge; spin = 2S (number of unpaired electrons).
    spacing, margin : float
        Cube grid step and box margin (bohr).
    conv_tol : float
        SCF energy convergence (hartree).
    max_cycle : int
    cache : Path or None
        Folder for converged results (default: ``pyscf-cache`` in the work folder).
    """

    method: str = "HF"
    basis: str = "6-31g"
    charge: int = 0
    spin: int = 0
    spacing: float = 0.2
    margin: float = 4.0
    conv_tol: float = 1e-9
    max_cycle: int = 100
    cache: Path | None = None


#: Seconds an external program may run for one frame unless the manifest's
#: ``generator.timeout`` says otherwise: long enough for any single-point
#: density, short enough that a hung program does not hold a cluster slot
#: (and the scan) for ever.
DEFAULT_TIMEOUT = 24 * 3600.0


@dataclass(frozen=True)
class CommandConfig:
    """An external program: argument template and timeout (s)."""

    args: tuple
    timeout: float = DEFAULT_TIMEOUT

    @property
    def uses(self) -> frozenset:
        """Placeholders that appear in the template."""
        found = set()
        for a in self.args:
            found.update(m.group(1) for m in _PLACEHOLDER_RE.finditer(a))
        return frozenset(found)


@dataclass(frozen=True)
class GeneratorConfig:
    """The validated ``generator`` section.

    Attributes
    ----------
    source : {'promolecule', 'pyscf', 'command', 'none'}
        ``'none'``: a geometry drive only (no density source is given; a
        model density is never substituted silently for a missing one).
    options : PromoleculeConfig, PySCFConfig, CommandConfig or None
    geometry : GeometryConfig or None
    manifest : Path or None
        The manifest the section came from.
    """

    source: str
    options: object
    geometry: GeometryConfig | None = None
    manifest: Path | None = None


def _drive(raw, chk: KeyChecker) -> DriveConfig:
    key = "generator.geometry.drive"
    chk.mapping(raw, key, _DRIVE)
    kinds = [k for k in COORDINATE_KINDS if k in raw]
    if len(kinds) != 1:
        chk.fail(key, "give exactly one of distance: [i, j], angle: [i, j, k], "
                      "dihedral: [i, j, k, l]")
    kind = kinds[0]
    n = COORDINATE_KINDS[kind]
    atoms = list(chk.atoms(raw[kind], f"{key}.{kind}", n))
    move = None
    if "move" in raw:
        m = raw["move"]
        if not isinstance(m, list) or not m or not all(
                isinstance(a, int) and not isinstance(a, bool) and a >= 1 for a in m):
            chk.fail(f"{key}.move", f"expected a list of atom numbers (1-based), got {m!r}")
        if atoms[0] in m or atoms[-1] not in m:
            chk.fail(f"{key}.move", f"must include atom {atoms[-1]} and not atom {atoms[0]}")
        move = tuple(sorted(set(m)))
    unit = None
    if "unit" in raw:
        given = chk.string(raw["unit"], f"{key}.unit")
        unit = canonical_unit(given)
        allowed = UNITS_OF_KIND[kind]
        if unit not in allowed:
            chk.fail(f"{key}.unit", f"a {kind} is in {' or '.join(allowed)}, got {raw['unit']!r}")
    return DriveConfig(kind, tuple(atoms), move, unit)


def _geometry(raw, chk: KeyChecker, base: Path) -> GeometryConfig:
    key = "generator.geometry"
    chk.mapping(raw, key, _GEOMETRY)
    if ("xyz" in raw) == ("trajectory" in raw):
        chk.fail(key, "give either xyz (with drive) or trajectory")
    if "xyz" in raw:
        if "drive" not in raw:
            chk.fail(f"{key}.drive", "missing: a base geometry needs a driven coordinate, "
                                     "e.g. drive: {distance: [1, 2]}")
        if "values" in raw:
            chk.fail(f"{key}.values", "values belong to a trajectory, not to a drive")
        return GeometryConfig(xyz=chk.file(raw["xyz"], f"{key}.xyz", base),
                              drive=_drive(raw["drive"], chk))
    traj = chk.file(raw["trajectory"], f"{key}.trajectory", base)
    drive = _drive(raw["drive"], chk) if "drive" in raw else None
    values = None
    if "values" in raw:
        v = raw["values"]
        if not isinstance(v, list) or len(v) < 2:
            chk.fail(f"{key}.values", f"expected a list of numbers, one per frame, got {v!r}")
        values = tuple(chk.number(x, f"{key}.values[{i}]") for i, x in enumerate(v))
    return GeometryConfig(trajectory=traj, drive=drive, values=values)


def _command(raw, timeout, chk: KeyChecker, has_geometry: bool) -> CommandConfig:
    key = "generator.command"
    if isinstance(raw, str):
        chk.fail(key, "expected a list of arguments, e.g. [\"prog\", \"--out\", \"{cube}\"] "
                      "(commands are never run through a shell)")
    if not isinstance(raw, list) or not raw:
        chk.fail(key, f"expected a non-empty list of arguments, got {raw!r}")
    args = []
    for i, a in enumerate(raw):
        if isinstance(a, bool) or not isinstance(a, (str, int, float)):
            chk.fail(f"{key}[{i}]", f"expected a string, got {a!r}")
        a = a if isinstance(a, str) else repr(a) if isinstance(a, float) else str(a)
        for m in _PLACEHOLDER_RE.finditer(a):
            if m.group(1) not in PLACEHOLDERS:
                close = difflib.get_close_matches(m.group(1), PLACEHOLDERS, n=1)
                hint = f" (did you mean {{{close[0]}}}?)" if close else ""
                chk.fail(f"{key}[{i}]", f"unknown placeholder {m.group(0)}{hint}; "
                                        f"known: {', '.join('{%s}' % p for p in PLACEHOLDERS)}")
        args.append(a)
    if not args[0].strip():
        chk.fail(f"{key}[0]", "the program name is empty")
    cfg = CommandConfig(tuple(args), timeout)
    if "cube" not in cfg.uses:
        chk.fail(key, "the template must say where to write the density: add {cube}")
    if "xyz" in cfg.uses and not has_geometry:
        chk.fail(key, "{xyz} needs a geometry: add generator.geometry")
    return cfg


def parse_generator_config(mapping, *, path=None) -> GeneratorConfig:
    """Validate a manifest's ``generator`` mapping.

    Parameters
    ----------
    mapping : dict
        The section as loaded from YAML.
    path : str or os.PathLike, optional
        The manifest file; relative paths resolve against its folder and
        errors name it.

    Returns
    -------
    GeneratorConfig

    Raises
    ------
    ConfigError
        With the key path of the first problem.
    """
    chk = KeyChecker(None if path is None else Path(path))
    base = Path(path).absolute().parent if path is not None else Path.cwd()
    chk.mapping(mapping, "generator", _TOP)
    geometry = _geometry(mapping["geometry"], chk, base) if "geometry" in mapping else None
    sources = [k for k in ("promolecule", "pyscf", "command") if k in mapping]
    if len(sources) > 1:
        chk.fail("generator", f"give one density source, not {' and '.join(sources)}")
    source = sources[0] if sources else "none"
    if "timeout" in mapping and source != "command":
        chk.fail("generator.timeout", "a timeout applies to command only")
    if source == "none":
        if geometry is None:
            chk.fail("generator", "give a density source (promolecule, pyscf or command) "
                                  "and/or a geometry")
        options = None
    elif source == "command":
        timeout = DEFAULT_TIMEOUT
        if "timeout" in mapping and mapping["timeout"] is not None:
            timeout = chk.number(mapping["timeout"], "generator.timeout", positive=True)
        options = _command(mapping["command"], timeout, chk, geometry is not None)
    else:
        if geometry is None:
            chk.fail("generator.geometry", f"missing: the {source} source computes the density "
                                           "from a geometry")
        raw = mapping.get(source) or {}
        key = f"generator.{source}"
        if source == "promolecule":
            chk.mapping(raw, key, _PROMOLECULE)
            options = PromoleculeConfig(
                spacing=chk.number(raw.get("spacing", 0.15), f"{key}.spacing", positive=True),
                margin=chk.number(raw.get("margin", 4.0), f"{key}.margin", minimum=0))
        else:
            chk.mapping(raw, key, _PYSCF)
            cache = None
            if "cache" in raw:
                cache = base / chk.string(raw["cache"], f"{key}.cache")
            options = PySCFConfig(
                method=chk.string(raw.get("method", "HF"), f"{key}.method").strip(),
                basis=chk.string(raw.get("basis", "6-31g"), f"{key}.basis").strip(),
                charge=chk.integer(raw.get("charge", 0), f"{key}.charge"),
                spin=chk.integer(raw.get("spin", 0), f"{key}.spin", minimum=0),
                spacing=chk.number(raw.get("spacing", 0.2), f"{key}.spacing", positive=True),
                margin=chk.number(raw.get("margin", 4.0), f"{key}.margin", minimum=0),
                conv_tol=chk.number(raw.get("conv_tol", 1e-9), f"{key}.conv_tol", positive=True),
                max_cycle=chk.integer(raw.get("max_cycle", 100), f"{key}.max_cycle", minimum=1),
                cache=cache)
    return GeneratorConfig(source=source, options=options, geometry=geometry,
                           manifest=None if path is None else Path(path).absolute())
