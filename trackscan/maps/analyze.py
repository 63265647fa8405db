"""Analyse a plane scan: every frame, its structure, and the boundaries between structures.

``analyze_plane(manifest)`` makes the missing frames with the manifest's
generator, analyses every frame with the scan runner
(:func:`trackscan.analysis.runner.analyse_frames`, cached like a 1-D scan),
and assembles the scan.json dict of a plane scan (DESIGN.md "2-D scans"):

- ``dimensions: 2``, ``scan.coordinates: [{label, unit, ...}, {...}]``;
- each frame with ``values: [v1, v2]`` and its ``structure`` number;
- ``structures``: one entry per structure (bond paths, rings, cages,
  non-nuclear attractors, frames);
- ``boundaries``: one per structural change found along a grid edge whose
  two ends differ, each tracked by :func:`trackscan.tracking.track_scan`
  on the frames of the edge, so its events, mechanism, estimate and
  uncertainty are those a 1-D scan along that edge gives.
"""

from __future__ import annotations

import copy
import logging
import os
from pathlib import Path

from trackscan import __version__
from trackscan.analysis.scanjson import SCHEMA
from trackscan.errors import InputError
from trackscan.maps.plane import Edge, along_value, edge_frames, plane_edges
from trackscan.progress import report
from trackscan.tracking import TrackingSettings, track_scan

__all__ = ["analyze_plane", "plane_scan_dict", "ensure_plane_frames", "load_plane_frames",
           "structure_labels", "track_edge", "boundary_edges", "PLANE_DIMENSIONS"]

logger = logging.getLogger(__name__)

#: ``dimensions`` of a plane scan's scan.json.
PLANE_DIMENSIONS = 2

REFINE_KEY = "refine"


def _generator(manifest):
    from trackscan.generators import make_generator

    return make_generator(manifest.generator, coordinate=manifest.coordinates)


def ensure_plane_frames(manifest, *, backend=None, progress=None) -> str:
    """Generate the plane scan's missing generated frames; name the density source.

    Parameters
    ----------
    manifest : ScanManifest2D
    backend : LocalBackend or DaskBackend, optional
        Where the generator runs (default: this process).
    progress : callable, optional

    Returns
    -------
    str
        The generator's description, or ``"cube files"``.

    Raises
    ------
    InputError
        A listed cube is missing and no generator can make it.
    GeneratorError
        The generator failed (frames finished before stay recorded).
    """
    from trackscan.io.manifest_2d import record_generated_frame_2d
    from trackscan.refine.backends import LocalBackend

    missing = [e for e in manifest.frames if not Path(e.file).is_file()]
    gen = _generator(manifest) if manifest.generator is not None else None
    for e in missing:
        if not e.generated or gen is None:
            raise InputError("frame file does not exist", e.file)
    if missing:
        backend = backend or LocalBackend()
        folder = Path(manifest.frames_directory)
        folder.mkdir(parents=True, exist_ok=True)
        tasks = [(e.values, os.fspath(e.file), os.fspath(folder)) for e in missing]
        report(progress, "generate frames", 0, len(tasks))
        errors = []
        for n, (i, out, exc) in enumerate(backend.generate(tasks, generator=gen,
                                                           config=manifest.generator,
                                                           coordinate=manifest.coordinates),
                                          start=1):
            if exc is not None:
                errors.append(exc)
                continue
            record_generated_frame_2d(manifest, {"file": Path(tasks[i][1]).name,
                                                 "values": list(missing[i].values),
                                                 "energy": out.energy})
            report(progress, "generate frames", n, len(tasks))
        if errors:
            raise errors[0]
    return gen.describe() if gen is not None else "cube files"


def _recorded(manifest) -> dict:
    """Record entries of generated frames, by resolved cube path."""
    from trackscan.io.manifest_2d import read_frame_record_2d

    folder = Path(manifest.frames_directory)
    return {os.path.normcase(os.path.abspath(folder / r["file"])): r
            for r in read_frame_record_2d(folder)}


def load_plane_frames(manifest, *, backend=None, cache_dir=None, progress=None) -> list:
    """Analysed frame dicts of every frame of a plane scan, in scan order.

    Each gets ``values``, ``source`` (relative to the manifest), its energy
    when known, and the ``refine`` record of frames refinement made.
    """
    from trackscan.refine.backends import LocalBackend

    backend = backend or LocalBackend()
    entries = list(manifest.frames)
    frames = backend.analyse([e.file for e in entries], manifest.analysis,
                             periodic=manifest.periodic, cache_dir=cache_dir, progress=progress)
    recorded = _recorded(manifest)
    for entry, frame in zip(entries, frames):
        describe_plane_frame(manifest, frame, entry.file, entry.values, entry.energy,
                             recorded.get(os.path.normcase(os.path.abspath(entry.file))))
    return frames


