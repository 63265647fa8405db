"""Write the report folder: report.html, report.md, figures (PNG, SVG, PDF), CSV and XYZ files."""

from __future__ import annotations

import datetime
import logging
from dataclasses import dataclass
from pathlib import Path

from trackscan import __version__
from trackscan.errors import InputError
from trackscan.io.atomic import write_bytes_atomic, write_text_atomic
from trackscan.report import tables
from trackscan.progress import report
from trackscan.report.assemble import TASK, build_document, report_steps
from trackscan.report.estimate_geometry import xyz_name
from trackscan.report.html import render_html
from trackscan.report.markdown import image_name, render_markdown
from trackscan.report.scan_view import load_scan

__all__ = ["write_report", "ReportFiles", "remove_report", "REPORT_FILES", "REPORT_SUFFIXES"]

logger = logging.getLogger(__name__)


#: Fixed names of the report's files in its folder (of a 1-D scan and of a plane scan).
REPORT_FILES = ("report.html", "report.md", "changes.csv", "critical_points.csv",
                "structures.csv", "boundaries.csv")

#: Suffixes of the report's other files there (figures, geometries at the estimates).
REPORT_SUFFIXES = (".png", ".svg", ".pdf", ".xyz")


class ReportFolderError(InputError):
    """The report folder cannot be created."""


@dataclass(frozen=True)
class ReportFiles:
    """Paths written by :func:`write_report`."""

    html: Path
    markdown: Path
    changes_csv: Path
    critical_points_csv: Path
    images: tuple
    vector_images: tuple = ()
    geometries: tuple = ()


def write_report(scan, out_dir, *, source_dir=None, date="today", progress=None) -> ReportFiles:
    """Write the change-point report of a scan result.

    Parameters
    ----------
    scan : str, os.PathLike or dict
        A scan.json file, the folder holding it, or its parsed content.
        Relative frame ``source`` paths are looked up under `source_dir`,
        then beside scan.json, then in the current folder.
    out_dir : str or os.PathLike
        Report folder (created if missing).  Existing report files in it
        are replaced; other files are left alone.
    source_dir : str or os.PathLike, optional, keyword-only
        Folder the frames' relative ``source`` paths refer to (the scan
        manifest's folder); the density maps re-read the cubes from there.
    date : str or None, keyword-only
        Date shown in the header: ``"today"`` (default, UTC, ISO format),
        any string, or None for no date (byte-identical reruns).
    progress : callable, optional, keyword-only
        Receives :class:`trackscan.progress.ProgressEvent` objects (task
        ``"report"``).

    Returns
    -------
    ReportFiles

    Raises
    ------
    trackscan.errors.InputError
        `scan` is not a readable scan result, or `out_dir` cannot be made.

    Notes
    -----
    Every figure is written as ``NAME.png`` (300 dpi), ``NAME.svg`` and
    ``NAME.pdf``; the geometry at each change's estimate as
    ``geometry_changeK.xyz`` (Å).
    """
    from trackscan.report.structure_map import plane_scan, write_plane_report

    plane = plane_scan(scan)
    if plane is not None:
        return write_plane_report(plane, out_dir, date=date, progress=progress)
    data = load_scan(scan, source_dir=source_dir)
    out = Path(out_dir)
    if out.exists() and not out.is_dir():
        raise ReportFolderError("the report folder is a file", out)
    try:
        out.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise ReportFolderError(f"cannot create the report folder ({exc.strerror})", out) \
            from None
    if date == "today":
        date = datetime.datetime.now(datetime.timezone.utc).date().isoformat()
    logger.info("report of scan %r into %s", data.name, out)
    geometries = {}
    doc = build_document(data, date=date, progress=progress, geometries=geometries)
    footer = (f"Made by trackscan {__version__} from scan.json"
              + (f" on {date}" if date else "") + ".")
    steps = report_steps(data)
    report(progress, TASK, steps - 1, steps, "writing files")
    changes_csv = out / "changes.csv"
    cps_csv = out / "critical_points.csv"
    tables.write_csv(changes_csv, *tables.change_csv(data))
    tables.write_csv(cps_csv, *tables.critical_point_csv(data))
    images, vectors = [], []
    for fig in doc.figures():
        path = out / image_name(fig)
        write_bytes_atomic(path, fig.png)
        images.append(path)
        for ext, content in (("svg", fig.svg), ("pdf", fig.pdf)):
            vector = path.with_suffix(f".{ext}")
            write_bytes_atomic(vector, content)
            vectors.append(vector)
    xyz = []
    for k, geometry in sorted(geometries.items()):
        path = out / xyz_name(k)
        write_text_atomic(path, geometry.xyz_text(
            f"{data.name}: change {k}, {data.coordinate_label} = {geometry.value!r} "
            f"({geometry.origin})".replace("\n", " ")))
        xyz.append(path)
    md = out / "report.md"
    write_text_atomic(md, render_markdown(doc, footer=footer))
    html = out / "report.html"
    write_text_atomic(html, render_html(doc, footer=footer))
    report(progress, TASK, steps, steps, str(html))
    return ReportFiles(html, md, changes_csv, cps_csv, tuple(images), tuple(vectors),
                       tuple(xyz))


def remove_report(out_dir) -> list:
    """Remove the report files an earlier run wrote into `out_dir`.

    Used when a run writes a new scan.json without a report (``--no-report``):
    a report left from an earlier run would describe another result.  Only
    files the folder's ownership marker lists as trackscan's are removed
    (:mod:`trackscan.io.ownership`): the fixed report names
    (:data:`REPORT_FILES`) and top-level files with a report suffix
    (:data:`REPORT_SUFFIXES`).  A file the user put there stays.

    Returns
    -------
    list of str
        The names removed, sorted.
    """
    import os

    from trackscan.io.ownership import read_ownership

    folder = Path(out_dir)
    owner = read_ownership(folder)
    if owner is None:
        return []
    removed = []
    with os.scandir(folder) as entries:
        for entry in entries:
            name = entry.name
            if not entry.is_file(follow_symlinks=False) or not owner.owns(name):
                continue
            if name in REPORT_FILES or Path(name).suffix in REPORT_SUFFIXES:
                os.unlink(entry.path)
                removed.append(name)
    return sorted(removed)
