"""Valence-only densities (effective core potentials): recognise them, model the core.

A density computed with an effective core potential (ECP) has no core
electrons: around such a nucleus it has a crater (a small value at the
nucleus) inside a shell of maxima, instead of the cusp of an all-electron
atom.  Three signals are read from a grid (:func:`find_valence_only`):

- the nuclear-charge column of the cube: many programs write the valence
  charge there (``Z - core``);
- a crater: the samples next to the nucleus are lower than samples within
  about 1.5 bohr of it;
- the electron count (sum of the samples times the voxel volume) below the
  sum of the nuclear charges by about the core electrons.

The analysis then restores the missing core as a spherical model density,
the innermost shells of the free atom of :mod:`trackscan.promolecule`, and
treats the core sphere (out to a little beyond the valence shell maximum)
as the atom's own: one attractor at the nucleus, no critical point inside,
and a gradient path entering the sphere ends at the nucleus
(:class:`trackscan.fields.GridField`).  Adding a model core density to an
ECP density is the usual practice for the topology of such densities; one
published form fits core densities per subshell (Keith & Frisch [1]_, from
memory [M]).  The topology near such an atom follows the core model used.

References
----------
.. [1] T. A. Keith and M. J. Frisch, "Subshell fitting of relativistic atomic
   core electron densities for use in QTAIM analyses of ECP-based wave
   functions", J. Phys. Chem. A 115, 12879 (2011) [M].
   :DOI:`10.1021/jp2040086` [M]
"""

from __future__ import annotations

import itertools
import logging
from dataclasses import dataclass

import numpy as np

from trackscan.elements import symbol

__all__ = ["ValenceOnlyAtom", "find_valence_only", "STANDARD_CORES", "default_core",
           "core_radius", "PROBE_RADIUS", "CORE_MARGIN", "MAX_CORE_FRACTION"]

logger = logging.getLogger(__name__)

#: Core sizes of the usual effective core potentials: closed-shell cores
#: [He], [Ne], [Ar], [Ar]3d10, [Kr], [Kr]4d10, [Xe], [Kr]4d10 4f14,
#: [Kr]4d10 4f14 5s2 5p6 and [Xe]4f14 5d10.
STANDARD_CORES = (2, 10, 18, 28, 36, 46, 54, 60, 68, 78)

PROBE_RADIUS = 1.5
"""Radius (bohr) within which a shell of maxima around a nucleus is looked for."""

CORE_MARGIN = 0.5
"""Distance (bohr) beyond the valence shell maximum that still belongs to the
core sphere of a valence-only atom (the restored density must fall
outward there, which it does once the shell maximum is passed)."""

MAX_CORE_FRACTION = 0.45
"""A core sphere never reaches past this fraction of the distance to the
nearest other nucleus (bond critical points lie beyond it)."""

_ELECTRON_TOLERANCE = 1.5   # electrons: a smaller deficit is the box, or a charge


@dataclass(frozen=True)
class ValenceOnlyAtom:
    """An atom whose density has no core electrons.

    Attributes
    ----------
    index : int
        0-based atom index.
    Z : int
    missing_electrons : int
        Core electrons the density lacks.
    evidence : tuple of str
        Which signals said so, in words.
    shell_radius : float or None, bohr
        Distance from the nucleus of the highest sample within
        :data:`PROBE_RADIUS` (the valence shell maximum), when there is a crater.
    """

    index: int
    Z: int
    missing_electrons: int
    evidence: tuple
    shell_radius: float | None = None

    def describe(self) -> str:
        """``"Pd1: valence-only density (about 28 core electrons missing)"``."""
        return (f"{symbol(self.Z)}{self.index + 1}: valence-only density (about "
                f"{self.missing_electrons} core electrons missing)")


def default_core(z: int) -> int:
    """Core electrons of the most common effective core potential of element `z`.

    The def2 cores (Rb-Xe 28, Cs-La 46, Ce-Lu 28, Hf-Rn 60) and the
    Los Alamos ones below Rb (Na-Cu 10, Zn-Kr 28 from Ga, 2 for Li-Ne) [M].
    """
    z = int(z)
    for top, core in ((10, 2), (18, 10), (30, 10), (36, 28), (54, 28), (57, 46), (71, 28)):
        if z <= top:
            return min(core, z - 1)
    return 60


def _nodes_near(grid, centre, radius):
    """Values and distances of the samples within `radius` of `centre`."""
    inv = np.linalg.inv(grid.axes)
    shape = np.asarray(grid.shape)
    half = radius * np.linalg.norm(inv, axis=0) + 1.0
    c = (centre - grid.origin) @ inv
    lo = np.floor(c - half).astype(np.int64)
    hi = np.ceil(c + half).astype(np.int64)
    if grid.periodic:
        ranges = [np.arange(a, b + 1) for a, b in zip(lo, hi)]
    else:
        ranges = [np.arange(max(a, 0), min(b, n - 1) + 1) for a, b, n in zip(lo, hi, shape)]
    if min(len(r) for r in ranges) == 0:
        return np.zeros(0), np.zeros(0)
    vals = grid.values[np.ix_(*[np.mod(r, n) for r, n in zip(ranges, shape)])].reshape(-1)
    nodes = np.stack(np.meshgrid(*ranges, indexing="ij"), -1).reshape(-1, 3).astype(np.float64)
    d = np.linalg.norm(grid.origin + nodes @ grid.axes - centre, axis=1)
    inside = d <= radius
    return vals[inside], d[inside]


