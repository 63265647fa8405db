"""Refine a plane scan along its boundaries only.

Each boundary edge (two grid neighbours of different structure) is a 1-D
scan along the coordinate that varies on it: the refine loop of 1-D scans,
:func:`trackscan.refine.loop.refine_frames`, narrows its changes with the
same proposals (fold extrapolation, path-offset interpolation for conflicts,
bisection otherwise) and the same worst-case guarantee, computing each new
frame with the manifest's generator at the point of the plane on the edge.
The plane is never filled with a uniform fine grid: new frames lie on
boundary edges only, so their number grows with the length of the boundary
curves (in grid steps) times the bisection count of one step, not with the
area of the plane.

Every new frame is written, and entered in the frames folder's
``record.json`` with its ``refine`` record (which carries the edge), before
the loop takes its next step, so an interrupted refine resumes exactly when
rerun, as in 1-D.
"""

from __future__ import annotations

import logging
import os
from dataclasses import dataclass, field
from pathlib import Path

from trackscan.errors import InputError
from trackscan.maps.analyze import (
    REFINE_KEY, assemble_plane, boundary_edges, edge_frame, ensure_plane_frames,
    load_plane_frames, place_plane_frame, structure_labels,
)
from trackscan.maps.plane import along_value, edge_frames
from trackscan.progress import report

__all__ = ["PlaneRefineResult", "refine_plane", "plane_tolerances"]

logger = logging.getLogger(__name__)


@dataclass
class PlaneRefineResult:
    """Outcome of :func:`refine_plane`.

    Attributes
    ----------
    evaluations : int
        Frames computed by this call.
    total_evaluations : int
        Frames made by refinement, earlier runs included.
    edges : int
        Boundary edges refined.
    converged : bool
        Every bracket on every boundary edge is at most its tolerance.
    message : str
    per_edge : list of dict
        ``edge`` (the two grid frames' values), ``along``, ``evaluations``,
        ``converged``, ``message``.
    """

    evaluations: int = 0
    total_evaluations: int = 0
    edges: int = 0
    converged: bool = True
    message: str = ""
    per_edge: list = field(default_factory=list)


def plane_tolerances(tolerance, tolerance2=None) -> tuple:
    """Tolerances along the first and the second coordinate (each in its unit)."""
    return (float(tolerance), float(tolerance if tolerance2 is None else tolerance2))


