"""trackscan: follow the topology of the electron density along a scan.

A reaction-mechanism researcher scans a geometric coordinate with a
quantum-chemistry code and gets one density grid per geometry.  trackscan finds
the critical points, bond paths and molecular graph of each density, follows
them from frame to frame, and locates the frames where the molecular structure
changes (Bader's structural instabilities: folds and conflicts).
"""

__version__ = "0.1.0"

__all__ = ["__version__"]
