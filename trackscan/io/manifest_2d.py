"""Two-coordinate scan manifests: a plane of frames over two scanned coordinates.

Shape (``coordinates`` in place of ``coordinate``; every other key as in a
1-D manifest, :mod:`trackscan.io.manifest`)::

    name: h3-plane
    coordinates:                       # exactly two, each shaped like `coordinate:`
      - {label: H1-H2 distance, distance: [1, 2]}
      - {label: H2-H1-H3 angle, angle: [2, 1, 3]}
    frames:                            # a list (values measured when omitted) ...
      - {file: frames/a.cube, value: [1.5, 60.0], energy: -1.2}
    # ... or the full grid of values to compute with the generator:
    #     frames: {grid: [[1.4, 1.6, 1.8], [50, 60, 70]], directory: frames}
    # ... or a list of value pairs:  frames: {values: [[1.4, 50], [1.6, 60]]}
    # ... or cube files whose values are measured: frames: {glob: "frames/*.cube"}
    generator:
      geometry:
        xyz: start.xyz
        drive:                         # one drive per coordinate, in order
          - {distance: [1, 2], move: [2]}
          - {angle: [2, 1, 3], move: [3]}
      promolecule: {spacing: 0.2}
      # command: [prog, --r, "{value1}", --a, "{value2}", --out, "{cube}"]

Errors name the key path (``coordinates[1].unit``, ``frames.grid[0][2]``)
and the YAML line, as for 1-D manifests.  Frames that a generator made are
recorded in ``<directory>/record.json`` with their two ``values``.
"""

from __future__ import annotations

import glob as globmod
import json
from dataclasses import dataclass, field
from pathlib import Path

from trackscan.errors import ConfigError, ParseError
from trackscan.io.atomic import write_text_atomic
from trackscan.io.cube import DEFAULT_MAX_POINTS
from trackscan.io.keycheck import KeyChecker
from trackscan.settings import AnalysisSettings

__all__ = ["ScanManifest2D", "FrameEntry2D", "load_manifest_2d", "read_frame_record_2d",
           "record_generated_frame_2d", "generated_frame_name_2d", "read_added_edges_2d",
           "record_added_edges_2d", "DIMENSIONS"]

#: Number of scanned coordinates of a plane scan.
DIMENSIONS = 2

_FRAME_KEYS = ("file", "value", "energy")
_FRAMES_MAP_KEYS = ("glob", "values", "grid", "directory")


@dataclass(frozen=True)
class FrameEntry2D:
    """One frame of a plane scan.

    Attributes
    ----------
    file : Path
        Cube file (absolute); may not exist yet when a generator makes it.
    values : tuple of float
        The two coordinate values, each in its coordinate's unit.
    energy : float or None
        Total energy (hartree), when known.
    generated : bool
        True when the generator produces (or produced) the frame.
    """

    file: Path
    values: tuple
    energy: float | None = None
    generated: bool = False


@dataclass(frozen=True)
class ScanManifest2D:
    """A validated two-coordinate scan manifest.

    Attributes
    ----------
    path : Path
    name : str
    coordinates : tuple of Coordinate
        The two scanned coordinates.
    frames : tuple of FrameEntry2D
        Sorted by (value 1, value 2).
    periodic : bool
    analysis : AnalysisSettings
    generator : GeneratorConfig or None
    generator_raw : dict or None
    frames_directory : Path
    description : str
    tracking : TrackingSettings or None
        The ``tracking`` section (used along every edge).
    added_edges : tuple of ((v1, v2), (v1, v2))
        Edges refinement added inside grid cells (``--subdivide``), as
        recorded in ``record.json``; their ends are recorded frames.
    """

    path: Path
    name: str
    coordinates: tuple
    frames: tuple
    periodic: bool = False
    analysis: AnalysisSettings = field(default_factory=AnalysisSettings)
    generator: object = None
    generator_raw: dict | None = None
    frames_directory: Path | None = None
    description: str = ""
    added_edges: tuple = ()
    tracking: object = None

    dimensions = DIMENSIONS

    @property
    def base_dir(self) -> Path:
        """Folder of the YAML file; relative paths resolve against it."""
        return self.path.parent


def generated_frame_name_2d(values) -> str:
    """File name of a generated plane frame at `values` (stable, sortable)."""
    parts = [f"{float(v):+.6f}".replace("+", "p").replace("-", "m") for v in values]
    return f"frame_{parts[0]}_{parts[1]}.cube"


def _read_record(directory: Path) -> dict:
    rec = Path(directory) / "record.json"
    if not rec.exists():
        return {"frames": []}
    try:
        data = json.loads(rec.read_text(encoding="utf-8"))
        frames = data["frames"]
        assert isinstance(frames, list)
        for f in frames:
            assert isinstance(f["file"], str) and len(f["values"]) == DIMENSIONS
            assert all(isinstance(v, (int, float)) for v in f["values"])
        for e in data.get("edges", []):
            assert len(e) == 2 and all(len(p) == DIMENSIONS for p in e)
    except (ValueError, KeyError, TypeError, AssertionError):
        raise ParseError("broken record of generated frames (expected {\"frames\": "
                         "[{\"file\", \"values\": [v1, v2]}, ...]})", rec) from None
    return data


