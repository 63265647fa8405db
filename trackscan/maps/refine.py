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
    REFINE_KEY, assemble_plane, run_generator, boundary_edges, edge_frame, ensure_plane_frames,
    load_plane_frames, place_plane_frame, structure_labels,
)
from trackscan.maps.plane import along_value, edge_frames, plane_edges
from trackscan.progress import report

__all__ = ["PlaneRefineResult", "refine_plane", "plane_tolerances", "new_cell_edges",
           "round_point", "NEW_EDGE"]

#: ``method`` of the refine record of a frame made as the end of an added edge.
NEW_EDGE = "new-edge"

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
    added_edges : int
        Mid-line edges added inside grid cells by this run.
    converged : bool
        Every bracket on every boundary edge is at most its tolerance (after
        the last pass over them).
    limited : bool
        Some edge stopped where its grids cannot narrow a change further.
    message : str
    per_edge : list of dict
        ``edge`` (the two grid frames' values), ``along``, ``evaluations``,
        ``converged``, ``message``.
    """

    evaluations: int = 0
    total_evaluations: int = 0
    edges: int = 0
    added_edges: int = 0
    converged: bool = True
    limited: bool = False
    message: str = ""
    per_edge: list = field(default_factory=list)


def plane_tolerances(tolerance, tolerance2=None) -> tuple:
    """Tolerances along the first and the second coordinate (each in its unit)."""
    return (float(tolerance), float(tolerance if tolerance2 is None else tolerance2))


def round_point(values) -> tuple:
    """A point of the plane with both values rounded as generated frames are named."""
    from trackscan.model import round_value

    return tuple(round_value(v) for v in values)


def new_cell_edges(frames, values, numbers, added=()) -> list:
    """Mid-line edges to add inside the grid cells that a boundary crosses.

    A cell is four grid frames; a side is crossed when the structure is not
    the same along it.  When a boundary crosses two opposite sides only, it
    runs across the cell, and the mid-line parallel to those sides (which
    must cut it) is added; when it crosses adjacent sides or more than two
    (a corner, or lines meeting inside the cell), both mid-lines are added.

    Returns
    -------
    list of (((v1, v2), (v1, v2)), (side, side))
        Each new edge's two ends (rounded, low end first) and, per end, the
        grid side it lies on as ``(end a, end b, axis)``; edges already in
        `added` are left out.
    """
    refined = [f.refine is not None for f in frames]
    grid = {v: k for k, v in enumerate(values) if not refined[k]}
    axes = [sorted({v[0] for v in grid}), sorted({v[1] for v in grid})]
    crossed = set()
    for e in plane_edges(values, refined):
        if len({numbers[k] for k in edge_frames(e, values)}) > 1:
            crossed.add((values[e.a], values[e.b]))
    known = {tuple(sorted((tuple(p), tuple(q)))) for p, q in added}
    out = []
    for x0, x1 in zip(axes[0], axes[0][1:]):
        for y0, y1 in zip(axes[1], axes[1][1:]):
            corners = [(x0, y0), (x1, y0), (x0, y1), (x1, y1)]
            if any(c not in grid for c in corners):
                continue
            bottom, top = ((x0, y0), (x1, y0)) in crossed, ((x0, y1), (x1, y1)) in crossed
            left, right = ((x0, y0), (x0, y1)) in crossed, ((x1, y0), (x1, y1)) in crossed
            n = bottom + top + left + right
            if n == 0:
                continue
            ym, xm = 0.5 * (y0 + y1), 0.5 * (x0 + x1)
            horizontal = (round_point((x0, ym)), round_point((x1, ym))), (
                ((x0, y0), (x0, y1), 1), ((x1, y0), (x1, y1), 1))
            vertical = (round_point((xm, y0)), round_point((xm, y1))), (
                ((x0, y0), (x1, y0), 0), ((x0, y1), (x1, y1), 0))
            if bottom and top and n == 2:
                lines = [horizontal]
            elif left and right and n == 2:
                lines = [vertical]
            else:
                lines = [horizontal, vertical]
            out.extend(ln for ln in lines if tuple(sorted(ln[0])) not in known)
    return out


def refine_plane(manifest, *, tolerance, tolerance2=None, max_evaluations: int | None = None,
                 jobs: int = 1, out_dir=None, backend=None, generator=None, progress=None,
                 subdivide: bool = False):
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
    subdivide : bool
        After the grid's boundary edges, add one mid-line edge in each grid
        cell a boundary crosses (:func:`new_cell_edges`), compute its two
        ends, and refine the new edges too (one quadtree level).

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
    from trackscan.io.manifest_2d import (generated_frame_name_2d, record_added_edges_2d,
                                          record_generated_frame_2d)
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
    backend = backend or LocalBackend(jobs)
    cache_dir = None if out_dir is None else Path(out_dir) / ".cache"
    folder = Path(manifest.frames_directory)
    source = ensure_plane_frames(manifest, backend=backend, progress=progress)
    units = [c.unit for c in manifest.coordinates]
    result = PlaneRefineResult()

    def compute(points, metas):
        """Generate, record and analyse frames at points of the plane (PlaneFrames)."""
        tasks = [(pt, os.fspath(folder / generated_frame_name_2d(pt)), os.fspath(folder))
                 for pt in points]
        folder.mkdir(parents=True, exist_ok=True)
        made = [None] * len(points)
        errors = []
        for i, out, exc in run_generator(backend, generator, tasks):
            if exc is not None:
                errors.append(exc)
                continue
            made[i] = out
            record_generated_frame_2d(manifest, {"file": Path(tasks[i][1]).name,
                                                 "values": list(points[i]),
                                                 "energy": out.energy, REFINE_KEY: metas[i]})
        if errors:
            raise errors[0]      # the frames that finished are recorded
        new = backend.analyse([t[1] for t in tasks], manifest.analysis,
                              periodic=manifest.periodic, cache_dir=cache_dir)
        return [place_plane_frame(manifest, f, t[1], pt, out.energy, {REFINE_KEY: meta})
                for t, out, f, meta, pt in zip(tasks, made, new, metas, points)]

    def current():
        m = load_manifest(manifest.path)
        fr = sorted(load_plane_frames(m, backend=backend, cache_dir=cache_dir,
                                      progress=progress), key=lambda f: tuple(f.values))
        vals = [tuple(f.values) for f in fr]
        nums, _ = structure_labels(fr)
        return m, fr, vals, nums

    def refine_edges(edges, frames, values):
        # the state of the plane is that of the last pass over its boundary edges
        result.converged, result.limited = True, False
        for n_edge, edge in enumerate(edges, start=1):
            ends = [list(values[edge.a]), list(values[edge.b])]
            line = [edge_frame(frames[k], edge.axis) for k in edge_frames(edge, values)]
            done_here = sum(1 for f in line if f.refine is not None)
            budget = None
            if max_evaluations is not None:
                budget = max(0, max_evaluations - result.total_evaluations) + done_here

            def evaluate(probes, edge=edge, ends=ends):
                points = [along_value(edge, p.value, values) for p in probes]
                metas = [dict(p.meta, edge=ends, along=edge.axis) for p in probes]
                return [edge_frame(f, edge.axis) for f in compute(points, metas)]

            def track(fr, axis=edge.axis):
                return track_scan(fr, settings=manifest.tracking, unit=units[axis])

            report(progress, "refine boundary edges", n_edge - 1, len(edges))
            res = refine_frames(line, evaluate=evaluate, tolerance=tols[edge.axis],
                                max_evaluations=budget, jobs=jobs, track=track,
                                gtol=manifest.analysis.gtol, progress=progress)
            result.evaluations += res.evaluations
            result.total_evaluations += res.evaluations
            result.converged = result.converged and res.converged
            result.limited = result.limited or bool(getattr(res, "limited", False))
            result.per_edge.append({"edge": ends, "along": edge.axis,
                                    "evaluations": res.evaluations,
                                    "converged": res.converged, "message": res.message})
            logger.info("edge %s -> %s: %s (%d new frames)", ends[0], ends[1], res.message,
                        res.evaluations)
        report(progress, "refine boundary edges", len(edges), len(edges))

    m, frames, values, numbers = current()
    result.total_evaluations = sum(1 for f in frames if f.refine is not None)
    edges = boundary_edges(frames, values, numbers, m.added_edges)
    refine_edges(edges, frames, values)
    if subdivide:
        m, frames, values, numbers = current()
        lines = new_cell_edges(frames, values, numbers, m.added_edges)
        if lines:
            have = {round_point(v) for v in values}
            last_round = max((int(f.refine.round or 0) for f in frames if f.refine is not None),
                             default=0)
            points, metas = [], []
            for (p, q), side in lines:
                for pt, (sa, sb, axis) in zip((p, q), side):
                    if pt in have or pt in points:
                        continue
                    points.append(pt)
                    metas.append({"round": last_round + 1, "method": NEW_EDGE,
                                  "bracket": [sa[axis], sb[axis]], "edge": [list(sa), list(sb)],
                                  "along": axis})
            budget_left = (None if max_evaluations is None
                           else max(0, max_evaluations - result.total_evaluations))
            if budget_left is not None and len(points) > budget_left:
                points, metas = points[:budget_left], metas[:budget_left]
            if points:
                compute(points, metas)
                result.evaluations += len(points)
                result.total_evaluations += len(points)
            record_added_edges_2d(manifest, [pq for pq, _ in lines])
            result.added_edges = len(lines)
        m, frames, values, numbers = current()
        edges = boundary_edges(frames, values, numbers, m.added_edges)
        refine_edges(edges, frames, values)
    result.edges = len(edges)
    if result.converged:
        result.message = f"every boundary bracket is at most its tolerance ({len(edges)} edges)"
    elif result.limited and all(e["converged"] or "resolution" in e["message"]
                                for e in result.per_edge[-len(edges):]):
        result.message = ("every boundary bracket is at most its tolerance or as narrow as "
                          "the grids resolve")
    else:
        result.message = "some boundary brackets are still wider than the tolerance"
    final = load_manifest(manifest.path)
    frames = load_plane_frames(final, backend=backend, cache_dir=cache_dir)
    summary = {"tolerance": list(tols), "max_evaluations": max_evaluations,
               "evaluations": result.total_evaluations, "boundary_edges": result.edges,
               "converged": result.converged, "resolution_limited": result.limited,
               "message": result.message,
               "added_edges": len(m.added_edges),
               "strategy": ("along boundary edges, with one added mid-line edge in each grid "
                            "cell a boundary crosses" if subdivide else
                            "along boundary grid edges only (no new edges)")}
    scan = assemble_plane(final, frames, source=source, out_dir=out_dir, tolerance=tols,
                          refine_summary=summary)
    return scan, result
