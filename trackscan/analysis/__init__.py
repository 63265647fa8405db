"""Whole-scan analysis: frames analysed in parallel (cached), tracked, written.

``analyze_scan(manifest, out_dir=..., jobs=N)`` returns the scan.json dict;
``write_scan(path, scan)`` writes it byte-identically.
"""

from trackscan.analysis.runner import analyse_frames, printed_digits
from trackscan.analysis.scan import analyze_scan
from trackscan.analysis.scanjson import SCHEMA, dumps_scan, write_scan

__all__ = ["analyze_scan", "analyse_frames", "printed_digits", "write_scan", "dumps_scan",
           "SCHEMA"]
