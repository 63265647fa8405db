"""The molecular graph of a frame, its structure key, and graph comparisons.

The one builder of molecular graphs [1]_: :func:`molecular_graph` reads a
:class:`trackscan.model.Frame` and returns a :class:`networkx.MultiGraph`
(two bond paths may join the same pair of attractors).  Frame analysis and
tracking both use it; tracking passes the persistent track labels of the
non-nuclear attractors so that graphs of different frames compare directly.

Nodes
    Nuclear attractors are keyed by their 1-based atom number (int), with
    attributes ``kind="nuclear"``, ``element``, ``Z``, ``position`` (bohr)
    and ``cp`` (the CP id).  Non-nuclear attractors are keyed by their label
    (their track when tracking gives one, else their CP id ``"a1"``...),
    with ``kind="non_nuclear"``, ``element="NNA"``, ``Z=0``, ``position``,
    ``cp``.  The end of a bond path that reached no attractor is a node
    ``"open:<cp>:<i>"`` with ``kind="open"``, ``element="open"``.
Edges
    One per bond CP, keyed by its CP id, with attributes ``cp``, ``track``
    (or None), ``rho``, ``laplacian``, ``ellipticity``, ``length_bohr``,
    ``internuclear_bohr``, ``energy_densities`` and ``complete`` (False for a
    path with an open end).
Graph attributes
    ``rings``: list of ``{"id", "atoms", "rho"}``; ``cages``: list of
    ``{"id", "rings", "rho"}``; ``open_bonds``: list of ``{"id", "atoms"}``;
    ``complete`` (the frame passed Poincaré–Hopf).

A *structure* is the equivalence class of molecular graphs (DESIGN.md
section 2): :func:`structure_key` is the one definition; two graphs have the
same structure when their keys are equal (:func:`same_structure`).

References
----------
.. [1] R. F. W. Bader, *Atoms in Molecules: A Quantum Theory*, Oxford
   University Press (1990), section 2.4.
.. [2] L. P. Cordella, P. Foggia, C. Sansone and M. Vento, "A (sub)graph
   isomorphism algorithm for matching large graphs", IEEE Trans. Pattern
   Anal. Mach. Intell. 26, 1367-1372 (2004). :DOI:`10.1109/TPAMI.2004.75`
"""

from __future__ import annotations

from collections import Counter

import networkx as nx

__all__ = ["molecular_graph", "structure_key", "same_structure", "same_structure_type",
           "bonded_pairs", "sort_ends"]


def _sortable(label):
    if label is None:
        return (2, "")
    if isinstance(label, int):
        return (0, label)
    return (1, str(label))


def sort_ends(ends) -> tuple:
    """The two ends of a bond path in canonical order (atoms first, by number; open last)."""
    return tuple(sorted(ends, key=_sortable))


def _is_open(node) -> bool:
    return isinstance(node, str) and node.startswith("open:")


