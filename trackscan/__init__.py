"""trackscan: follow the topology of the electron density along a scan.

A reaction-mechanism researcher scans a geometric coordinate with a
quantum-chemistry code and gets one density grid per geometry.  trackscan finds
the critical points, bond paths and molecular graph of each density, follows
them from frame to frame, and locates the frames where the molecular structure
changes (Bader's structural instabilities: folds and conflicts).

Library use (notebooks, scripts)::

    import trackscan
    frame = trackscan.analyze_frame("cubes/f0.cube")     # FrameTopology
    scan = trackscan.analyze_scan("scan.yaml")           # trackscan.model.ScanResult
    scan = trackscan.load_scan("reports/my-scan")        # read scan.json back

The functions (:mod:`trackscan.api`) are imported on first use, so
``import trackscan`` stays light.
"""

__version__ = "0.1.0"

_API = ("read_cube", "analyze_frame", "load_manifest", "analyze_scan", "load_scan",
        "refine_scan", "write_scan")

__all__ = ["__version__", *_API]


def __getattr__(name):
    if name in _API:
        from trackscan import api

        return getattr(api, name)
    raise AttributeError(f"module 'trackscan' has no attribute {name!r}")


def __dir__():
    return sorted(list(globals()) + list(_API))
