"""Molecular graphs of frames, structure keys and structure numbers.

A *structure* is the equivalence class of molecular graphs: the same bond
paths between the same attractors, and the same numbers of rings and cages
(DESIGN.md section 2).  Attractors are labelled by atom number (nuclear) or
by their persistent track id (non-nuclear), so the key of a frame compares
directly with the key of any other frame of the scan.

Molecular graphs, structure keys and the structure-type comparison are
defined once, in :mod:`trackscan.topology.graph`; this module applies them
with the tracks of each frame.
"""

from __future__ import annotations

import networkx as nx

from trackscan.topology.graph import (molecular_graph, same_structure_type, sort_ends,
                                      structure_key)

__all__ = ["end_label", "frame_graph", "structure_key", "number_structures",
           "same_structure_type", "sort_ends"]


def end_label(end, tracks):
    """Graph label of a bond-path end: the atom number, an NNA track, or None."""
    if end is None or isinstance(end, int):
        return end
    return tracks.get(end, end)


def frame_graph(view, tracks) -> nx.MultiGraph:
    """Molecular graph of a tracked frame: :func:`trackscan.topology.molecular_graph`
    with the frame's tracks as labels."""
    return molecular_graph(view.frame, labels=tracks)


def number_structures(keys) -> list:
    """Structure numbers 1, 2, ... in order of first appearance along the scan."""
    seen, out = {}, []
    for key in keys:
        if key not in seen:
            seen[key] = len(seen) + 1
        out.append(seen[key])
    return out
