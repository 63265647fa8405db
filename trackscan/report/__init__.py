"""The change-point report: tables, plots, molecular graphs and density maps of a scan.

Reads a scan result (scan.json, ``../shared/DESIGN.md`` section 3) and writes a
report folder with ``report.html`` (self-contained), ``report.md`` (with its
PNG images), ``changes.csv`` and ``critical_points.csv``.

Only this package imports matplotlib; it draws on
:class:`matplotlib.figure.Figure` with the Agg canvas, never through pyplot,
so it works headless and leaves no global state behind.
"""

from trackscan.report.scan_data import ScanData, load_scan
from trackscan.report.writer import ReportFiles, write_report

__all__ = ["write_report", "ReportFiles", "load_scan", "ScanData"]
