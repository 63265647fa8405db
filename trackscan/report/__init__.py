"""The change report: the story of each structural change of a scan, ready for a paper.

Reads a scan result through the typed model (:class:`trackscan.model.ScanResult`)
and writes a report folder: ``report.html`` (self-contained), ``report.md``,
every figure as PNG (300 dpi), SVG and PDF, ``changes.csv``,
``critical_points.csv`` and the geometry at each change's estimate as XYZ.

Only this package imports matplotlib; it draws on
:class:`matplotlib.figure.Figure` with the Agg canvas, never through pyplot,
so it works headless and leaves no global state behind.
"""

from trackscan.report.scan_view import ScanView, load_scan
from trackscan.report.writer import ReportFiles, write_report

__all__ = ["write_report", "ReportFiles", "load_scan", "ScanView"]
