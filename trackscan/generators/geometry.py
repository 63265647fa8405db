"""Geometry drives: the molecular geometry at any value of the scanned coordinate.

Two kinds:

* :class:`CoordinateDrive` -- a base geometry plus one driven internal
  coordinate (distance, angle or dihedral over 1-based atoms).  The moving
  fragment is the side of the driven bond that contains the last atom, found
  on a covalent-radius connectivity graph with that bond removed; the rest
  stays fixed.  This is the rigid scan chemists set up by hand.
* :class:`TrajectoryDrive` -- interpolation between the frames of a
  multi-frame XYZ file (a relaxed scan, say), linear in Cartesian
  coordinates after each frame is rotated onto its predecessor by the Kabsch
  method [2]_.

Both expose ``geometry(value) -> XYZFrame`` (positions in bohr) and
``describe() -> str``.

References
----------
.. [1] B. Cordero et al., "Covalent radii revisited", Dalton Trans. 2832
   (2008). :DOI:`10.1039/b801115j`
.. [2] W. Kabsch, "A solution for the best rotation to relate two sets of
   vectors", Acta Cryst. A32, 922 (1976). :DOI:`10.1107/S0567739476001873`
"""

from __future__ import annotations

import math
import re

import networkx as nx
import numpy as np

from trackscan.coordinates import COORDINATE_KINDS, kabsch, measure
from trackscan.elements import symbol
from trackscan.errors import ConfigError, ConsistencyError, GeneratorError
from trackscan.io.xyz import XYZFrame
from trackscan.units import ANGSTROM_IN_BOHR, angle_factor, length_factor

__all__ = ["COVALENT_RADII", "connectivity", "moving_fragment", "CoordinateDrive",
           "TrajectoryDrive", "kabsch_align", "value_from_comment", "to_internal_unit",
           "from_internal_unit"]

#: Covalent radii (angstrom) of Cordero et al. (2008) [from memory], Z = 1-36
#: (sp3 carbon; low-spin values for Mn, Fe, Co).  Other elements use 1.5.
COVALENT_RADII = {
    1: 0.31, 2: 0.28, 3: 1.28, 4: 0.96, 5: 0.84, 6: 0.76, 7: 0.71, 8: 0.66, 9: 0.57,
    10: 0.58, 11: 1.66, 12: 1.41, 13: 1.21, 14: 1.11, 15: 1.07, 16: 1.05, 17: 1.02,
    18: 1.06, 19: 2.03, 20: 1.76, 21: 1.70, 22: 1.60, 23: 1.53, 24: 1.39, 25: 1.39,
    26: 1.32, 27: 1.26, 28: 1.24, 29: 1.32, 30: 1.22, 31: 1.22, 32: 1.20, 33: 1.19,
    34: 1.20, 35: 1.20, 36: 1.16,
}
_DEFAULT_RADIUS = 1.5

#: Two atoms are bonded when closer than this factor times the sum of their
#: covalent radii (a common working choice, not a published constant).
BOND_SCALE = 1.2

def _unit_factor(kind: str, unit: str | None) -> float:
    """Internal units (bohr, degrees) per one `unit` (None: angstrom or degree)."""
    if unit is None:
        return 1.0 if kind != "distance" else ANGSTROM_IN_BOHR
    return length_factor(unit) if kind == "distance" else angle_factor(unit)


def to_internal_unit(kind: str, value: float, unit: str | None) -> float:
    """Convert a coordinate value to bohr (distance) or degrees (angles).

    `unit` ``None`` means angstrom for a distance, degrees for an angle.
    """
    return float(value) * _unit_factor(kind, unit)


def from_internal_unit(kind: str, value: float, unit: str | None) -> float:
    """Inverse of :func:`to_internal_unit`."""
    return float(value) / _unit_factor(kind, unit)


