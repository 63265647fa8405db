"""Narrow each structural change of a scan with as few new densities as possible.

With a generator in the manifest: proposes coordinate values inside each
change bracket (fold extrapolation from the coalescing pair's squared
separation where catastrophe theory applies, bisection otherwise), makes and
analyses the frames there, tracks again, and repeats until every bracket is
at most --tolerance (coordinate units) or --max-evaluations new frames are
spent; then writes DIR/scan.json and the report (default DIR:
reports/<scan name>/).  Every new frame is saved and entered in the frames
folder's record.json before the next step: rerun the same command after an
interruption and it continues without repeating a calculation.

--jobs P computes P values per round (several brackets at once, or a
(P+1)-section of one); --dask ADDRESS sends the generator calls and the
frame analyses to a dask.distributed scheduler instead (extra 'dask').

A plane scan (two coordinates) is refined along its boundary edges only:
each bracket to at most --tolerance along the first coordinate and
--tolerance2 (default --tolerance) along the second, in their units;
--subdivide adds one mid-line edge inside each grid cell a boundary crosses
(computing its two ends) and refines it too, to follow curved boundaries.

--suggest (no generator needed): prints the next values and writes the
geometry of each (from generator.geometry) to DIR/suggested/*.xyz; compute
the densities in your own program, add the cubes to the scan's frames, and
run it again.

An interrupted refine (an error, SIGINT, SIGTERM, even SIGKILL) repeats no
finished calculation when rerun: frames are entered in the record before
they start and settled on the next start.  One run at a time writes into
DIR and generates into the frames folder; a second stops with one line
(exit code 2).
"""

from __future__ import annotations

import sys
from pathlib import Path

from trackscan.cli.analyze import summary_lines
from trackscan.cli.outputs import add_report_argument, write_or_drop_report, wrote_line
from trackscan.io.manifest import load_manifest
from trackscan.progress import TextProgress


def add_arguments(parser) -> None:
    parser.add_argument("manifest", help="scan manifest (YAML)")
    parser.add_argument("--tolerance", "-t", metavar="T", type=float, required=True,
                        help="target bracket width, in the coordinate's unit")
    parser.add_argument("--tolerance2", metavar="T2", type=float, default=None,
                        help="plane scans: target bracket width along the second coordinate, "
                             "in its unit (default: --tolerance)")
    parser.add_argument("--subdivide", action="store_true",
                        help="plane scans: also add a mid-line edge in each grid cell a "
                             "boundary crosses, and refine it (one quadtree level)")
    parser.add_argument("--max-evaluations", metavar="N", type=int, default=None,
                        help="at most N new frames for the scan (counting earlier runs)")
    parser.add_argument("--jobs", "-j", metavar="P", type=int, default=1,
                        help="values per round and local worker processes (default 1)")
    parser.add_argument("--out", metavar="DIR", default=None,
                        help="output folder (default: reports/<scan name>/)")
    parser.add_argument("--suggest", action="store_true",
                        help="only print the next values and write their geometries")
    parser.add_argument("--dask", metavar="ADDRESS", default=None,
                        help="dask.distributed scheduler for generator calls and analyses")
    add_report_argument(parser)


def _backend(args):
    from trackscan.refine.backends import make_backend

    return make_backend(jobs=args.jobs, dask=args.dask)


def run(args) -> int:
    from trackscan.cli.outputs import output_folder

    manifest = load_manifest(args.manifest)
    with output_folder(args.out if args.out else Path("reports") / manifest.name) as out:
        if getattr(manifest, "dimensions", 1) == 2:
            from trackscan.cli.plane_scans import refine_plane_command

            return refine_plane_command(args, manifest, out)
        return _refine(args, manifest, out)


def _refine(args, manifest, out) -> int:
    from trackscan.analysis import write_scan
    from trackscan.refine.scan import refine_manifest, suggest_values

    backend = _backend(args)
    try:
        if args.suggest:
            sugg = suggest_values(manifest, tolerance=args.tolerance, jobs=args.jobs,
                                  out_dir=out, backend=backend)
            if not sugg:
                print(f"every bracket is at most {args.tolerance:g}: nothing to compute")
                return 0
            unit = manifest.coordinate.unit
            print(f"compute the density at {len(sugg)} value(s) of {manifest.coordinate.label}:")
            for s in sugg:
                where = s["xyz"] or "(no generator.geometry: no geometry written)"
                print(f"  {s['value']:.6f} {unit}  {s['method']}  {where}")
            print("then add the cubes to the frames of the scan and run this again")
            return 0
        progress = TextProgress()
        scan, result = refine_manifest(manifest, tolerance=args.tolerance,
                                       max_evaluations=args.max_evaluations, jobs=args.jobs,
                                       out_dir=out, backend=backend, progress=progress)
        progress.close()
    finally:
        backend.close()
    path = out / "scan.json"
    write_scan(path, scan)
    html = write_or_drop_report(args, path, out, source_dir=manifest.base_dir)
    print(f"refine: {result.message}; {result.evaluations} new frame(s) this run, "
          f"{result.total_evaluations} in all")
    for line in summary_lines(scan):
        print(line)
    print(wrote_line(path, html))
    sys.stdout.flush()
    return 0