def refine_plane(manifest, *, tolerance, tolerance2=None, max_evaluations: int | None = None,
                 jobs: int = 1, out_dir=None, backend=None, generator=None, progress=None):
    """Narrow the brackets of every boundary edge of a plane scan.

    Parameters
    ----------
    manifest : ScanManifest2D
    tolerance : float
        Target bracket width along the first coordinate (its unit), and
        along the second unless `tolerance2` is given.
    tolerance2 : float, optional
        Target bracket width along the second coordinate (its unit).
    max_evaluations : int, optional
        Budget of refinement frames for the whole plane (earlier runs count).
    jobs : int
        Values per round on an edge (and local worker processes).
    out_dir : path-like, optional
        Report folder; ``.cache`` in it holds the frame analyses.
    backend : LocalBackend or DaskBackend, optional
    generator : Generator, optional
        Default: built from the manifest.
    progress : callable, optional

    Returns
    -------
    scan : PlaneScanResult
        :func:`trackscan.maps.analyze.assemble_plane`, with ``scan.refine``
        summarising the run.
    result : PlaneRefineResult

    Raises
    ------
    InputError
        No generator, or a bad tolerance, budget or job count.
    GeneratorError
        A generator call failed (finished frames stay recorded).
    """
    from trackscan.generators import make_generator
    from trackscan.io.manifest import load_manifest
    from trackscan.io.manifest_2d import generated_frame_name_2d, record_generated_frame_2d
    from trackscan.refine.backends import LocalBackend
    from trackscan.refine.loop import check_options, refine_frames
    from trackscan.tracking import track_scan

    tols = plane_tolerances(tolerance, tolerance2)
    for t in tols:
        check_options(tolerance=t, max_evaluations=max_evaluations, jobs=jobs)
    if generator is None:
        if getattr(manifest.generator, "source", "none") == "none":
            raise InputError("refine needs a generator section to compute new frames",
                             manifest.path)
        generator = make_generator(manifest.generator, coordinate=manifest.coordinates)
        config = manifest.generator
    else:
        config = None
    backend = backend or LocalBackend(jobs)
    cache_dir = None if out_dir is None else Path(out_dir) / ".cache"
    folder = Path(manifest.frames_directory)
    source = ensure_plane_frames(manifest, backend=backend, progress=progress)
    manifest = load_manifest(manifest.path)
    frames = load_plane_frames(manifest, backend=backend, cache_dir=cache_dir, progress=progress)
    frames.sort(key=lambda f: tuple(f.values))
    values = [tuple(f.values) for f in frames]
    numbers, _ = structure_labels(frames)
    edges = boundary_edges(frames, values, numbers)
    units = [c.unit for c in manifest.coordinates]
    result = PlaneRefineResult(total_evaluations=sum(1 for f in frames if f.refine is not None))

    for n_edge, edge in enumerate(edges, start=1):
        ends = [list(values[edge.a]), list(values[edge.b])]
        on = edge_frames(edge, values)
        line = [edge_frame(frames[k], edge.axis) for k in on]
        done_here = sum(1 for f in line if f.refine is not None)
        budget = None
        if max_evaluations is not None:
            budget = max(0, max_evaluations - result.total_evaluations) + done_here

        def evaluate(probes, edge=edge, ends=ends):
            points = [along_value(edge, p.value, values) for p in probes]
            tasks = [(pt, os.fspath(folder / generated_frame_name_2d(pt)), os.fspath(folder))
                     for pt in points]
            folder.mkdir(parents=True, exist_ok=True)
            metas = [dict(p.meta, edge=ends, along=edge.axis) for p in probes]
            made = [None] * len(probes)
            errors = []
            for i, out, exc in backend.generate(tasks, generator=generator, config=config,
                                                coordinate=manifest.coordinates):
                if exc is not None:
                    errors.append(exc)
                    continue
                made[i] = out
                record_generated_frame_2d(manifest, {"file": Path(tasks[i][1]).name,
                                                     "values": list(points[i]),
                                                     "energy": out.energy,
                                                     REFINE_KEY: metas[i]})
            if errors:
                raise errors[0]
            new = backend.analyse([t[1] for t in tasks], manifest.analysis,
                                  periodic=manifest.periodic, cache_dir=cache_dir)
            return [edge_frame(place_plane_frame(manifest, f, t[1], pt, out.energy,
                                                 {REFINE_KEY: meta}), edge.axis)
                    for t, out, f, meta, pt in zip(tasks, made, new, metas, points)]

        def track(fr, axis=edge.axis):
            return track_scan(fr, unit=units[axis])

        report(progress, "refine boundary edges", n_edge - 1, len(edges))
        res = refine_frames(line, evaluate=evaluate, tolerance=tols[edge.axis],
                            max_evaluations=budget, jobs=jobs, track=track,
                            gtol=manifest.analysis.gtol, progress=progress)
        result.evaluations += res.evaluations
        result.total_evaluations += res.evaluations
        result.edges += 1
        result.converged = result.converged and res.converged
        result.per_edge.append({"edge": ends, "along": edge.axis, "evaluations": res.evaluations,
                                "converged": res.converged, "message": res.message})
        logger.info("edge %s -> %s: %s (%d new frames)", ends[0], ends[1], res.message,
                    res.evaluations)
    report(progress, "refine boundary edges", len(edges), len(edges))
    result.message = (f"every boundary bracket is at most its tolerance ({len(edges)} edges)"
                      if result.converged else
                      "some boundary brackets are still wider than the tolerance")
    final = load_manifest(manifest.path)
    frames = load_plane_frames(final, backend=backend, cache_dir=cache_dir)
    summary = {"tolerance": list(tols), "max_evaluations": max_evaluations,
               "evaluations": result.total_evaluations, "boundary_edges": result.edges,
               "converged": result.converged, "message": result.message,
               "strategy": "along boundary grid edges only (no new edges)"}
    scan = assemble_plane(final, frames, source=source, out_dir=out_dir, tolerance=tols,
                          refine_summary=summary)
    return scan, result
