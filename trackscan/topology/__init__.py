"""Topology of one density frame: critical points, bond paths, molecular graph.

Main entry point: :func:`analyze_frame` (grid -> :class:`FrameTopology`,
whose ``to_dict()`` is the frame object of the scan.json contract).
Graph comparisons: :func:`same_structure`, :func:`same_structure_type`.
"""

from trackscan.topology.frame import FrameTopology, analyze_frame, poincare_hopf
from trackscan.topology.graph import (bonded_pairs, molecular_graph, same_structure,
                                      same_structure_type, structure_key)
from trackscan.topology.properties import abramov_energy_densities, classify, ellipticity
from trackscan.topology.results import KINDS, BondPath, CriticalPoint

__all__ = ["analyze_frame", "FrameTopology", "CriticalPoint", "BondPath", "KINDS",
           "molecular_graph", "structure_key", "same_structure", "same_structure_type", "bonded_pairs",
           "poincare_hopf", "classify", "ellipticity", "abramov_energy_densities"]
