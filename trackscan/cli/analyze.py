"""Analyse every frame of a scan, follow its critical points, report the changes.

Analyses all frames (in parallel with --jobs N processes; frames still to be
generated are generated first), tracks the critical points from frame to
frame, prints a table of the structural changes (bracket, events, mechanism)
and writes DIR/scan.json (default DIR: reports/<scan name>/ under the
current folder).  Per-frame results are cached in DIR/.cache, keyed by each
cube file's content, the analysis settings and the trackscan version, so a
rerun analyses only new or changed frames.  The same input gives the same
scan.json, byte for byte.  --dask ADDRESS runs the frame analyses on a
dask.distributed scheduler instead of local processes.

One run at a time writes into DIR (and generates into a frames folder): a
second run stops at once with one line (exit code 2).  trackscan replaces
only files it wrote there (listed in DIR/.trackscan-output).
"""

from __future__ import annotations

import math
import sys
from pathlib import Path

from trackscan.analysis import analyze_scan, write_scan
from trackscan.io.manifest import load_manifest
from trackscan.cli.outputs import (add_report_argument, output_folder, write_or_drop_report,
                                   wrote_line)
from trackscan.progress import TextProgress
from trackscan.tracking import describe_change


def add_arguments(parser) -> None:
    parser.add_argument("manifest", help="scan manifest (YAML)")
    parser.add_argument("--out", metavar="DIR", default=None,
                        help="output folder (default: reports/<scan name>/)")
    parser.add_argument("--jobs", "-j", metavar="N", type=int, default=1,
                        help="worker processes for the frame analyses (default 1)")
    parser.add_argument("--dask", metavar="ADDRESS", default=None,
                        help="dask.distributed scheduler for the frame analyses (extra 'dask'; "
                             "its workers must see the cube files)")
    add_report_argument(parser)


def _bracket(ch, unit) -> str:
    a, b = ch.bracket
    return f"{a:.6g} → {b:.6g} {unit}".strip()


def _estimate(ch, unit) -> str:
    """``65.8609 ± 0.0047 °`` with the change's quoted uncertainty."""
    if ch.estimate is None:
        return ""
    u = ch.uncertainty
    if u is None or u.value is None:
        return f"{ch.estimate:.6g} {unit}".strip()
    digits = max(0, -math.floor(math.log10(u.value)) + 1) if u.value > 0 else 6
    how = u.source if u.source == "bracket" else f"{u.source}: {ch.estimate_method}"
    return f"{ch.estimate:.{digits}f} ± {u.value:.2g} {unit} ({how})".strip()


def change_table(scan) -> list:
    """The one table of changes that analyze, refine and demo print.

    Columns: number, frames, bracket, estimate ± uncertainty (what sets the
    ±), mechanism, events.
    """
    unit = scan.scan.coordinate.unit if scan.scan.coordinate is not None else ""
    elements = list(scan.frames[0].elements) if scan.frames else []
    rows = [("#", "frames", "bracket", "estimate", "mechanism", "events")]
    for n, ch in enumerate(scan.changes, start=1):
        mech = ch.mechanism + (" (resolution-limited)" if ch.resolution_limited else "")
        rows.append((str(n), "–".join(scan.frame_names(ch)), _bracket(ch, unit),
                     _estimate(ch, unit), mech, describe_change(ch, elements)))
    widths = [max(len(r[i]) for r in rows) for i in range(5)]
    return ["  ".join(c.ljust(w) for c, w in zip(r[:5], widths)) + "  " + r[5] for r in rows]


def summary_lines(scan) -> list:
    """The printed summary of a :class:`trackscan.model.ScanResult`, as lines."""
    frames = scan.frames
    elements = list(frames[0].elements) if frames else []
    coord = scan.scan.coordinate
    unit = coord.unit if coord is not None else ""
    label = coord.label if coord is not None else ""
    lines = [f"scan {scan.scan.name}: {len(frames)} frames along {label}, "
             f"{len(scan.structures)} structure(s), {len(scan.changes)} change(s)"]
    if not scan.changes:
        lines.append("no structural change inside the scan")
    else:
        lines += change_table(scan)
        for n, ch in enumerate(scan.changes, start=1):
            if ch.note:
                lines.append(f"note {n}: {ch.note}")
            if ch.structure_type_changed is False:
                lines.append(f"note {n}: the structure type is unchanged; only which atoms "
                             "are linked differs")
    bad = scan.incomplete_frames
    if bad:
        lines.append("warning: frame(s) " + ", ".join(scan.frame_name(k) for k in bad) +
                     " fail Poincaré–Hopf (critical points may be missing); changes next to "
                     "them are unresolved")
    for w in scan.early_warnings:
        lines.append(f"early warning: {w.message}")
    return lines


def run(args) -> int:
    manifest = load_manifest(args.manifest)
    with output_folder(args.out if args.out else Path("reports") / manifest.name) as out:
        if getattr(manifest, "dimensions", 1) == 2:
            from trackscan.cli.plane_scans import analyze_plane_command

            return analyze_plane_command(args, manifest, out)
        return _analyze(args, manifest, out)


def _analyze(args, manifest, out) -> int:
    progress = TextProgress()
    scan = analyze_scan(manifest, out_dir=out, jobs=args.jobs, progress=progress,
                        dask=args.dask)
    path = out / "scan.json"
    write_scan(path, scan)
    html = write_or_drop_report(args, path, out, source_dir=manifest.base_dir,
                                progress=progress)
    progress.close()
    for line in summary_lines(scan):
        print(line)
    print(wrote_line(path, html))
    sys.stdout.flush()
    return 0
