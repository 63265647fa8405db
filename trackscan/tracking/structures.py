"""Molecular graphs of frames, structure keys and structure numbers.

A *structure* is the equivalence class of molecular graphs: the same bond
paths between the same attractors, and the same numbers of rings and cages
(DESIGN.md section 2).  Attractors are labelled by atom number (nuclear) or
by their persistent track id (non-nuclear), so the key of a frame compares
directly with the key of any other frame of the scan.

Molecular graphs are ``networkx.MultiGraph`` objects.  Node attributes:
``element`` (symbol; ``"NNA"`` for a non-nuclear attractor).  Edge
attributes: ``cp`` (the bond CP id of the frame), ``track``.
"""

from __future__ import annotations

import networkx as nx
from networkx.algorithms.isomorphism import categorical_node_match

__all__ = ["end_label", "frame_graph", "structure_key", "number_structures",
           "same_structure_type", "sort_ends"]


def end_label(end, tracks):
    """Graph label of a bond-path end: the atom number, an NNA track, or None."""
    if end is None or isinstance(end, int):
        return end
    return tracks.get(end, end)


def _sortable(label):
    if label is None:
        return (2, "")
    if isinstance(label, int):
        return (0, label)
    return (1, str(label))


def sort_ends(ends) -> tuple:
    """The two ends of a bond path in canonical order (atoms first, by number)."""
    return tuple(sorted(ends, key=_sortable))


def frame_graph(view, tracks) -> nx.MultiGraph:
    """Molecular graph of a frame.

    Parameters
    ----------
    view : FrameView
    tracks : dict
        CP id -> track id of this frame.

    Returns
    -------
    networkx.MultiGraph
        Nodes: atom numbers 1..n, the tracks of non-nuclear attractors, and
        one ``"open:<cp>:<end>"`` node per open path end; edges: one per
        bond CP.
    """
    g = nx.MultiGraph()
    for i, el in enumerate(view.elements, start=1):
        g.add_node(i, element=el)
    for cp in view.of_kind("non_nuclear"):
        g.add_node(tracks[cp.id], element="NNA")
    for cp in view.of_kind("bond"):
        ends = view.bond_ends.get(cp.id, (None, None))
        if len(ends) != 2:
            ends = (None, None)
        labels = []
        for i, e in enumerate(ends):
            x = end_label(e, tracks)
            if x is None:
                x = f"open:{cp.id}:{i}"
                g.add_node(x, element="open")
            elif x not in g:
                g.add_node(x, element="NNA")
            labels.append(x)
        g.add_edge(labels[0], labels[1], cp=cp.id, track=tracks[cp.id])
    return g


def structure_key(view, tracks) -> tuple:
    """Hashable key: equal keys mean the same structure.

    The key holds the sorted bond-path ends, the sorted non-nuclear
    attractor tracks, and the numbers of ring and cage CPs.
    """
    edges = []
    for cp in view.of_kind("bond"):
        ends = view.bond_ends.get(cp.id, (None, None))
        if len(ends) != 2:
            ends = (None, None)
        edges.append(sort_ends([end_label(e, tracks) for e in ends]))
    edges.sort(key=lambda e: tuple(_sortable(x) for x in e))
    nna = sorted(tracks[cp.id] for cp in view.of_kind("non_nuclear"))
    return (tuple(edges), tuple(nna), len(view.of_kind("ring")), len(view.of_kind("cage")))


def number_structures(keys) -> list:
    """Structure numbers 1, 2, ... in order of first appearance along the scan."""
    seen, out = {}, []
    for key in keys:
        if key not in seen:
            seen[key] = len(seen) + 1
        out.append(seen[key])
    return out


def same_structure_type(g1, g2, key1, key2) -> bool:
    """True when two structures differ only in which atoms are linked.

    The molecular graphs are compared by element-labelled isomorphism
    (networkx VF2 [1]_), and the ring and cage counts must agree.

    References
    ----------
    .. [1] L. P. Cordella, P. Foggia, C. Sansone and M. Vento, "A (sub)graph
       isomorphism algorithm for matching large graphs", IEEE Trans. Pattern
       Anal. Mach. Intell. 26, 1367-1372 (2004). :DOI:`10.1109/TPAMI.2004.75`
    """
    if key1[2:] != key2[2:]:
        return False
    return nx.is_isomorphic(g1, g2, node_match=categorical_node_match("element", None))