def _crater(grid, i, reach):
    """Radius of the valence shell maximum around atom i, or None (no crater)."""
    h = float(np.max(grid.spacing))
    vals, d = _nodes_near(grid, grid.positions[i], reach)
    if len(vals) == 0:
        return None
    centre = d <= max(0.9 * h, d.min())
    shell = d >= max(0.3, 2.0 * h)
    if not np.any(centre) or not np.any(shell):
        return None
    k = int(np.argmax(np.where(shell, vals, -np.inf)))
    if vals[k] > vals[centre].max():
        return float(d[k])
    return None


def find_valence_only(grid) -> list:
    """The atoms of a grid whose density lacks its core electrons.

    Parameters
    ----------
    grid : DensityGrid

    Returns
    -------
    list of ValenceOnlyAtom
        In atom order; empty for an all-electron density.

    Notes
    -----
    An atom is valence-only when the cube's nuclear-charge column holds a
    positive charge that differs from Z (then ``Z - charge`` electrons are
    missing), or when the samples show a crater at a nucleus heavier than
    He (then the missing electrons are the standard core sizes, one per such
    atom, whose sum best matches the deficit of the electron count; the
    element's usual core, :func:`default_core`, when the count decides
    nothing).  A deficit of the electron count alone (with no crater) is
    not enough: the box may cut off density, or the molecule be charged.
    """
    n = grid.n_atoms
    if n == 0:
        return []
    z = np.asarray(grid.numbers)
    q = np.asarray(grid.charges)
    pos = grid.positions
    d = np.linalg.norm(pos[:, None] - pos[None], axis=-1)
    np.fill_diagonal(d, np.inf)
    nearest = d.min(axis=1) if n > 1 else np.full(1, np.inf)
    found = {}
    for i in range(n):
        if z[i] > 0 and q[i] > 0.5 and abs(q[i] - z[i]) > 0.5 and q[i] < z[i]:
            found[i] = (int(round(z[i] - q[i])),
                        [f"nuclear charge {q[i]:g} in the file for Z = {int(z[i])}"])
    craters = {}
    for i in range(n):
        if z[i] > 2:
            r = _crater(grid, i, min(PROBE_RADIUS, 0.5 * float(nearest[i])))
            if r is not None:
                craters[i] = r
    for i, r in craters.items():
        if i in found:
            found[i][1].append(f"density crater at the nucleus, shell maximum {r:.2f} bohr out")
    guess = [i for i in craters if i not in found]
    if guess:
        count = grid.integral()
        deficit = float(z[z > 0].sum()) - count - sum(m for m, _ in found.values())
        cores = _match_cores([int(z[i]) for i in guess], deficit)
        for i, core in zip(guess, cores):
            why = [f"density crater at the nucleus, shell maximum {craters[i]:.2f} bohr out"]
            if deficit >= _ELECTRON_TOLERANCE:
                why.append(f"electron count {count:.2f}, {deficit:.1f} below the nuclear charges")
            found[i] = (core, why)
    out = [ValenceOnlyAtom(index=i, Z=int(z[i]), missing_electrons=m, evidence=tuple(why),
                           shell_radius=craters.get(i))
           for i, (m, why) in sorted(found.items()) if m > 0]
    for a in out:
        logger.info("%s (%s)", a.describe(), "; ".join(a.evidence))
    return out


def _match_cores(numbers, deficit):
    """Standard core sizes, one per atom, whose sum is nearest `deficit`."""
    defaults = [default_core(zi) for zi in numbers]
    if deficit < _ELECTRON_TOLERANCE:
        return defaults
    options = [[c for c in STANDARD_CORES if c < zi] or [default_core(zi)] for zi in numbers]
    if np.prod([len(o) for o in options], dtype=float) > 1e4:
        return defaults
    best = min(itertools.product(*options),
               key=lambda cs: (abs(sum(cs) - deficit),
                               sum(abs(c - dc) for c, dc in zip(cs, defaults))))
    return list(best)


def core_radius(atom: ValenceOnlyAtom, nearest: float, floor: float) -> float:
    """Radius (bohr) of the sphere treated as the valence-only atom's own core.

    ``shell_radius + CORE_MARGIN`` (or `floor` + CORE_MARGIN without a
    crater), at least `floor`, at most ``MAX_CORE_FRACTION * nearest``.
    """
    r = (atom.shell_radius if atom.shell_radius is not None else floor) + CORE_MARGIN
    return float(max(floor, min(r, MAX_CORE_FRACTION * nearest)))
