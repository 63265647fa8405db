"""Run a demo scan end to end: generate the frames, analyse, track, refine, report.

The default demo opens the cyclopropane ring on the built-in promolecular
model (no quantum-chemistry program needed; about 20 s on 2 cores): its
inputs are copied from scans/cyclopropane-opening/ into
reports/cyclopropane-opening/input/, the frames are generated there, each
structural change is narrowed to --tolerance with a few new frames, and
scan.json, report.html, report.md and the CSV tables are written to
reports/cyclopropane-opening/.  `--scan vinylidene-shift` runs the PySCF demo
instead (needs the qc extra).
"""

from __future__ import annotations

import os
import shutil
import sys
import time
from pathlib import Path

from trackscan.errors import InputError

DEFAULT_SCAN = "cyclopropane-opening"
#: Default refinement tolerance: this fraction of the spacing of the listed
#: frames (3 degrees -> 0.5 degree for the cyclopropane demo).  Much finer
#: brackets take the coalescing pair below the grid's resolution, and the
#: change is then reported as unresolved rather than as a fold.
TOLERANCE_FRACTION = 1.0 / 6.0


def scans_folder() -> Path:
    """The scans/ folder of the source tree this package was installed from."""
    import trackscan

    return Path(trackscan.__file__).resolve().parent.parent / "scans"


def available() -> list:
    """Names of the demo scans (folders of scans/ holding a scan.yaml)."""
    root = scans_folder()
    if not root.is_dir():
        return []
    return sorted(p.name for p in root.iterdir() if (p / "scan.yaml").is_file())


def add_arguments(parser) -> None:
    """Arguments of ``trackscan demo``."""
    parser.add_argument("--scan", default=DEFAULT_SCAN, metavar="NAME",
                        help=f"demo scan to run (default {DEFAULT_SCAN}; see scans/README.md)")
    parser.add_argument("--out", metavar="DIR", default=None,
                        help="output folder (default: reports/<scan name>/)")
    parser.add_argument("--jobs", "-j", metavar="N", type=int, default=1,
                        help="worker processes for the frame analyses (default 1)")
    parser.add_argument("--tolerance", "-t", metavar="T", type=float, default=None,
                        help="refine each change bracket to this width, in the coordinate's "
                             "unit (default: a sixth of the spacing of the listed frames)")
    parser.add_argument("--no-refine", action="store_true",
                        help="analyse the listed frames only; add no new frames")


def _copy_inputs(src: Path, dst: Path) -> None:
    """Copy a scan folder's inputs (not its generated frames) into `dst`."""
    dst.mkdir(parents=True, exist_ok=True)
    for item in sorted(src.iterdir()):
        if item.name.startswith(".") or item.name == "frames" or item.name == "__pycache__":
            continue
        if item.is_dir():
            shutil.copytree(item, dst / item.name, dirs_exist_ok=True)
        else:
            shutil.copy2(item, dst / item.name)


def _default_tolerance(manifest) -> float:
    """A sixth of the smallest step of the listed frames (not the refined ones,
    so that a rerun asks for the same tolerance and adds no frame)."""
    from trackscan.analysis.assemble import recorded_frames

    records = recorded_frames(manifest)
    listed = [e for e in manifest.frames
              if not isinstance((records.get(os.path.normcase(os.path.abspath(e.file))) or {})
                                .get("refine"), dict)]
    values = sorted({e.value for e in listed})
    steps = [b - a for a, b in zip(values, values[1:])]
    return TOLERANCE_FRACTION * min(steps)


def run(args) -> int:
    """Run the demo; prints the summary and where the results are."""
    from trackscan.analysis import analyze_scan, write_scan
    from trackscan.cli.analyze import summary_lines
    from trackscan.io.manifest import load_manifest
    from trackscan.progress import TextProgress
    from trackscan.report import write_report

    names = available()
    if args.scan not in names:
        where = scans_folder()
        known = ", ".join(names) if names else f"none found in {where}"
        raise InputError(f"no demo scan {args.scan!r} (available: {known})")
    if args.tolerance is not None and not args.tolerance > 0:
        raise InputError(f"--tolerance must be > 0, got {args.tolerance:g}")
    src = scans_folder() / args.scan
    from trackscan.cli.outputs import output_folder
    from trackscan.io.ownership import claim_path

    with output_folder(args.out if args.out else Path("reports") / args.scan) as out:
        inputs = out / "input"
        t0 = time.perf_counter()
        claim_path(inputs)                  # copied with shutil: claimed first
        _copy_inputs(src, inputs)
        manifest = load_manifest(inputs / "scan.yaml")
        progress = TextProgress()
        refine_lines = []
        if args.no_refine:
            scan = analyze_scan(manifest, out_dir=out, jobs=args.jobs, progress=progress)
        else:
            from trackscan.refine.scan import refine_manifest

            tolerance = args.tolerance or _default_tolerance(manifest)
            scan, result = refine_manifest(manifest, tolerance=tolerance, jobs=args.jobs,
                                           out_dir=out, progress=progress)
            refine_lines = [f"refine: {result.message}; {result.total_evaluations} new frame(s)"]
        path = out / "scan.json"
        write_scan(path, scan)
        files = write_report(path, out, source_dir=inputs)
        progress.close()
    elapsed = time.perf_counter() - t0
    print(f"density source: {scan.scan.density_source}")
    for line in summary_lines(scan) + refine_lines:
        print(line)
    print(f"results in {os.fspath(out)}/ ({elapsed:.0f} s):")
    print(f"  {os.fspath(path)}")
    print(f"  {os.fspath(files.html)}")
    print(f"  {os.fspath(files.markdown)}, {files.changes_csv.name}, "
          f"{files.critical_points_csv.name}")
    sys.stdout.flush()
    return 0
