"""Scan tracking: follow critical points along a scan and find structural changes.

``track_scan(frames)`` is the entry point; it takes frame dicts (the
``frames`` of scan.json) and returns them with structure numbers and
persistent critical-point tracks, plus the changes of the scan.
"""

from trackscan.tracking.describe import describe_change, describe_event
from trackscan.tracking.settings import TrackingSettings
from trackscan.tracking.track import track_scan

__all__ = ["track_scan", "TrackingSettings", "describe_event", "describe_change"]
