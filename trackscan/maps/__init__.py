"""Structure maps of plane scans: which molecular graph holds where over two coordinates.

A plane scan (a manifest with ``coordinates:``) has frames at pairs of values,
normally on a grid.  Every frame is analysed by the 1-D scan's frame analysis
(:func:`trackscan.analysis.runner.analyse_frames`) and labelled with its
structure; each pair of grid neighbours whose structures differ is a
*boundary edge*, tracked and described like a 1-D change by
:func:`trackscan.tracking.track_scan` along the edge, and refined along the
edge by :func:`trackscan.refine.loop.refine_frames` (:mod:`trackscan.maps.refine`).
This is the structure diagram of Bader, Nguyen-Dang and Tal [1]_: regions of
structural stability separated by lines of catastrophes.

References
----------
.. [1] R. F. W. Bader, T. T. Nguyen-Dang and Y. Tal, "A topological theory of
   molecular structure", Rep. Prog. Phys. 44, 893 (1981).
   :DOI:`10.1088/0034-4885/44/8/002`
"""

from trackscan.maps.analyze import analyze_plane, assemble_plane
from trackscan.maps.plane import Edge, edge_frames, plane_edges

__all__ = ["analyze_plane", "assemble_plane", "Edge", "plane_edges", "edge_frames"]
