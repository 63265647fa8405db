"""Scan manifests: the YAML file that describes one scan.

Shape (every key but ``name``, ``coordinate`` and ``frames`` is optional)::

    name: cyclobutene-opening          # used for the report folder
    description: free text
    coordinate:
      label: C1-C2 distance
      unit: angstrom                   # angstrom | bohr | degree | any text
      distance: [1, 2]                 # or angle: [i, j, k] / dihedral: [i, j, k, l]
                                       # (1-based atoms; measured on each frame)
      tolerance: 0.001                 # listed values must match the measured ones
                                       # (default 1e-3 angstrom, 0.1 degree)
    frames:                            # a list ...
      - {file: frames/f00.cube, value: 1.50, energy: -154.2}
      - {file: frames/f01.cube.gz}     # value measured from the definition
    # ... or a pattern:   frames: {glob: "frames/*.cube"}
    # ... or, with a generator, the values to compute:
    #     frames: {values: [1.5, 1.6, 1.7], directory: frames}
    periodic: false
    analysis: {density_floor: 1.0e-4}  # AnalysisSettings fields
    generator: {...}                   # see trackscan.generators

Paths resolve relative to the YAML file.  The YAML is read with the safe
loader only.  Unknown keys and wrong types raise :class:`ConfigError` naming
the key path (``frames[3].file``) and the line.

Frames that a generator produced (by ``refine`` or ``demo``) are recorded in
``<directory>/record.json`` beside them, never in the user's YAML; they are
merged in here.
"""

from __future__ import annotations

import glob as globmod
import json
from dataclasses import dataclass, field
from pathlib import Path

import yaml

from trackscan.coordinates import COORDINATE_KINDS, default_tolerance, difference, measure
from trackscan.errors import ConfigError, InputError, ParseError
from trackscan.io.atomic import write_text_atomic
from trackscan.io.cube import DEFAULT_MAX_POINTS, read_cube_header
from trackscan.io.filecheck import path_problem, regular_file_problem
from trackscan.io.generator_config import parse_generator_config
from trackscan.io.keycheck import KeyChecker
from trackscan.model import VALUE_DECIMALS
from trackscan.io.yamlsafe import MAX_YAML_BYTES, compose_bounded, to_python
from trackscan.settings import AnalysisSettings, TrackingSettings
from trackscan.units import UNITS_OF_KIND, angle_factor, canonical_unit, length_factor

__all__ = ["ScanManifest", "Coordinate", "FrameEntry", "load_manifest",
           "read_frame_record", "record_generated_frame", "update_frame_record",
           "generated_frame_name", "RECORD_NAME"]

RECORD_NAME = "record.json"
"""File name of the record of generated frames, in the frames directory."""

_TOP_KEYS = ("name", "description", "coordinate", "frames", "periodic", "analysis", "tracking",
             "generator", "coordinates")
_COORD_KEYS = ("label", "unit", "tolerance") + tuple(COORDINATE_KINDS)
_FRAME_KEYS = ("file", "value", "energy")
_FRAMES_MAP_KEYS = ("glob", "values", "directory")

MAX_DESCRIPTION_CHARS = 20_000
"""Longest ``description`` (it is copied into scan.json and every report);
a longer one is refused, not cut, so nothing the user wrote is dropped unseen."""


@dataclass(frozen=True)
class Coordinate:
    """The scanned coordinate.

    Attributes
    ----------
    label : str
        Shown in reports, e.g. ``"C1-C2 distance"``.
    unit : str
        Unit of the frame values (``angstrom``, ``bohr``, ``degree``, ...).
    kind : {'distance', 'angle', 'dihedral'} or None
        Measured definition, when given.
    atoms : tuple of int
        1-based atoms of the definition.
    tolerance : float or None
        Largest allowed difference (in `unit`) between a listed frame value
        and the value measured on its geometry; None: the unit's default
        (:data:`trackscan.coordinates.DEFAULT_TOLERANCES`).
    """

    label: str
    unit: str
    kind: str | None = None
    atoms: tuple = ()
    tolerance: float | None = None

    def measure(self, positions) -> float:
        """Value of the coordinate on a geometry (positions in bohr), in `unit`."""
        if self.kind is None:
            raise ValueError("coordinate has no measured definition")
        v = measure(self.kind, self.atoms, positions)
        if self.kind == "distance":
            return v / length_factor(self.unit)
        return v / angle_factor(self.unit)

    @property
    def check_tolerance(self):
        """Tolerance of listed values (in `unit`), or None when they cannot be checked."""
        if self.kind is None:
            return None
        if self.tolerance is not None:
            return self.tolerance
        return default_tolerance(self.kind, self.unit)

    def to_dict(self) -> dict:
        d = {"label": self.label, "unit": self.unit}
        if self.kind:
            d[self.kind] = list(self.atoms)
        return d