def connectivity(numbers, positions, *, scale: float = BOND_SCALE) -> nx.Graph:
    """Covalent connectivity graph (nodes are 0-based atom indices).

    Parameters
    ----------
    numbers : (n,) array_like of int
    positions : (n, 3) array_like, bohr
    scale : float
        Bonded when ``d < scale * (r_i + r_j)`` with Cordero radii [1]_.

    Returns
    -------
    networkx.Graph
    """
    numbers = np.asarray(numbers)
    pos = np.asarray(positions, dtype=float)
    radii = np.array([COVALENT_RADII.get(int(z), _DEFAULT_RADIUS) for z in numbers])
    radii = radii * ANGSTROM_IN_BOHR
    g = nx.Graph()
    g.add_nodes_from(range(len(numbers)))
    d = np.linalg.norm(pos[:, None, :] - pos[None, :, :], axis=2)
    lim = scale * (radii[:, None] + radii[None, :])
    ii, jj = np.nonzero(np.triu(d < lim, k=1))
    g.add_edges_from(zip(ii.tolist(), jj.tolist()))
    return g


def moving_fragment(graph: nx.Graph, kind: str, atoms) -> list:
    """Atoms that move when a coordinate is driven (0-based, sorted).

    Parameters
    ----------
    graph : networkx.Graph
        Connectivity (0-based nodes).
    kind : {'distance', 'angle', 'dihedral'}
    atoms : sequence of int
        0-based atoms of the coordinate.

    Returns
    -------
    list of int

    Notes
    -----
    The driven bond is the last pair of atoms (distance, angle) or the
    central pair (dihedral).  The moving fragment is the connected component
    of its far atom once that bond is removed.  When the bond lies in a ring,
    that component also holds the fixed atoms; then only the last atom and
    the groups hanging from it move (the components of the graph without the
    last atom that contain no other atom of the coordinate).
    """
    atoms = list(atoms)
    if kind == "dihedral":
        near, far = atoms[1], atoms[2]
        fixed = {atoms[0], atoms[1]}
    else:
        near, far = atoms[-2], atoms[-1]
        fixed = set(atoms[:-1])
    g = graph.copy()
    if g.has_edge(near, far):
        g.remove_edge(near, far)
    side = nx.node_connected_component(g, far)
    if not (side & fixed) and atoms[-1] in side:
        return sorted(side)
    last = atoms[-1]
    others = set(atoms[:-1])
    h = graph.copy()
    h.remove_node(last)
    moving = {last}
    for comp in nx.connected_components(h):
        if not (comp & others) and any(graph.has_edge(last, a) for a in comp):
            moving |= comp
    return sorted(moving)


def _rotate(points, origin, axis, angle_deg):
    """Rotate points about the line through `origin` along unit `axis` (Rodrigues)."""
    t = math.radians(angle_deg)
    k = axis / np.linalg.norm(axis)
    v = points - origin
    c, s = math.cos(t), math.sin(t)
    return origin + v * c + np.cross(k, v) * s + np.outer(v @ k, k) * (1.0 - c)


def _perpendicular(v):
    """A unit vector perpendicular to `v` (deterministic)."""
    e = np.eye(3)[int(np.argmin(np.abs(v)))]
    w = np.cross(v, e)
    return w / np.linalg.norm(w)


def _undefined(kind, p) -> bool:
    """True when the coordinate cannot be driven on points `p` (bohr)."""
    tiny = 1e-8
    if kind == "distance":
        return np.linalg.norm(p[1] - p[0]) < tiny
    if kind == "angle":
        return min(np.linalg.norm(p[0] - p[1]), np.linalg.norm(p[2] - p[1])) < tiny
    b0, b1, b2 = p[0] - p[1], p[2] - p[1], p[3] - p[2]
    n1 = np.linalg.norm(np.cross(b0, b1))
    n2 = np.linalg.norm(np.cross(b1, b2))
    scale = max(np.linalg.norm(b0), np.linalg.norm(b1), np.linalg.norm(b2))
    return np.linalg.norm(b1) < tiny or min(n1, n2) < 1e-6 * scale * scale


