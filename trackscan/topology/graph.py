"""The molecular graph of a frame and comparisons between graphs.

The molecular graph [1]_ is a :class:`networkx.MultiGraph` (two bond paths
may join the same pair of attractors):

Nodes
    Nuclear attractors are keyed by their 1-based atom number (int), with
    attributes ``kind="nuclear"``, ``element``, ``Z``, ``position`` (bohr)
    and ``cp`` (the CP id).  Non-nuclear attractors are keyed by their CP id
    (``"a1"``...), with ``kind="non_nuclear"``, ``element="NNA"``,
    ``position``, ``cp``.
Edges
    One per complete bond path, keyed by the bond CP id, with attributes
    ``cp``, ``rho``, ``laplacian``, ``ellipticity``, ``length_bohr``,
    ``internuclear_bohr`` and ``energy_densities``.
Graph attributes
    ``rings``: list of ``{"id", "atoms", "rho"}``; ``cages``: list of
    ``{"id", "rings", "rho"}``; ``open_bonds``: list of ``{"id", "atoms"}``
    for bond CPs whose paths did not both reach attractors; ``complete``.

References
----------
.. [1] R. F. W. Bader, *Atoms in Molecules: A Quantum Theory*, Oxford
   University Press (1990), section 2.4.
"""

from __future__ import annotations

from collections import Counter

import networkx as nx

from trackscan.elements import symbol

__all__ = ["build_graph", "same_structure", "same_structure_type", "bonded_pairs"]


def build_graph(critical_points, bond_paths, numbers, *, complete: bool = True) -> nx.MultiGraph:
    """Molecular graph from a frame's critical points and bond paths.

    Parameters
    ----------
    critical_points : list of CriticalPoint
        With ids assigned.
    bond_paths : list of BondPath
    numbers : (n,) array_like of int
        Atomic numbers of the atoms (atom k is ``numbers[k - 1]``).
    complete : bool
        Whether the frame passed Poincare-Hopf (stored as a graph attribute).

    Returns
    -------
    networkx.MultiGraph
    """
    g = nx.MultiGraph()
    for cp in critical_points:
        if cp.kind == "nuclear":
            n = int(cp.atoms[0])
            z = int(numbers[n - 1])
            g.add_node(n, kind="nuclear", element=symbol(z), Z=z,
                       position=tuple(float(x) for x in cp.position), cp=cp.id)
        elif cp.kind == "non_nuclear":
            g.add_node(cp.id, kind="non_nuclear", element="NNA", Z=0,
                       position=tuple(float(x) for x in cp.position), cp=cp.id)
    open_bonds = []
    for bp in bond_paths:
        cp = bp.cp
        if not bp.complete:
            open_bonds.append({"id": cp.id, "atoms": list(bp.atoms)})
            continue
        a, b = bp.atoms
        g.add_edge(a, b, key=cp.id, cp=cp.id, rho=cp.rho, laplacian=cp.laplacian,
                   ellipticity=cp.ellipticity, length_bohr=bp.length,
                   internuclear_bohr=bp.internuclear, energy_densities=cp.energy_densities)
    g.graph["rings"] = [{"id": cp.id, "atoms": list(cp.atoms), "rho": cp.rho}
                        for cp in critical_points if cp.kind == "ring"]
    g.graph["cages"] = [{"id": cp.id, "rings": list(cp.rings), "rho": cp.rho}
                        for cp in critical_points if cp.kind == "cage"]
    g.graph["open_bonds"] = open_bonds
    g.graph["complete"] = bool(complete)
    return g


def _label(g, n):
    """Frame-independent label of an attractor: atom number, or NNA by its neighbours."""
    if isinstance(n, int):
        return n
    nbrs = sorted((m for m in g.neighbors(n) if isinstance(m, int)))
    return ("NNA",) + tuple(nbrs)


def bonded_pairs(g: nx.MultiGraph) -> Counter:
    """Multiset of bonded attractor pairs (open bond paths included, with None).

    Non-nuclear attractors are labelled by the atoms they are bonded to, so
    the multiset does not depend on how their ids were numbered.
    """
    out = Counter()
    for a, b in g.edges():
        la, lb = _label(g, a), _label(g, b)
        out[tuple(sorted((la, lb), key=repr))] += 1
    for ob in g.graph.get("open_bonds", []):
        ends = [e if isinstance(e, int) or e is None else _label(g, e) for e in ob["atoms"]]
        out[tuple(sorted(ends, key=repr))] += 1
    return out


def same_structure(g1: nx.MultiGraph, g2: nx.MultiGraph) -> bool:
    """True when two molecular graphs describe the same structure.

    Same multiset of bonded atom pairs (by atom number) and the same numbers
    of ring and cage CPs.

    Parameters
    ----------
    g1, g2 : networkx.MultiGraph
        Graphs from :func:`build_graph` (atoms numbered alike).

    Returns
    -------
    bool
    """
    return (bonded_pairs(g1) == bonded_pairs(g2)
            and len(g1.graph.get("rings", [])) == len(g2.graph.get("rings", []))
            and len(g1.graph.get("cages", [])) == len(g2.graph.get("cages", [])))


def same_structure_type(g1: nx.MultiGraph, g2: nx.MultiGraph) -> bool:
    """True when two molecular graphs are isomorphic as element-labelled graphs.

    Nodes match on ``element`` (``"NNA"`` for non-nuclear attractors),
    node pairs on their number of bond paths; the numbers of ring and cage
    CPs must agree too.  Atom numbering is ignored, so two conformers or two
    molecules with the same bonding pattern are the same type.

    Returns
    -------
    bool
    """
    if len(g1.graph.get("rings", [])) != len(g2.graph.get("rings", [])):
        return False
    if len(g1.graph.get("cages", [])) != len(g2.graph.get("cages", [])):
        return False

    def node_match(a, b):
        return a.get("element") == b.get("element")

    def edge_match(a, b):
        return len(a) == len(b)

    return nx.is_isomorphic(g1, g2, node_match=node_match, edge_match=edge_match)
