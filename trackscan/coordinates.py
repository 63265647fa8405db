"""Internal coordinates measured on a geometry: distance, angle, dihedral.

Atoms are given 1-based, as chemists count; positions are in bohr.  Distances
are returned in bohr, angles and dihedrals in degrees.
"""

from __future__ import annotations

import numpy as np

__all__ = ["COORDINATE_KINDS", "distance", "angle", "dihedral", "measure"]

#: Kind of internal coordinate -> number of atoms that define it.
COORDINATE_KINDS = {"distance": 2, "angle": 3, "dihedral": 4}


def distance(positions, i: int, j: int) -> float:
    """Distance between 1-based atoms `i` and `j` (bohr)."""
    p = np.asarray(positions, dtype=float)
    return float(np.linalg.norm(p[i - 1] - p[j - 1]))


def angle(positions, i: int, j: int, k: int) -> float:
    """Angle i–j–k at atom `j` (degrees)."""
    p = np.asarray(positions, dtype=float)
    a = p[i - 1] - p[j - 1]
    b = p[k - 1] - p[j - 1]
    c = np.dot(a, b) / (np.linalg.norm(a) * np.linalg.norm(b))
    return float(np.degrees(np.arccos(np.clip(c, -1.0, 1.0))))


def dihedral(positions, i: int, j: int, k: int, l: int) -> float:
    """Dihedral angle i–j–k–l (degrees, in (−180, 180]).

    Notes
    -----
    IUPAC sign convention: positive when, looking along j→k, the bond j–i
    must be turned clockwise to eclipse k–l.
    """
    p = np.asarray(positions, dtype=float)
    b0 = p[i - 1] - p[j - 1]
    b1 = p[k - 1] - p[j - 1]
    b2 = p[l - 1] - p[k - 1]
    b1n = b1 / np.linalg.norm(b1)
    v = b0 - np.dot(b0, b1n) * b1n
    w = b2 - np.dot(b2, b1n) * b1n
    x = np.dot(v, w)
    y = np.dot(np.cross(b1n, v), w)
    return float(np.degrees(np.arctan2(y, x)))


_FUNCS = {"distance": distance, "angle": angle, "dihedral": dihedral}


def measure(kind: str, atoms, positions) -> float:
    """Measure an internal coordinate.

    Parameters
    ----------
    kind : {'distance', 'angle', 'dihedral'}
    atoms : sequence of int
        1-based atom numbers (2, 3 or 4 of them).
    positions : (n, 3) array_like, bohr

    Returns
    -------
    float
        bohr for a distance, degrees for an angle or dihedral.
    """
    if kind not in _FUNCS:
        raise ValueError(f"unknown coordinate kind {kind!r}")
    if len(atoms) != COORDINATE_KINDS[kind]:
        raise ValueError(f"{kind} takes {COORDINATE_KINDS[kind]} atoms, got {len(atoms)}")
    return _FUNCS[kind](positions, *atoms)
