"""Internal coordinates measured on a geometry: distance, angle, dihedral.

Atoms are given 1-based, as chemists count; positions are in bohr.  Distances
are returned in bohr, angles and dihedrals in degrees.
"""

from __future__ import annotations

import math

import numpy as np

from trackscan.units import (ANGSTROM_IN_BOHR, UNITS_OF_KIND, angle_factor, canonical_unit,
                             length_factor)

__all__ = ["COORDINATE_KINDS", "distance", "angle", "dihedral", "measure", "in_unit",
           "default_tolerance", "difference", "DEFAULT_TOLERANCES"]

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


DEFAULT_TOLERANCES = {"angstrom": 1e-3, "bohr": 1e-3 * ANGSTROM_IN_BOHR, "degree": 0.1,
                      "radian": math.radians(0.1)}
"""Default largest difference between a listed coordinate value and the value
measured on the frame's geometry, per unit: 1e-3 Å for distances (the same
length in bohr), 0.1 degree for angles and dihedrals (the same in radian)."""


def _canonical_unit(kind: str, unit: str):
    name = canonical_unit(unit)
    return name if name in UNITS_OF_KIND.get(kind, ()) else None


def in_unit(kind: str, value: float, unit: str):
    """A measured value (bohr, or degrees) converted to `unit`; None if `unit` is unknown.

    Parameters
    ----------
    kind : {'distance', 'angle', 'dihedral'}
    value : float
        As :func:`measure` returns it: bohr for a distance, degrees otherwise.
    unit : str
        ``angstrom`` / ``bohr`` for distances, ``degree`` / ``radian`` for
        angles (the spellings of :data:`trackscan.units.UNIT_ALIASES`).
    """
    if _canonical_unit(kind, unit) is None:
        return None
    if kind == "distance":
        return value / length_factor(unit)
    return value / angle_factor(unit)


def default_tolerance(kind: str, unit: str):
    """The default tolerance (in `unit`) of listed against measured values, or None."""
    name = _canonical_unit(kind, unit)
    return None if name is None else DEFAULT_TOLERANCES[name]


def difference(kind: str, listed: float, measured: float, unit: str) -> float:
    """|listed - measured|, for a dihedral modulo a full turn (180 and -180 agree)."""
    d = abs(float(listed) - float(measured))
    if kind == "dihedral":
        turn = 2 * math.pi if _canonical_unit(kind, unit) == "radian" else 360.0
        d = d % turn
        d = min(d, turn - d)
    return d