@dataclass(frozen=True)
class FrameEntry:
    """One frame of a scan.

    Attributes
    ----------
    file : Path
        Cube file (absolute).  May not exist yet when a generator makes it.
    value : float
        Coordinate value, in the coordinate's unit.
    energy : float or None
        Total energy (hartree), when known.
    generated : bool
        True when the frame is to be (or was) produced by the generator.
    """

    file: Path
    value: float
    energy: float | None = None
    generated: bool = False


@dataclass(frozen=True)
class ScanManifest:
    """A validated scan manifest.

    Attributes
    ----------
    path : Path
        The YAML file.
    name : str
    coordinate : Coordinate
    frames : tuple of FrameEntry
        Sorted by coordinate value.
    periodic : bool
    analysis : AnalysisSettings
    tracking : TrackingSettings
        The ``tracking`` section (matching gates, significance, direction).
    generator : object or None
        Parsed ``generator`` section (see :mod:`trackscan.generators`).
    generator_raw : dict or None
        The section as written.
    frames_directory : Path
        Where generated frames and their record go.
    description : str
    """

    path: Path
    name: str
    coordinate: Coordinate
    frames: tuple
    periodic: bool = False
    analysis: AnalysisSettings = field(default_factory=AnalysisSettings)
    tracking: TrackingSettings = field(default_factory=TrackingSettings)
    generator: object = None
    generator_raw: dict | None = None
    frames_directory: Path | None = None
    description: str = ""

    @property
    def base_dir(self) -> Path:
        """Folder of the YAML file; relative paths resolve against it."""
        return self.path.parent


# -- YAML with line numbers ------------------------------------------------

def _compose(text: str, path):
    """The node graph, after the size, nesting and alias limits (trackscan.io.yamlsafe)."""
    return compose_bounded(text, path)


def _to_python(node, lines: dict, keypath: str):
    """Construct Python data from a YAML node, recording each key path's line."""
    return to_python(node, lines, keypath)


# -- loading ----------------------------------------------------------------

def _read_text(path: Path) -> str:
    problem = regular_file_problem(path)
    if problem == "no such file":
        raise InputError("no such manifest file", path)
    if problem == "is a directory":
        raise InputError("is a directory, not a manifest file", path)
    if problem is not None:
        raise InputError(problem, path)
    try:
        if path.stat().st_size > MAX_YAML_BYTES:
            raise InputError(f"the manifest is {path.stat().st_size} bytes long, more than the "
                             f"{MAX_YAML_BYTES} a scan manifest may take", path)
        return path.read_text(encoding="utf-8")
    except PermissionError:
        raise InputError("permission denied (cannot read the manifest)", path) from None
    except UnicodeDecodeError as exc:
        raise ParseError(f"not UTF-8 text ({exc.reason})", path) from None
    except OSError as exc:
        raise InputError(f"cannot read the manifest ({exc.strerror})", path) from None


def _coordinate(data, chk: KeyChecker, key: str = "coordinate") -> Coordinate:
    chk.mapping(data, key, _COORD_KEYS)
    kinds = [k for k in COORDINATE_KINDS if k in data]
    if len(kinds) > 1:
        chk.fail(key, f"give one measured definition, not {' and '.join(kinds)}")
    kind = kinds[0] if kinds else None
    atoms: tuple = ()
    if kind:
        atoms = chk.atoms(data[kind], f"{key}.{kind}", COORDINATE_KINDS[kind])
    default_unit = {"distance": "angstrom", "angle": "degree", "dihedral": "degree"}.get(kind, "")
    unit = chk.string(data["unit"], f"{key}.unit") if "unit" in data else default_unit
    if not unit:
        chk.fail(f"{key}.unit", "required when the coordinate has no measured definition")
    if kind and canonical_unit(unit) not in UNITS_OF_KIND[kind]:
        chk.fail(f"{key}.unit", f"a measured {kind} is in "
                                f"{' or '.join(UNITS_OF_KIND[kind])}, got {unit!r}")
    if "label" in data:
        label = chk.string(data["label"], f"{key}.label")
    elif kind:
        label = f"{kind} " + "-".join(str(a) for a in atoms)
    else:
        chk.fail(f"{key}.label", "required when the coordinate has no measured definition")
    tolerance = None
    if "tolerance" in data:
        tolerance = chk.number(data["tolerance"], f"{key}.tolerance")
        if not tolerance >= 0:
            chk.fail(f"{key}.tolerance", f"must be >= 0 (in {unit}), got {tolerance!r}")
        if kind is None:
            chk.fail(f"{key}.tolerance", "needs a measured definition "
                                             "(distance, angle or dihedral) to check against")
    return Coordinate(label=label, unit=unit, kind=kind, atoms=atoms, tolerance=tolerance)