def read_added_edges_2d(directory: Path) -> tuple:
    """Edges that refinement added inside grid cells, from ``directory/record.json``."""
    return tuple((tuple(float(v) for v in p), tuple(float(v) for v in q))
                 for p, q in _read_record(directory).get("edges", []))


def record_added_edges_2d(manifest, edges) -> Path:
    """Add edges (pairs of points of the plane) to the record, atomically."""
    folder = Path(manifest.frames_directory)
    data = _read_record(folder)
    known = {tuple(tuple(float(v) for v in p) for p in e) for e in data.get("edges", [])}
    known |= {tuple(tuple(float(v) for v in p) for p in e) for e in edges}
    data["edges"] = [[list(p), list(q)] for p, q in sorted(known)]
    path = folder / "record.json"
    write_text_atomic(path, json.dumps(data, indent=1, sort_keys=True) + "\n")
    return path


def read_frame_record_2d(directory: Path) -> list:
    """Frames a generator recorded in ``directory/record.json`` (plane scans).

    Returns
    -------
    list of dict
        Each with ``file`` (relative to `directory`), ``values`` (two
        numbers) and optionally ``energy`` and ``refine``.
    """
    return _read_record(directory)["frames"]


def record_generated_frame_2d(manifest, entry: dict) -> Path:
    """Add (or replace) one frame in a plane scan's record of generated frames.

    Parameters
    ----------
    manifest : ScanManifest2D
    entry : dict
        ``file`` (name relative to the frames folder), ``values``, and
        optionally ``energy`` and ``refine``.

    Returns
    -------
    Path
        ``<frames_directory>/record.json``, rewritten atomically.
    """
    folder = Path(manifest.frames_directory)
    data = _read_record(folder)
    frames = [f for f in data["frames"] if f["file"] != entry["file"]]
    clean = {k: v for k, v in entry.items() if v is not None}
    clean["values"] = [float(v) for v in clean["values"]]
    frames.append(clean)
    frames.sort(key=lambda f: (tuple(float(v) for v in f["values"]), f["file"]))
    data["frames"] = frames
    path = folder / "record.json"
    write_text_atomic(path, json.dumps(data, indent=1, sort_keys=True) + "\n")
    return path


def _coordinates(data, chk: KeyChecker) -> tuple:
    from trackscan.io.manifest import _coordinate

    if not isinstance(data, list) or len(data) != DIMENSIONS:
        chk.fail("coordinates", "expected a list of two coordinates, each shaped like "
                                "coordinate: (label, unit, distance/angle/dihedral)")
    return tuple(_coordinate(c, chk, f"coordinates[{i}]") for i, c in enumerate(data))


def _pair(value, chk: KeyChecker, key: str) -> tuple:
    if not isinstance(value, list) or len(value) != DIMENSIONS:
        chk.fail(key, f"expected two numbers [value1, value2], got {value!r}")
    return tuple(chk.number(v, f"{key}[{i}]") for i, v in enumerate(value))


def _measured(file: Path, coords, chk: KeyChecker, key: str, max_points: int) -> tuple:
    from trackscan.io.manifest import _measured_value

    if any(c.kind is None for c in coords):
        chk.fail(f"{key}.value", "no value given and a coordinate has no measured definition "
                                 "(add coordinates[i].distance/angle/dihedral or "
                                 "value: [v1, v2] per frame)")
    return tuple(_measured_value(file, c, chk, key, max_points) for c in coords)


def _grid(raw, chk: KeyChecker) -> list:
    key = "frames.grid"
    if not isinstance(raw, list) or len(raw) != DIMENSIONS:
        chk.fail(key, "expected two lists of values, [[value1 ...], [value2 ...]]")
    axes = []
    for a, vals in enumerate(raw):
        if not isinstance(vals, list) or len(vals) < 2:
            chk.fail(f"{key}[{a}]", f"expected a list of at least two numbers, got {vals!r}")
        nums = [chk.number(v, f"{key}[{a}][{i}]") for i, v in enumerate(vals)]
        if len(set(nums)) != len(nums):
            chk.fail(f"{key}[{a}]", "values repeat")
        axes.append(nums)
    return [(v1, v2) for v1 in axes[0] for v2 in axes[1]]