class CoordinateDrive:
    """A base geometry with one driven internal coordinate.

    Parameters
    ----------
    base : XYZFrame
        The starting geometry (bohr).
    kind : {'distance', 'angle', 'dihedral'}
    atoms : sequence of int
        1-based atoms (2, 3 or 4).
    move : sequence of int, optional
        1-based atoms that move, overriding the connectivity rule.
    unit : str, optional
        Unit of the coordinate values: ``angstrom`` (default) or ``bohr`` for
        a distance, ``degree`` (default) or ``radian`` for angles.

    Attributes
    ----------
    moving : tuple of int
        1-based atoms that move.
    start_value : float
        The coordinate measured on the base geometry, in `unit`.

    Raises
    ------
    ConfigError
        Atoms out of range or repeated, a `move` list that contains the first
        atom or lacks the last, or an unknown unit.
    """

    def __init__(self, base: XYZFrame, kind: str, atoms, *, move=None, unit: str | None = None):
        if kind not in COORDINATE_KINDS:
            raise ConfigError(f"unknown coordinate kind {kind!r}", key="generator.geometry.drive")
        atoms = [int(a) for a in atoms]
        n = base.n_atoms
        key = f"generator.geometry.drive.{kind}"
        if len(atoms) != COORDINATE_KINDS[kind]:
            raise ConfigError(f"a {kind} takes {COORDINATE_KINDS[kind]} atoms, got {atoms}", key=key)
        if len(set(atoms)) != len(atoms):
            raise ConfigError(f"atoms must be distinct, got {atoms}", key=key)
        if min(atoms) < 1 or max(atoms) > n:
            raise ConfigError(f"atoms are 1-based and the geometry has {n} atoms, got {atoms}",
                              key=key)
        try:
            _unit_factor(kind, unit)
        except ValueError as exc:
            raise ConfigError(str(exc), key="generator.geometry.drive.unit") from None
        self.base = base
        self.kind = kind
        self.atoms = tuple(atoms)
        self.unit = unit
        zero = [a - 1 for a in atoms]
        if move is None:
            graph = connectivity(base.numbers, base.positions)
            moving = [m + 1 for m in moving_fragment(graph, kind, zero)]
        else:
            moving = sorted({int(m) for m in move})
            mkey = "generator.geometry.drive.move"
            if min(moving) < 1 or max(moving) > n:
                raise ConfigError(f"atoms are 1-based and the geometry has {n} atoms", key=mkey)
            if atoms[0] in moving or atoms[-1] not in moving:
                raise ConfigError(f"the moving atoms must include atom {atoms[-1]} and not "
                                  f"atom {atoms[0]}", key=mkey)
        self.moving = tuple(moving)
        self.start_value = self.measure(base.positions)

    def measure(self, positions) -> float:
        """The driven coordinate on `positions` (bohr), in the drive's unit."""
        v = measure(self.kind, self.atoms, positions)
        return from_internal_unit(self.kind, v, self.unit)

    def describe(self) -> str:
        """One line for reports."""
        names = "-".join(f"{symbol(self.base.numbers[a - 1])}{a}" for a in self.atoms)
        return f"rigid scan of the {self.kind} {names} (moving atoms {list(self.moving)})"

    def geometry(self, value: float) -> XYZFrame:
        """Geometry with the coordinate set to `value` (in the drive's unit).

        Raises
        ------
        GeneratorError
            For a distance <= 0 or an angle outside [0, 180] degrees.
        """
        target = to_internal_unit(self.kind, value, self.unit)
        if not math.isfinite(target):
            raise GeneratorError(f"coordinate value {value!r} is not a finite number")
        pos = np.array(self.base.positions)
        idx = np.array(self.moving) - 1
        a = [x - 1 for x in self.atoms]
        if _undefined(self.kind, pos[a]):
            raise GeneratorError(f"the {self.kind} {'-'.join(map(str, self.atoms))} is undefined "
                                 "on the base geometry (coincident or collinear atoms)")
        current = measure(self.kind, self.atoms, pos)
        if self.kind == "distance":
            if target <= 0:
                raise GeneratorError(f"a distance must be positive, got {value}")
            u = pos[a[1]] - pos[a[0]]
            pos[idx] += (target - current) * u / np.linalg.norm(u)
        elif self.kind == "angle":
            if not 0.0 <= target <= 180.0:
                raise GeneratorError(f"an angle must lie in [0, 180] degrees, got {value}")
            b1 = pos[a[0]] - pos[a[1]]
            b2 = pos[a[2]] - pos[a[1]]
            axis = np.cross(b1, b2)
            if np.linalg.norm(axis) < 1e-10 * np.linalg.norm(b1) * np.linalg.norm(b2):
                axis = _perpendicular(b2)
            pos[idx] = _rotate(pos[idx], pos[a[1]], axis, target - current)
        else:
            delta = (target - current + 180.0) % 360.0 - 180.0
            axis = pos[a[2]] - pos[a[1]]
            pos[idx] = _rotate(pos[idx], pos[a[2]], axis, delta)
        comment = f"value={value!r} {self.kind} {'-'.join(map(str, self.atoms))}"
        return XYZFrame(self.base.numbers, pos, comment)


