"""Write the change-point report of an analysed scan.

Reads DIR/scan.json (or the given scan.json) and writes report.html (one
self-contained page), report.md with its PNG figures, changes.csv and
critical_points.csv into the report folder (default: the folder of scan.json).
"""

from __future__ import annotations

from pathlib import Path

from trackscan.errors import InputError


def add_arguments(parser) -> None:
    """Arguments of ``trackscan report``."""
    parser.add_argument("scan", metavar="DIR|scan.json",
                        help="folder holding scan.json, or the scan.json file")
    parser.add_argument("--out", metavar="DIR", default=None,
                        help="report folder (default: the folder of scan.json)")
    parser.add_argument("--source-dir", metavar="DIR", default=None,
                        help="folder the frames' source paths are relative to, for the density "
                             "maps (default: beside scan.json, then the current folder)")
    parser.add_argument("--no-date", action="store_true",
                        help="leave the date out of the report (byte-identical reruns)")


def run(args) -> int:
    """Write the report; prints the path of report.html."""
    from trackscan.progress import TextProgress
    from trackscan.report import write_report

    from trackscan.cli.outputs import output_folder

    src = Path(args.scan)
    if not src.exists():
        raise InputError("no such scan.json or folder", src)
    # a folder is trackscan's only when its marker says so: the user's own
    # report.md next to a copied scan.json is never replaced
    with output_folder(args.out if args.out else (src if src.is_dir() else src.parent)) as out:
        progress = TextProgress()
        files = write_report(src, out, source_dir=args.source_dir,
                             date=None if args.no_date else "today", progress=progress)
        progress.close()
    print(f"report: {files.html}")
    print(f"        {files.markdown} ({len(files.images)} figures), {files.changes_csv.name}, "
          f"{files.critical_points_csv.name}")
    return 0
