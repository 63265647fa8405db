"""Plane scans (manifests with two ``coordinates``) in ``analyze`` and ``refine``.

Not a subcommand of its own: ``trackscan analyze`` and ``trackscan refine``
hand a plane manifest to the functions here, which print the structures and
boundaries instead of the 1-D change table.
"""

from __future__ import annotations

import sys

from trackscan.cli.outputs import wrote_line
from trackscan.progress import TextProgress
from trackscan.tracking import describe_change

__all__ = ["analyze_plane_command", "refine_plane_command", "plane_summary_lines"]


def _point(values) -> str:
    return "(" + ", ".join(f"{v:.6g}" for v in values) + ")"


def plane_summary_lines(scan: dict) -> list:
    """The printed summary of a plane scan (PlaneScanResult), as lines."""
    from trackscan.report.structure_map import structure_words

    frames = scan.frames
    elements = list(frames[0].elements) if frames else []
    c1, c2 = scan.scan.coordinates
    lines = [f"plane scan {scan.scan.name}: {len(frames)} frames over "
             f"{c1.label} ({c1.unit}) and {c2.label} ({c2.unit}), "
             f"{len(scan.structures)} structure(s), {len(scan.boundaries)} boundary point(s)"]
    for s in scan.structures:
        lines.append(f"  structure {s.number}: {structure_words(s, elements)}; "
                     f"{len(s.frames)} frame(s)")
    rows = [("#", "structures", "bracket", "mechanism", "events")]
    for n, b in enumerate(scan.boundaries, start=1):
        a, z = b.bracket
        rows.append((str(n), f"{b.structures[0]}→{b.structures[1]}",
                     f"{_point(a)} → {_point(z)}", b.mechanism, describe_change(b, elements)))
    if len(rows) > 1:
        widths = [max(len(r[i]) for r in rows) for i in range(4)]
        for r in rows:
            lines.append("  ".join(c.ljust(w) for c, w in zip(r[:4], widths)) + "  " + r[4])
    bad = scan.incomplete_frames
    if bad:
        lines.append("warning: frame(s) " + ", ".join(str(k) for k in bad) +
                     " fail Poincaré–Hopf (critical points may be missing)")
    return lines


def _write(args, scan, out, manifest, progress=None):
    from trackscan.analysis import write_scan
    from trackscan.cli.outputs import write_or_drop_report

    path = out / "scan.json"
    write_scan(path, scan)
    html = write_or_drop_report(args, path, out, source_dir=manifest.base_dir,
                                progress=progress)
    return path, html



def analyze_plane_command(args, manifest, out) -> int:
    """``trackscan analyze`` on a plane manifest, into the output folder `out`."""
    from trackscan.maps import analyze_plane

    progress = TextProgress()
    scan = analyze_plane(manifest, out_dir=out, jobs=args.jobs, progress=progress,
                         dask=args.dask)
    path, html = _write(args, scan, out, manifest, progress)
    progress.close()
    for line in plane_summary_lines(scan):
        print(line)
    print(wrote_line(path, html))
    sys.stdout.flush()
    return 0


def refine_plane_command(args, manifest, out) -> int:
    """``trackscan refine`` on a plane manifest (into `out`): along the boundary edges only."""
    from trackscan.errors import InputError
    from trackscan.maps.refine import refine_plane
    from trackscan.refine.backends import make_backend

    if args.suggest:
        raise InputError("--suggest is not available for plane scans yet; add a generator",
                         manifest.path)
    backend = make_backend(jobs=args.jobs, dask=args.dask)
    progress = TextProgress()
    try:
        scan, result = refine_plane(manifest, tolerance=args.tolerance,
                                    tolerance2=getattr(args, "tolerance2", None),
                                    max_evaluations=args.max_evaluations, jobs=args.jobs,
                                    out_dir=out, backend=backend, progress=progress,
                                    subdivide=getattr(args, "subdivide", False))
    finally:
        backend.close()
    path, html = _write(args, scan, out, manifest)
    progress.close()
    print(f"refine: {result.message}; {result.evaluations} new frame(s) this run on "
          f"{result.edges} boundary edge(s)"
          + (f" ({result.added_edges} edge(s) added inside grid cells)"
             if result.added_edges else "")
          + f", {result.total_evaluations} in all")
    for line in plane_summary_lines(scan):
        print(line)
    print(wrote_line(path, html))
    sys.stdout.flush()
    return 0