def molecular_graph(frame, *, labels=None) -> nx.MultiGraph:
    """Molecular graph of a frame.

    Parameters
    ----------
    frame : trackscan.model.Frame
    labels : dict, optional
        CP id -> label for non-nuclear attractors and bond CPs (tracking's
        persistent tracks).  Default: the CP ids.

    Returns
    -------
    networkx.MultiGraph
        See the module docstring for nodes, edges and graph attributes.
    """
    labels = labels or {}
    g = nx.MultiGraph()
    for atom in frame.atoms:
        g.add_node(atom.number, kind="nuclear", element=atom.element, Z=atom.Z,
                   position=tuple(atom.position_bohr), cp=f"n{atom.number}")
    for cp in frame.critical_points:
        if cp.kind == "nuclear" and cp.atoms:
            g.nodes[int(cp.atoms[0])]["position"] = tuple(cp.position_bohr)
            g.nodes[int(cp.atoms[0])]["cp"] = cp.id
        elif cp.kind == "non_nuclear":
            g.add_node(labels.get(cp.id, cp.id), kind="non_nuclear", element="NNA", Z=0,
                       position=tuple(cp.position_bohr), cp=cp.id)
    paths = {bp.cp: bp for bp in frame.bond_paths}
    ends_of = frame.bond_ends()
    open_bonds = []
    for cp in frame.of_kind("bond"):
        ends = ends_of.get(cp.id, (None, None))
        if len(ends) != 2:
            ends = (None, None)
        nodes = []
        for i, e in enumerate(ends):
            if e is None:
                x = f"open:{cp.id}:{i}"
                g.add_node(x, kind="open", element="open", Z=0)
            elif isinstance(e, int):
                x = e
            else:
                x = labels.get(e, e)
                if x not in g:
                    g.add_node(x, kind="non_nuclear", element="NNA", Z=0)
            nodes.append(x)
        complete = None not in ends
        if not complete:
            open_bonds.append({"id": cp.id, "atoms": list(ends)})
        bp = paths.get(cp.id)
        g.add_edge(nodes[0], nodes[1], key=cp.id, cp=cp.id, track=labels.get(cp.id),
                   rho=cp.rho, laplacian=cp.laplacian, ellipticity=cp.ellipticity,
                   length_bohr=None if bp is None else bp.length_bohr,
                   internuclear_bohr=None if bp is None else bp.internuclear_bohr,
                   energy_densities=cp.energy_densities, complete=complete)
    g.graph["rings"] = [{"id": cp.id, "atoms": list(cp.atoms), "rho": cp.rho}
                        for cp in frame.of_kind("ring")]
    g.graph["cages"] = [{"id": cp.id, "rings": list(cp.rings or ()), "rho": cp.rho}
                        for cp in frame.of_kind("cage")]
    g.graph["open_bonds"] = open_bonds
    g.graph["complete"] = frame.usable
    return g


def _end_label(g, node):
    """Label of a bond-path end in a structure key: atom number, NNA label, None if open."""
    if _is_open(node):
        return None
    return node


def structure_key(g: nx.MultiGraph) -> tuple:
    """Hashable key of a molecular graph: equal keys mean the same structure.

    ``(bond paths, non-nuclear attractors, number of ring CPs, number of
    cage CPs)``: the sorted pairs of path ends (atom numbers, NNA labels,
    None for an open end) and the sorted NNA labels.  With tracking's
    labels the key of one frame compares directly with any other's.
    """
    edges = [sort_ends([_end_label(g, a), _end_label(g, b)]) for a, b in g.edges()]
    edges.sort(key=lambda e: tuple(_sortable(x) for x in e))
    nna = sorted((n for n, d in g.nodes(data=True) if d.get("kind") == "non_nuclear"), key=str)
    return (tuple(edges), tuple(nna), len(g.graph.get("rings", [])),
            len(g.graph.get("cages", [])))


def bonded_pairs(g: nx.MultiGraph) -> Counter:
    """Multiset of bonded attractor pairs (open ends as None).

    Non-nuclear attractors are labelled by the atoms they are bonded to, so
    the multiset does not depend on how their ids were numbered.
    """
    def label(n):
        if _is_open(n):
            return None
        if isinstance(n, int):
            return n
        return ("NNA",) + tuple(sorted(m for m in g.neighbors(n) if isinstance(m, int)))

    out = Counter()
    for a, b in g.edges():
        out[tuple(sorted((label(a), label(b)), key=repr))] += 1
    return out


def same_structure(g1: nx.MultiGraph, g2: nx.MultiGraph) -> bool:
    """True when two molecular graphs describe the same structure.

    Same multiset of bonded atom pairs (by atom number; non-nuclear
    attractors by the atoms they bond) and the same numbers of ring and
    cage CPs.
    """
    k1, k2 = structure_key(g1), structure_key(g2)
    return bonded_pairs(g1) == bonded_pairs(g2) and k1[2:] == k2[2:]


def same_structure_type(g1: nx.MultiGraph, g2: nx.MultiGraph) -> bool:
    """True when two molecular graphs are isomorphic as element-labelled graphs.

    Nodes match on ``element`` (``"NNA"`` for non-nuclear attractors,
    ``"open"`` for open path ends), node pairs on their number of bond paths
    (VF2 on multigraphs [2]_); the numbers of ring and cage CPs must agree
    too.  Atom numbering is ignored: two structures that differ only in
    which atoms are linked are of the same type.
    """
    if structure_key(g1)[2:] != structure_key(g2)[2:]:
        return False
    return nx.is_isomorphic(g1, g2, node_match=lambda a, b: a.get("element") == b.get("element"))