def _check_listed_value(file: Path, value: float, coord: Coordinate, chk: KeyChecker, key: str,
                        max_points: int) -> None:
    """A listed frame value must match the coordinate measured on the frame's geometry."""
    tol = coord.check_tolerance
    if tol is None:
        return     # no definition, or a unit the measurement cannot be converted to
    measured = _measured_value(file, coord, chk, key, max_points)
    if difference(coord.kind, value, measured, coord.unit) > tol:
        atoms = "-".join(str(a) for a in coord.atoms)
        chk.fail(f"{key}.value",
                 f"listed value {value:g} {coord.unit} disagrees with the {coord.kind} "
                 f"{atoms} measured on {file.name}: {measured:.6g} {coord.unit} (tolerance "
                 f"{tol:g}; set coordinate.tolerance to change it, or leave the value out "
                 f"to use the measured one)")


def _measured_value(file: Path, coord: Coordinate, chk: KeyChecker, key: str, max_points: int):
    if coord.kind is None:
        chk.fail(f"{key}.value", "no value given and the coordinate has no measured definition "
                                 "(add coordinate.distance/angle/dihedral or a value per frame)")
    header = _read_header(file, max_points)
    natoms = len(header.numbers)
    if max(coord.atoms) > natoms:
        chk.fail(f"coordinate.{coord.kind}",
                 f"atom {max(coord.atoms)} does not exist: {file.name} has {natoms} atoms")
    return coord.measure(header.positions)


def _read_header(file: Path, max_points: int):
    return read_cube_header(file, max_points=max_points)


def read_frame_record(directory: Path, *, pending: bool = False) -> list:
    """Frames recorded by a generator in ``directory/record.json``.

    Parameters
    ----------
    directory : path-like
    pending : bool
        Also return entries marked ``"pending": true``: frames a run started
        and had not finished (see :mod:`trackscan.analysis.generate`).
        They are not frames of the scan.

    Returns
    -------
    list of dict
        Each with ``file`` (relative to `directory`), ``value`` and
        optionally ``energy``.
    """
    rec = Path(directory) / RECORD_NAME
    if not rec.exists():
        return []
    try:
        data = json.loads(rec.read_text(encoding="utf-8"))
        frames = data["frames"]
        assert isinstance(frames, list)
        for f in frames:
            assert isinstance(f["file"], str) and isinstance(f["value"], (int, float))
    except (ValueError, KeyError, TypeError, AssertionError):
        raise ParseError("broken record of generated frames (expected {\"frames\": "
                         "[{\"file\", \"value\"}, ...]})", rec) from None
    return [f for f in frames if pending or not f.get("pending")]


def update_frame_record(directory, *, put=(), remove=()) -> Path:
    """Add or replace entries (by ``file``) of a record of generated frames.

    The caller holds the frames folder's lock (the record is read, changed
    and rewritten atomically; sorted by value).

    Parameters
    ----------
    directory : path-like
        The frames folder.
    put : iterable of dict
        Entries (``file``, ``value``, optional ``energy``, ``refine``,
        ``pending``); None values are left out.
    remove : iterable of str
        File names whose entries are dropped.

    Returns
    -------
    Path
        The record file.
    """
    folder = Path(directory)
    put = [{k: v for k, v in e.items() if v is not None} for e in put]
    drop = set(remove) | {e["file"] for e in put}
    frames = [f for f in read_frame_record(folder, pending=True) if f["file"] not in drop]
    frames.extend(put)
    frames.sort(key=lambda f: (float(f["value"]), f["file"]))
    path = folder / RECORD_NAME
    write_text_atomic(path, json.dumps({"frames": frames}, indent=1, sort_keys=True) + "\n")
    return path