def describe_plane_frame(manifest, frame, file, values, energy=None, record=None) -> dict:
    """Give an analysed frame dict its plane-scan keys (in place; returned)."""
    frame["values"] = [float(v) for v in values]
    frame["source"] = Path(os.path.relpath(file, manifest.base_dir)).as_posix()
    if energy is None and record is not None:
        energy = record.get("energy")
    if energy is not None:
        frame["energy_hartree"] = float(energy)
    if record is not None and isinstance(record.get(REFINE_KEY), dict):
        frame[REFINE_KEY] = dict(record[REFINE_KEY])
    return frame


def structure_labels(frames) -> tuple:
    """Structure number of each frame and the table of structures.

    Each frame's structure key comes from tracking that frame on its own
    (:func:`trackscan.tracking.track_scan`): its bond paths by their ends,
    non-nuclear attractors, ring and cage counts.  Numbers go 1, 2, ... in
    order of first appearance in scan order.

    Returns
    -------
    numbers : list of int
    table : list of dict
        ``number``, ``frames``, ``bond_paths``, ``rings``, ``cages``,
        ``non_nuclear``.
    """
    keys, entries = [], []
    for f in frames:
        g = dict(f)
        g["value"] = 0.0
        s = track_scan([g])["structures"][0]
        key = (tuple(tuple(b) for b in s["bond_paths"]), tuple(s["non_nuclear"]),
               s["rings"], s["cages"])
        keys.append(key)
        entries.append(s)
    seen: dict = {}
    numbers = []
    table = []
    for k, (key, s) in enumerate(zip(keys, entries)):
        if key not in seen:
            seen[key] = len(seen) + 1
            table.append({"number": seen[key], "frames": [], "bond_paths": s["bond_paths"],
                          "non_nuclear": s["non_nuclear"], "rings": s["rings"],
                          "cages": s["cages"]})
        numbers.append(seen[key])
        table[seen[key] - 1]["frames"].append(k)
    return numbers, table


def _edge_copy(frame, axis) -> dict:
    g = copy.copy(frame)
    g["value"] = float(frame["values"][axis])
    return g


def track_edge(frames, edge: Edge, values, *, tracking=None, unit="", tolerance=None,
               gtol=None) -> tuple:
    """Track the frames on one edge like a 1-D scan along its varying coordinate.

    Parameters
    ----------
    frames : sequence of dict
        All frames of the plane, in scan order (with ``values``).
    edge : Edge
    values : sequence of (float, float)
    tracking : TrackingSettings, optional
    unit : str
        Unit of the varying coordinate.
    tolerance : float, optional
        Refine tolerance, recorded with each change.
    gtol : float, optional
        Gradient tolerance of the analysis (for the estimates).

    Returns
    -------
    on : list of int
        Plane indices of the edge's frames, in order along it.
    tracked : dict
        :func:`track_scan` result on them (``value``: the varying coordinate).
    changes : list of dict
        Its changes with estimate, method and uncertainty
        (:func:`trackscan.refine.estimates.annotate_changes`).
    """
    from trackscan.refine.estimates import annotate_changes
    from trackscan.refine.indicators import DEFAULT_GTOL

    on = edge_frames(edge, values)
    tracked = track_scan([_edge_copy(frames[k], edge.axis) for k in on],
                         settings=tracking or TrackingSettings(), unit=unit)
    changes = annotate_changes(tracked["frames"], tracked["changes"], tolerance=tolerance,
                               gtol=DEFAULT_GTOL if gtol is None else gtol)
    return on, tracked, changes


def boundary_edges(frames, values, numbers) -> list:
    """Grid edges whose two ends have different structures."""
    refined = [isinstance(f.get(REFINE_KEY), dict) for f in frames]
    return [e for e in plane_edges(values, refined) if numbers[e.a] != numbers[e.b]]


def _boundary(change, edge, on, values, numbers) -> dict:
    i, j = (on[k] for k in change["between"])
    b = {
        "between": [i, j],
        "bracket": [list(values[i]), list(values[j])],
        "estimate": list(along_value(edge, change["estimate"], values)),
        "estimate_method": change.get("estimate_method"),
        "uncertainty": change.get("uncertainty"),
        "mechanism": change["mechanism"],
        "events": change["events"],
        "structures": [numbers[i], numbers[j]],
        "edge": [edge.a, edge.b],
        "along": edge.axis,
        "evaluations": change.get("evaluations", 0),
    }
    for key in ("note", "refine", "structure_type_changed", "mechanism_candidate"):
        if change.get(key) is not None:
            b[key] = change[key]
    return b