def _frames(data, chk: KeyChecker, base: Path, coords, has_generator: bool, max_points: int):
    entries = []
    frames_dir = base / "frames"
    if isinstance(data, dict):
        chk.mapping(data, "frames", _FRAMES_MAP_KEYS)
        if "directory" in data:
            frames_dir = base / chk.string(data["directory"], "frames.directory")
        given = [k for k in ("glob", "values", "grid") if k in data]
        if len(given) > 1:
            chk.fail("frames", f"give one of glob, values or grid, not {' and '.join(given)}")
        if "glob" in data:
            pattern = chk.string(data["glob"], "frames.glob")
            files = [Path(f) for f in sorted(globmod.glob(str(base / pattern)))
                     if Path(f).is_file()]
            if not files and not has_generator:
                chk.fail("frames.glob", f"pattern {pattern!r} matches no file in {base}")
            entries = [FrameEntry2D(f, _measured(f, coords, chk, "frames.glob", max_points))
                       for f in files]
        elif "values" in data or "grid" in data:
            which = "values" if "values" in data else "grid"
            if not has_generator:
                chk.fail(f"frames.{which}", f"{which} without files need a generator section")
            if which == "grid":
                pairs = _grid(data["grid"], chk)
            else:
                vals = data["values"]
                if not isinstance(vals, list) or not vals:
                    chk.fail("frames.values", f"expected a non-empty list of [value1, value2], "
                                              f"got {vals!r}")
                pairs = [_pair(v, chk, f"frames.values[{i}]") for i, v in enumerate(vals)]
            entries = [FrameEntry2D(frames_dir / generated_frame_name_2d(p), p, generated=True)
                       for p in pairs]
        elif not has_generator:
            chk.fail("frames", "expected a list of frames, a glob, values or a grid")
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
            if not file.exists():
                chk.fail(f"{key}.file", f"frame file not found: {file}")
            if file.is_dir():
                chk.fail(f"{key}.file", f"is a directory, not a cube file: {file}")
            if "value" in item:
                values = _pair(item["value"], chk, f"{key}.value")
            else:
                values = _measured(file, coords, chk, key, max_points)
            energy = chk.number(item["energy"], f"{key}.energy") if "energy" in item else None
            entries.append(FrameEntry2D(file, values, energy))
    else:
        chk.fail("frames", "expected a list of frames, a glob, values or a grid, got "
                           f"{type(data).__name__}")
    known = {e.file.resolve(): k for k, e in enumerate(entries)}
    for rec in read_frame_record_2d(frames_dir):
        f = (frames_dir / rec["file"]).resolve()
        if f in known:
            e = entries[known[f]]
            entries[known[f]] = FrameEntry2D(e.file, e.values, rec.get("energy", e.energy),
                                             e.generated)
            continue
        entries.append(FrameEntry2D(f, tuple(float(v) for v in rec["values"]),
                                    rec.get("energy"), generated=True))
        known[f] = len(entries) - 1
    entries.sort(key=lambda e: (e.values, str(e.file)))
    for a, b in zip(entries, entries[1:]):
        if a.values == b.values:
            raise ConfigError(f"two frames share the coordinate values "
                              f"[{a.values[0]:g}, {a.values[1]:g}]: {a.file.name} and "
                              f"{b.file.name}", chk.path, "frames")
    return tuple(entries), frames_dir


def load_manifest_2d(data: dict, chk: KeyChecker, path: Path, lines: dict, *,
                     max_points: int | None = None) -> ScanManifest2D:
    """Validate the parsed YAML of a plane scan (called by ``load_manifest``).

    Parameters
    ----------
    data : dict
        The manifest's top-level mapping (has ``coordinates``).
    chk : KeyChecker
    path : Path
        The YAML file (absolute).
    lines : dict
        Key path -> YAML line.
    max_points : int, optional
        Ceiling on cube sizes when headers are read.

    Returns
    -------
    ScanManifest2D

    Raises
    ------
    ConfigError
        With the key path and line of the first problem.
    """
    from trackscan.io.manifest import _header, _parse_generator

    if "coordinate" in data:
        chk.fail("coordinate", "give either coordinate (a 1-D scan) or coordinates "
                               "(two, for a plane scan), not both")
    for required in ("name", "frames"):
        if required not in data:
            chk.fail(required, "missing (required)")
    name, description, periodic, settings, tracking = _header(data, chk, path, lines)
    coords = _coordinates(data["coordinates"], chk)
    gen_raw = data.get("generator")
    generator = None
    if gen_raw is not None:
        chk.mapping(gen_raw, "generator", list(gen_raw) if isinstance(gen_raw, dict) else [])
        generator = _parse_generator(gen_raw, path, lines)
        drive = getattr(getattr(generator, "geometry", None), "drive", None)
        if drive is not None and not isinstance(drive, tuple):
            chk.fail("generator.geometry.drive", "a plane scan drives two coordinates: give a "
                                                 "list of two drives, one per coordinate")
    ceiling = max_points if max_points is not None else settings.max_points
    frames, frames_dir = _frames(data["frames"], chk, path.parent, coords, gen_raw is not None,
                                 ceiling or DEFAULT_MAX_POINTS)
    return ScanManifest2D(path=path, name=name, coordinates=coords, frames=frames,
                          periodic=periodic, analysis=settings, generator=generator,
                          generator_raw=gen_raw, frames_directory=frames_dir,
                          description=description,
                          added_edges=read_added_edges_2d(frames_dir), tracking=tracking)