def _frames(data, chk: KeyChecker, base: Path, coord: Coordinate, has_generator: bool,
            max_points: int, direction: str = "auto"):
    entries = []
    frames_dir = base / "frames"
    if isinstance(data, dict):
        chk.mapping(data, "frames", _FRAMES_MAP_KEYS)
        if "directory" in data:
            frames_dir = base / chk.string(data["directory"], "frames.directory")
            problem = path_problem(frames_dir / generated_frame_name(0.0))
            if problem is not None:
                chk.fail("frames.directory", f"{problem}: {frames_dir}")
        if "glob" in data and "values" in data:
            chk.fail("frames", "give either glob or values, not both")
        if "glob" in data:
            pattern = chk.string(data["glob"], "frames.glob")
            files = sorted(globmod.glob(str(base / pattern)))
            files = [f for f in files if Path(f).is_file()]
            if not files and not has_generator:
                chk.fail("frames.glob", f"pattern {pattern!r} matches no file in {base}")
            for f in files:
                p = Path(f)
                v = _measured_value(p, coord, chk, "frames.glob", max_points)
                entries.append(FrameEntry(p, v))
        elif "values" in data:
            if not has_generator:
                chk.fail("frames.values", "values without files need a generator section")
            vals = data["values"]
            if not isinstance(vals, list) or not vals:
                chk.fail("frames.values", f"expected a non-empty list of numbers, got {vals!r}")
            names: dict = {}
            for i, v in enumerate(vals):
                v = chk.number(v, f"frames.values[{i}]")
                name = generated_frame_name(v)
                if name in names and names[name][1] != v:
                    j, w = names[name]
                    chk.fail(f"frames.values[{i}]",
                             f"{v!r} and frames.values[{j}] = {w!r} give the same frame file "
                             f"{name}: values must differ within {FRAME_NAME_DECIMALS} decimals")
                names[name] = (i, v)
                entries.append(FrameEntry(frames_dir / name, v, generated=True))
        elif not has_generator:
            chk.fail("frames", "expected a list of frames, a glob or values")
    elif isinstance(data, list):
        if not data and not has_generator:
            chk.fail("frames", "the scan has no frames")
        for i, item in enumerate(data):
            key = f"frames[{i}]"
            if isinstance(item, str):
                item = {"file": item}
            chk.mapping(item, key, _FRAME_KEYS)
            if "file" not in item:
                chk.fail(f"{key}.file", "missing (each frame needs a cube file)")
            file = base / chk.string(item["file"], f"{key}.file")
            problem = regular_file_problem(file)
            if problem in ("no such file", "no such file (a part of the path is not a folder)"):
                chk.fail(f"{key}.file", f"frame file not found: {file}")
            if problem == "is a directory":
                chk.fail(f"{key}.file", f"is a directory, not a cube file: {file}")
            if problem is not None:
                chk.fail(f"{key}.file", f"{problem}: {_shorten(file)}")
            if "value" in item:
                value = chk.number(item["value"], f"{key}.value")
                _check_listed_value(file, value, coord, chk, key, max_points)
            else:
                value = _measured_value(file, coord, chk, key, max_points)
            energy = chk.number(item["energy"], f"{key}.energy") if "energy" in item else None
            entries.append(FrameEntry(file, value, energy))
    else:
        chk.fail("frames", f"expected a list of frames, a glob or values, got {type(data).__name__}")
    listed = [e.value for e in entries]
    if direction == "auto":
        # frames listed with strictly falling values run the scan downwards
        direction = ("descending" if len(listed) > 1 and
                     all(x > y for x, y in zip(listed, listed[1:])) else "ascending")
    # generated frames already on disk
    known = {e.file.resolve() for e in entries}
    for rec in read_frame_record(frames_dir):
        f = (frames_dir / rec["file"]).resolve()
        if f in known:
            entries = [FrameEntry(e.file, e.value, rec.get("energy", e.energy), e.generated)
                       if e.file.resolve() == f else e for e in entries]
            continue
        entries.append(FrameEntry(f, float(rec["value"]), rec.get("energy"), generated=True))
        known.add(f)
    entries.sort(key=lambda e: (e.value, str(e.file)), reverse=direction == "descending")
    for a, b in zip(entries, entries[1:]):
        if a.value == b.value:
            raise ConfigError(f"two frames share the coordinate value {a.value:g}: "
                              f"{a.file.name} and {b.file.name}", chk.path, "frames")
    return tuple(entries), frames_dir


def record_generated_frame(manifest, entry: dict) -> Path:
    """Add (or replace) one frame in the manifest's record of generated frames.

    Parameters
    ----------
    manifest : ScanManifest
    entry : dict
        ``file`` (name relative to the frames folder), ``value``, and
        optionally ``energy`` and ``refine``.

    Returns
    -------
    Path
        The record file, ``<frames_directory>/record.json``, rewritten
        atomically (sorted by value; the user's YAML is never touched).
    """
    return update_frame_record(manifest.frames_directory, put=[entry])


FRAME_NAME_DECIMALS = VALUE_DECIMALS
"""Decimals of the coordinate value in a generated frame's file name."""