def plane_boundaries(frames, values, numbers, *, units, tracking=None, tolerance=None,
                     gtol=None) -> list:
    """Every boundary of the plane: the changes along each boundary edge.

    `tolerance`: None, or the refine tolerances along the two coordinates.
    An edge whose ends differ in structure while tracking along it finds no
    change (the structure keys differ only in labels tracking matches up) gets
    a boundary with mechanism ``unresolved`` and a note.
    """
    out = []
    for edge in boundary_edges(frames, values, numbers):
        tol = None if tolerance is None else tolerance[edge.axis]
        on, tracked, changes = track_edge(frames, edge, values, tracking=tracking,
                                          unit=units[edge.axis], tolerance=tol, gtol=gtol)
        if not changes:
            half = 0.5 * abs(values[edge.b][edge.axis] - values[edge.a][edge.axis])
            mid = 0.5 * (values[edge.a][edge.axis] + values[edge.b][edge.axis])
            changes = [{"between": [on.index(edge.a), on.index(edge.b)], "estimate": mid,
                        "estimate_method": "bracket-midpoint",
                        "uncertainty": {"half_width": half, "model_error": None},
                        "mechanism": "unresolved", "events": [],
                        "note": "the structure numbers of the two ends differ but tracking "
                                "along the edge finds no change"}]
        out.extend(_boundary(ch, edge, on, values, numbers) for ch in changes)
    return out


def plane_scan_dict(manifest, frames, *, source: str, tracking=None, out_dir=None,
                    tolerance=None) -> dict:
    """The scan.json dict of an analysed plane scan.

    Parameters
    ----------
    manifest : ScanManifest2D
    frames : list of dict
        Analysed frames (with ``values``), in scan order.
    source : str
        Density source, one line.
    tracking : TrackingSettings, optional
    out_dir : path-like, optional
        Output folder (the manifest's path is stored relative to it).
    tolerance : (float, float), optional
        Refine tolerances along the first and the second coordinate.
    """
    tracking = tracking or TrackingSettings()
    order = sorted(range(len(frames)), key=lambda k: tuple(frames[k]["values"]))
    frames = [copy.deepcopy(frames[k]) for k in order]
    values = [tuple(f["values"]) for f in frames]
    if len(set(values)) != len(values):
        raise InputError("two frames of the plane share their coordinate values")
    numbers, table = structure_labels(frames)
    for k, (f, n) in enumerate(zip(frames, numbers)):
        f["index"] = k
        f["structure"] = n
    units = [c.unit for c in manifest.coordinates]
    boundaries = plane_boundaries(frames, values, numbers, units=units, tracking=tracking,
                                  tolerance=tolerance, gtol=manifest.analysis.gtol)
    logger.info("%s: %d frames, %d structures, %d boundary points", manifest.name,
                len(frames), len(table), len(boundaries))
    scan = {
        "name": manifest.name,
        "coordinates": [c.to_dict() for c in manifest.coordinates],
        "density_source": source,
        "settings": manifest.analysis.to_dict(),
        "tracking": tracking.to_dict(),
        "periodic": bool(manifest.periodic),
        "trackscan_version": __version__,
    }
    if manifest.description:
        scan["description"] = manifest.description
    if out_dir is not None:
        scan["manifest"] = Path(os.path.relpath(manifest.path, out_dir)).as_posix()
    return {
        "schema": SCHEMA,
        "dimensions": PLANE_DIMENSIONS,
        "scan": scan,
        "frames": frames,
        "structures": table,
        "boundaries": boundaries,
        "incomplete_frames": [k for k, f in enumerate(frames) if f.get("complete") is False],
    }


def analyze_plane(manifest, *, out_dir=None, jobs=1, tracking=None, progress=None,
                  dask=None) -> dict:
    """Analyse every frame of a plane scan and find its boundaries; the scan.json dict.

    Parameters
    ----------
    manifest : ScanManifest2D
    out_dir : path-like, optional
        Output folder; ``.cache`` in it holds the per-frame results.
    jobs : int
        Worker processes.
    tracking : TrackingSettings, optional
    progress : callable, optional
    dask : str or dask.distributed.Client, optional
        Run generator calls and analyses on this scheduler.

    Returns
    -------
    dict
        See :func:`plane_scan_dict`.
    """
    from trackscan.refine.backends import make_backend

    if jobs < 1:
        raise InputError(f"--jobs must be at least 1, got {jobs}")
    backend = make_backend(jobs=jobs, dask=dask)
    try:
        source = ensure_plane_frames(manifest, backend=backend, progress=progress)
        from trackscan.io.manifest import load_manifest

        manifest = load_manifest(manifest.path)
        cache_dir = None if out_dir is None else Path(out_dir) / ".cache"
        frames = load_plane_frames(manifest, backend=backend, cache_dir=cache_dir,
                                   progress=progress)
    finally:
        backend.close()
    return plane_scan_dict(manifest, frames, source=source, tracking=tracking, out_dir=out_dir)