_VALUE_RE = re.compile(r"(?:^|[\s,;])value\s*[=:]\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)",
                       re.IGNORECASE)


def value_from_comment(comment: str):
    """Coordinate value written in an XYZ comment line, or None.

    Accepted: ``value=1.25`` (or ``value: 1.25``) anywhere in the line, or a
    line that is one number.
    """
    m = _VALUE_RE.search(comment)
    if m:
        return float(m.group(1))
    try:
        v = float(comment.strip())
    except ValueError:
        return None
    return v if math.isfinite(v) else None


def kabsch_align(mobile, reference):
    """Rigidly move `mobile` onto `reference` (least squares, no reflection).

    Parameters
    ----------
    mobile, reference : (n, 3) arrays

    Returns
    -------
    (n, 3) ndarray
        `mobile` rotated and translated to best fit `reference` [2]_.
    """
    p = np.asarray(mobile, dtype=float)
    rot, _ = kabsch(p, reference)
    return (p - p.mean(axis=0)) @ rot.T + np.asarray(reference, dtype=float).mean(axis=0)


class TrajectoryDrive:
    """Interpolation between the frames of a multi-frame geometry file.

    Parameters
    ----------
    frames : list of XYZFrame
        Same atoms in the same order in each.
    values : sequence of float
        Coordinate value of each frame (distinct).
    source : str, optional
        File name, for :meth:`describe`.

    Notes
    -----
    Frames are sorted by value; each is aligned on its predecessor (Kabsch,
    unweighted), so frame 0 keeps its orientation.  Between two frames the
    positions are interpolated linearly; outside the range is an error.
    """

    def __init__(self, frames, values, *, source: str | None = None):
        if len(frames) != len(values):
            raise ValueError("one value per frame is needed")
        if len(frames) < 2:
            raise ConfigError("a trajectory needs at least two frames",
                              key="generator.geometry.trajectory")
        numbers = frames[0].numbers
        for k, fr in enumerate(frames[1:], start=2):
            if fr.n_atoms != len(numbers) or np.any(fr.numbers != numbers):
                diff = next((i for i in range(min(fr.n_atoms, len(numbers)))
                             if fr.numbers[i] != numbers[i]), min(fr.n_atoms, len(numbers)))
                raise ConsistencyError(f"trajectory frame {k} has other atoms than frame 1 "
                                       f"(first difference at atom {diff + 1})", source)
        order = np.argsort(values, kind="stable")
        vals = np.asarray(values, dtype=float)[order]
        if np.any(np.diff(vals) == 0):
            dup = vals[np.nonzero(np.diff(vals) == 0)[0][0]]
            raise ConfigError(f"two trajectory frames share the value {dup:g}",
                              source, "generator.geometry.trajectory")
        aligned = [np.array(frames[order[0]].positions)]
        for k in order[1:]:
            aligned.append(kabsch_align(frames[k].positions, aligned[-1]))
        self.numbers = numbers
        self.values = vals
        self.positions = np.array(aligned)
        self.source = source

    def describe(self) -> str:
        """One line for reports."""
        where = f" of {self.source}" if self.source else ""
        return (f"interpolation between {len(self.values)} frames{where} "
                f"({self.values[0]:g} to {self.values[-1]:g})")

    def geometry(self, value: float) -> XYZFrame:
        """Geometry at `value`, linear between the two enclosing frames.

        Raises
        ------
        GeneratorError
            When `value` lies outside the frames' range.
        """
        v = float(value)
        lo, hi = self.values[0], self.values[-1]
        tol = 1e-12 * max(1.0, abs(lo), abs(hi))
        if not (lo - tol <= v <= hi + tol):
            raise GeneratorError(f"coordinate value {value:g} is outside the trajectory "
                                 f"range [{lo:g}, {hi:g}]")
        k = int(np.clip(np.searchsorted(self.values, v) - 1, 0, len(self.values) - 2))
        t = (v - self.values[k]) / (self.values[k + 1] - self.values[k])
        t = min(1.0, max(0.0, t))
        pos = (1.0 - t) * self.positions[k] + t * self.positions[k + 1]
        return XYZFrame(self.numbers, pos, f"value={value!r} interpolated")

