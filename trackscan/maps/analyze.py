"""Analyse a plane scan: every frame, its structure, and the boundaries between structures.

``analyze_plane(manifest)`` makes the missing frames with the manifest's
generator, analyses every frame with the scan runner
(:func:`trackscan.analysis.runner.analyse_frames`, cached like a 1-D scan),
and assembles the result of a plane scan (a
:class:`~trackscan.maps.model.PlaneScanResult`; DESIGN.md "2-D scans"):

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

import dataclasses
import logging
import os
from pathlib import Path

from trackscan import __version__
from trackscan.errors import InputError
from trackscan.maps.model import (PLANE_DIMENSIONS, Boundary, PlaneFrame, PlaneHeader,
                                  PlaneScanResult)
from trackscan.maps.plane import Edge, along_value, edge_frames, plane_edges
from trackscan.model import Coordinate, Frame, ProbeRecord, Structure, Uncertainty, round_energy
from trackscan.progress import report
from trackscan.tracking import TrackingSettings, track_scan

__all__ = ["analyze_plane", "assemble_plane", "ensure_plane_frames", "load_plane_frames",
           "structure_labels", "track_edge", "boundary_edges", "place_plane_frame", "edge_frame",
           "plane_boundaries"]

logger = logging.getLogger(__name__)

#: Key of the refine bookkeeping in a record entry.
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
        for n, (i, out, exc) in enumerate(run_generator(backend, gen, tasks), start=1):
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


def run_generator(backend, generator, tasks) -> list:
    """Generator calls on a backend: ``[(index, GeneratedFrame or None, exception or None)]``."""
    done = []
    backend.generate(generator, tasks, lambda i, out, exc: done.append((i, out, exc)))
    return done


def _recorded(manifest) -> dict:
    """Record entries of generated frames, by resolved cube path."""
    from trackscan.io.manifest_2d import read_frame_record_2d

    folder = Path(manifest.frames_directory)
    return {os.path.normcase(os.path.abspath(folder / r["file"])): r
            for r in read_frame_record_2d(folder)}


def load_plane_frames(manifest, *, backend=None, cache_dir=None, progress=None) -> list:
    """Analysed frames of every frame of a plane scan (PlaneFrame), in manifest order.

    Each has ``values``, ``source`` (relative to the manifest), its energy
    when known, and the ``refine`` record of frames refinement made.
    """
    from trackscan.refine.backends import LocalBackend

    backend = backend or LocalBackend()
    entries = list(manifest.frames)
    frames = backend.analyse([e.file for e in entries], manifest.analysis,
                             periodic=manifest.periodic, cache_dir=cache_dir, progress=progress)
    recorded = _recorded(manifest)
    return [place_plane_frame(manifest, frame, entry.file, entry.values, entry.energy,
                              recorded.get(os.path.normcase(os.path.abspath(entry.file))))
            for entry, frame in zip(entries, frames)]


def place_plane_frame(manifest, frame, file, values, energy=None, record=None) -> PlaneFrame:
    """An analysed frame as a :class:`PlaneFrame` with its place in the plane (a new object).

    Parameters
    ----------
    manifest : ScanManifest2D
    frame : trackscan.model.Frame
    file : path-like
        Its cube; ``source`` is written relative to the manifest's folder.
    values : (float, float)
    energy : float, optional
    record : dict, optional
        Its entry in the record of generated frames (energy, ``refine``).
    """
    if energy is None and record is not None:
        energy = record.get("energy")
    meta = None if record is None else record.get(REFINE_KEY)
    fields = {f.name: getattr(frame, f.name) for f in dataclasses.fields(Frame)}
    fields.update(values=tuple(float(v) for v in values),
                  source=Path(os.path.relpath(file, manifest.base_dir)).as_posix(),
                  energy_hartree=round_energy(energy),
                  refine=ProbeRecord.from_dict(meta, "refine") if isinstance(meta, dict)
                  else getattr(frame, "refine", None))
    return PlaneFrame(**fields)


def structure_labels(frames) -> tuple:
    """Structure number of each frame and the table of structures.

    Each frame's structure key comes from tracking that frame on its own
    (:func:`trackscan.tracking.track_scan`): its bond paths by their ends,
    non-nuclear attractors, ring and cage counts.  Numbers go 1, 2, ... in
    order of first appearance in the order of `frames`.

    Returns
    -------
    numbers : list of int
    table : tuple of trackscan.model.Structure
    """
    keys, entries = [], []
    for f in frames:
        s = track_scan([dataclasses.replace(f, value=0.0)]).structures[0]
        keys.append((tuple(tuple(b) for b in s.bond_paths), tuple(s.non_nuclear), s.rings,
                     s.cages))
        entries.append(s)
    seen: dict = {}
    numbers, members, first = [], [], []
    for k, (key, s) in enumerate(zip(keys, entries)):
        if key not in seen:
            seen[key] = len(seen) + 1
            members.append([])
            first.append(s)
        numbers.append(seen[key])
        members[seen[key] - 1].append(k)
    table = tuple(dataclasses.replace(s, number=n, frames=tuple(m))
                  for n, (s, m) in enumerate(zip(first, members), start=1))
    return numbers, table


def track_edge(frames, edge: Edge, values, *, tracking=None, unit="", tolerance=None,
               gtol=None) -> tuple:
    """Track the frames on one edge like a 1-D scan along its varying coordinate.

    Parameters
    ----------
    frames : sequence of PlaneFrame
        All frames of the plane, in scan order.
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
    tracked : TrackingResult
        :func:`track_scan` on them (``value``: the varying coordinate).
    changes : tuple of trackscan.model.Change
        Its changes with estimate, method and uncertainty
        (:func:`trackscan.refine.estimates.annotate_changes`).
    """
    from trackscan.refine.estimates import annotate_changes
    from trackscan.refine.indicators import DEFAULT_GTOL

    on = edge_frames(edge, values)
    tracked = track_scan([edge_frame(frames[k], edge.axis) for k in on],
                         settings=tracking or TrackingSettings(), unit=unit)
    changes = annotate_changes(tracked.frames, tracked.changes, tolerance=tolerance,
                               gtol=DEFAULT_GTOL if gtol is None else gtol)
    return on, tracked, changes


def edge_frame(frame: PlaneFrame, axis: int) -> PlaneFrame:
    """The frame as a frame of the 1-D scan along `axis` (``value`` = that coordinate)."""
    return dataclasses.replace(frame, value=float(frame.values[axis]))


def boundary_edges(frames, values, numbers, added=()) -> list:
    """Edges (grid edges, then `added` ones) on which the structure is not the same throughout.

    An edge qualifies when its two ends differ, or when a frame on it (made
    by refinement, e.g. the end of an added edge) has another structure.
    """
    refined = [f.refine is not None for f in frames]
    return [e for e in plane_edges(values, refined, added)
            if len({numbers[k] for k in edge_frames(e, values)}) > 1]


def _boundary(change, edge, on, values, numbers) -> Boundary:
    i, j = (on[k] for k in change.between)
    estimate = change.estimate
    if estimate is None:
        estimate = 0.5 * (float(change.bracket[0]) + float(change.bracket[1]))
    return Boundary(
        between=(i, j), bracket=(tuple(values[i]), tuple(values[j])),
        mechanism=change.mechanism, structures=(numbers[i], numbers[j]),
        estimate=along_value(edge, estimate, values), uncertainty=change.uncertainty,
        events=change.events, edge=(edge.a, edge.b), along=edge.axis,
        estimate_method=change.estimate_method, evaluations=change.evaluations or 0,
        refine=change.refine, note=change.note,
        structure_type_changed=change.structure_type_changed,
        mechanism_candidate=change.mechanism_candidate, fit=change.fit,
        resolution_limited=change.resolution_limited)


def _unresolved_boundary(edge, values, numbers) -> Boundary:
    lo, hi = values[edge.a][edge.axis], values[edge.b][edge.axis]
    return Boundary(
        between=(edge.a, edge.b), bracket=(tuple(values[edge.a]), tuple(values[edge.b])),
        mechanism="unresolved", structures=(numbers[edge.a], numbers[edge.b]),
        estimate=along_value(edge, 0.5 * (lo + hi), values),
        uncertainty=Uncertainty(half_width=0.5 * abs(hi - lo), model_error=None),
        edge=(edge.a, edge.b), along=edge.axis, estimate_method="bracket-midpoint",
        evaluations=0, note="the structure numbers of the two ends differ but tracking along "
                            "the edge finds no change")


def plane_boundaries(frames, values, numbers, *, units, tracking=None, tolerance=None,
                     gtol=None, added=()) -> list:
    """Every boundary of the plane: the changes along each boundary edge.

    `tolerance`: None, or the refine tolerances along the two coordinates.
    An edge whose ends differ in structure while tracking along it finds no
    change (the structure keys differ only in labels tracking matches up) gets
    a boundary with mechanism ``unresolved`` and a note.
    """
    out = []
    for edge in boundary_edges(frames, values, numbers, added):
        tol = None if tolerance is None else tolerance[edge.axis]
        on, _, changes = track_edge(frames, edge, values, tracking=tracking,
                                    unit=units[edge.axis], tolerance=tol, gtol=gtol)
        if changes:
            out.extend(_boundary(ch, edge, on, values, numbers) for ch in changes)
        else:
            out.append(_unresolved_boundary(edge, values, numbers))
    return out


def assemble_plane(manifest, frames, *, source: str, tracking=None, out_dir=None,
                    tolerance=None, refine_summary=None) -> PlaneScanResult:
    """The result of an analysed plane scan (write it with ``write_scan``).

    Parameters
    ----------
    manifest : ScanManifest2D
    frames : sequence of PlaneFrame
        Analysed and placed frames (:func:`load_plane_frames`), any order.
    source : str
        Density source, one line.
    tracking : TrackingSettings, optional
    out_dir : path-like, optional
        Output folder (the manifest's path is stored relative to it).
    tolerance : (float, float), optional
        Refine tolerances along the first and the second coordinate.
    refine_summary : dict, optional
        ``scan.refine``: what a refine run did.

    Returns
    -------
    PlaneScanResult
    """
    tracking = tracking or getattr(manifest, "tracking", None) or TrackingSettings()
    frames = sorted(frames, key=lambda f: tuple(f.values))
    values = [tuple(f.values) for f in frames]
    if len(set(values)) != len(values):
        raise InputError("two frames of the plane share their coordinate values")
    numbers, table = structure_labels(frames)
    frames = [dataclasses.replace(f, index=k, structure=n)
              for k, (f, n) in enumerate(zip(frames, numbers))]
    units = [c.unit for c in manifest.coordinates]
    boundaries = plane_boundaries(frames, values, numbers, units=units, tracking=tracking,
                                  tolerance=tolerance, gtol=manifest.analysis.gtol,
                                  added=getattr(manifest, "added_edges", ()))
    logger.info("%s: %d frames, %d structures, %d boundary points", manifest.name,
                len(frames), len(table), len(boundaries))
    header = PlaneHeader(
        name=manifest.name,
        coordinates=tuple(Coordinate.from_dict(c.to_dict(), f"scan.coordinates[{i}]")
                          for i, c in enumerate(manifest.coordinates)),
        density_source=source, settings=manifest.analysis.to_dict(),
        tracking=tracking.to_dict(), periodic=bool(manifest.periodic),
        trackscan_version=__version__, description=manifest.description or None,
        manifest=None if out_dir is None else
        Path(os.path.relpath(manifest.path, out_dir)).as_posix(),
        refine=refine_summary)
    return PlaneScanResult(
        scan=header, frames=tuple(frames), structures=table, boundaries=tuple(boundaries),
        incomplete_frames=tuple(k for k, f in enumerate(frames) if not f.usable),
        dimensions=PLANE_DIMENSIONS)


def analyze_plane(manifest, *, out_dir=None, jobs=1, tracking=None, progress=None,
                  dask=None) -> PlaneScanResult:
    """Analyse every frame of a plane scan and find its boundaries.

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
    PlaneScanResult
        See :func:`assemble_plane`.
    """
    from trackscan.io.manifest import load_manifest
    from trackscan.refine.backends import make_backend

    if jobs < 1:
        raise InputError(f"--jobs must be at least 1, got {jobs}")
    backend = make_backend(jobs=jobs, dask=dask)
    try:
        source = ensure_plane_frames(manifest, backend=backend, progress=progress)
        manifest = load_manifest(manifest.path)
        cache_dir = None if out_dir is None else Path(out_dir) / ".cache"
        frames = load_plane_frames(manifest, backend=backend, cache_dir=cache_dir,
                                   progress=progress)
    finally:
        backend.close()
    return assemble_plane(manifest, frames, source=source, tracking=tracking, out_dir=out_dir)