def generated_frame_name(value: float) -> str:
    """File name of a generated frame at coordinate `value` (stable, sortable).

    Values that agree to :data:`FRAME_NAME_DECIMALS` decimals share a name;
    the manifest refuses such values (refine never proposes them).
    """
    return f"frame_{value:+.{FRAME_NAME_DECIMALS}f}.cube".replace("+", "p").replace("-", "m")


def _shorten(path, limit: int = 120) -> str:
    """A path for a message, its middle cut when it is longer than `limit`."""
    text = str(path)
    if len(text) <= limit:
        return text
    return f"{text[:limit // 2]}...{text[-limit // 2:]} ({len(text)} characters)"


def load_manifest(path, *, max_points: int | None = None) -> ScanManifest:
    """Read and validate a scan manifest.

    Parameters
    ----------
    path : str or os.PathLike
        The YAML file.
    max_points : int, optional
        Ceiling on cube sizes when headers are read to measure the
        coordinate (default: the manifest's ``analysis.max_points``).

    Returns
    -------
    ScanManifest

    Raises
    ------
    InputError, ParseError, ConfigError
        Missing file, bad YAML, unknown key, wrong type, missing frame.
    """
    path = Path(path).absolute()
    text = _read_text(path)
    node = _compose(text, path)
    if node is None:
        raise ConfigError("the manifest is empty", path)
    lines: dict = {}
    try:
        data = _to_python(node, lines, "")
    except ConfigError as exc:
        raise ConfigError(exc.message, path, exc.key, exc.lineno) from None
    except yaml.YAMLError as exc:
        raise ParseError(f"bad YAML: {exc}", path) from None
    chk = KeyChecker(path, lines)
    if not isinstance(data, dict):
        chk.fail("", "expected a mapping at the top level (name, coordinate, frames, ...)")
    chk.mapping(data, "", _TOP_KEYS)
    if "coordinates" in data:
        from trackscan.io.manifest_2d import load_manifest_2d

        return load_manifest_2d(data, chk, path, lines, max_points=max_points)
    for required in ("name", "coordinate", "frames"):
        if required not in data:
            chk.fail(required, "missing (required)")
    name, description, periodic, settings, tracking = _header(data, chk, path, lines)
    coord = _coordinate(data["coordinate"], chk)
    gen_raw = data.get("generator")
    generator = None
    if gen_raw is not None:
        chk.mapping(gen_raw, "generator", list(gen_raw) if isinstance(gen_raw, dict) else [])
        generator = _parse_generator(gen_raw, path, lines)
    ceiling = max_points if max_points is not None else settings.max_points
    frames, frames_dir = _frames(data["frames"], chk, path.parent, coord, gen_raw is not None,
                                 ceiling or DEFAULT_MAX_POINTS, direction=tracking.direction)
    return ScanManifest(path=path, name=name, coordinate=coord, frames=frames, periodic=periodic,
                        analysis=settings, tracking=tracking, generator=generator,
                        generator_raw=gen_raw,
                        frames_directory=frames_dir, description=description)


def _header(data, chk: KeyChecker, path, lines) -> tuple:
    """The parts every manifest shares, 1-D or plane: name, description,
    periodic, and the checked ``analysis`` and ``tracking`` sections."""
    name = chk.string(data["name"], "name")
    if "/" in name or "\\" in name or name.startswith("."):
        chk.fail("name", f"must be usable as a folder name, got {name!r}")
    description = chk.string(data["description"], "description") if "description" in data else ""
    if len(description) > MAX_DESCRIPTION_CHARS:
        chk.fail("description", f"{len(description)} characters long, more than the "
                                f"{MAX_DESCRIPTION_CHARS} a description may take (it is copied "
                                "into every output); put long notes in a file beside the manifest")
    periodic = chk.boolean(data["periodic"], "periodic") if "periodic" in data else False
    sections = []
    for key, cls in (("analysis", AnalysisSettings), ("tracking", TrackingSettings)):
        raw = data.get(key) or {}
        if not isinstance(raw, dict):
            chk.fail(key, "expected a mapping of settings")
        try:
            sections.append(cls.from_mapping(raw, path=path))
        except ConfigError as exc:
            raise ConfigError(exc.message, path, exc.key, lines.get(exc.key)) from None
    return (name, description, periodic, *sections)


def _parse_generator(raw, path, lines):
    """Validate the ``generator`` section (:mod:`trackscan.io.generator_config`)."""
    try:
        return parse_generator_config(raw, path=path)
    except ConfigError as exc:
        if exc.lineno is None and exc.key in lines:
            raise ConfigError(exc.message, path, exc.key, lines[exc.key]) from None
        raise
