"""The output folder of one command run, taken back when the input turns out bad.

``analyze``, ``refine`` and ``report`` need their output folder (for the
result cache) before they have read every frame, so bad input may only show
once the folder exists.  :func:`output_folder` opens it
(:func:`trackscan.io.output.open_output_dir`: checked, locked and guarded so
that only files trackscan wrote there are replaced) and, when this run created
it and then stops on an :class:`~trackscan.errors.InputError`, removes it
again: bad input leaves nothing behind.  A folder that existed before is
never removed.
"""

from __future__ import annotations

import contextlib
import logging
import os
import shutil
from pathlib import Path

from trackscan.errors import InputError
from trackscan.io.output import open_output_dir

__all__ = ["output_folder", "add_report_argument", "write_or_drop_report", "wrote_line"]

logger = logging.getLogger(__name__)


@contextlib.contextmanager
def output_folder(target):
    """Yield the prepared output folder; remove it on bad input if this run made it.

    Parameters
    ----------
    target : str or os.PathLike

    Yields
    ------
    Path
    """
    target = Path(target)
    created = not target.exists() and not target.is_symlink()
    try:
        with open_output_dir(target) as out:
            yield out
    except InputError:
        if created:
            logger.debug("bad input: removing the output folder %s made by this run", target)
            shutil.rmtree(target, ignore_errors=True)
        raise


def add_report_argument(parser) -> None:
    """The ``--no-report`` option of the commands that write scan.json."""
    parser.add_argument("--no-report", action="store_true",
                        help="write scan.json only (no figures, tables or CSV; faster); "
                             "draw the report later with 'trackscan report DIR'. A report "
                             "an earlier run left in DIR is removed, since it would "
                             "describe another result")


def write_or_drop_report(args, scan_json, out, *, source_dir, progress=None):
    """Write the report beside `scan_json`, or with ``--no-report`` remove a stale one.

    Returns
    -------
    Path or None
        The report.html written, or None.
    """
    import sys

    from trackscan.report import write_report
    from trackscan.report.writer import remove_report

    if getattr(args, "no_report", False):
        removed = remove_report(out)
        if removed:
            print(f"removed the report of an earlier run from {out} ({len(removed)} files); "
                  f"draw a new one with: trackscan report {out}", file=sys.stderr)
        return None
    return write_report(scan_json, out, source_dir=source_dir, progress=progress).html


def wrote_line(scan_json, html) -> str:
    """The closing line of a command: scan.json, and the report when one was written."""
    return f"wrote {os.fspath(scan_json)}" + (f" and {os.fspath(html)}" if html else "")
