"""Starting points for the critical-point search.

Three sources, all vectorised:

1. an exhaustive criterion over the grid: every cell in which each of the
   three components of the gradient (central differences at the nodes, in
   index coordinates) changes sign among the cell's eight corners.  A
   critical point inside a cell forces all three sign changes, so no CP
   whose neighbourhood is resolved by the grid is missed;
2. atom-pair midpoints (bond CPs), and centroids of atom triples and
   quadruples (ring and cage CPs), after Popelier [1]_;
3. for the retries when Poincare-Hopf fails: cells where only two
   components change sign, nodes that are 26-neighbour minima of |grad rho|
   [1]_, and finally a coarse lattice of all nodes above the density floor.

References
----------
.. [1] P. L. A. Popelier, "A robust algorithm to locate automatically all
   types of critical points in the charge density and its Laplacian",
   Chem. Phys. Lett. 228, 160 (1994). :DOI:`10.1016/0009-2614(94)00932-1`
"""

from __future__ import annotations


import numpy as np
from scipy import ndimage
from scipy.spatial import cKDTree

__all__ = ["grid_seeds", "atom_seeds", "MAX_LEVEL"]

MAX_LEVEL = 2
"""Highest seeding level (0 = first pass, 1 and 2 = denser retries)."""

_PAIR_CUTOFF = 10.0   # bohr: midpoints of atom pairs closer than this
_GROUP_CUTOFF = 6.5   # bohr: centroids of triples/quadruples with all pairs closer
_MAX_QUADS = 20000


def _central_sign(values, axis, periodic):
    """Sign (True = positive) of the central difference along `axis` at every node.

    ``a - b > 0`` exactly when ``a > b`` for finite floats (a difference of
    two different floats is never rounded to zero), so the comparison is
    made directly, without a float array of differences.
    """
    if periodic:
        return np.roll(values, -1, axis) > np.roll(values, 1, axis)
    d = np.empty(values.shape, dtype=bool)
    sl = [slice(None)] * 3

    def s(a, b):
        sl2 = list(sl)
        sl2[axis] = slice(a, b)
        return tuple(sl2)

    np.greater(values[s(2, None)], values[s(None, -2)], out=d[s(1, -1)])
    np.greater(values[s(1, 2)], values[s(0, 1)], out=d[s(0, 1)])
    np.greater(values[s(-1, None)], values[s(-2, -1)], out=d[s(-1, None)])
    return d


def _corner_any_all(b, periodic):
    """Per cell: is the flag set at any / at all of its eight corners."""
    if periodic:
        b = np.concatenate([b, b[:1]], axis=0)
        b = np.concatenate([b, b[:, :1]], axis=1)
        b = np.concatenate([b, b[:, :, :1]], axis=2)
    # the eight corners reduced one axis at a time (pairs along x, then y, then z)
    anyv, allv = b[:-1] | b[1:], b[:-1] & b[1:]
    anyv, allv = anyv[:, :-1] | anyv[:, 1:], allv[:, :-1] & allv[:, 1:]
    return anyv[:, :, :-1] | anyv[:, :, 1:], allv[:, :, :-1] & allv[:, :, 1:]


def grid_seeds(values, *, floor: float, lo, hi, periodic: bool, level: int = 0,
               kept=None, only_new: bool = False) -> np.ndarray:
    """Seeds from the grid samples, as fractional indices.

    Parameters
    ----------
    values : (nx, ny, nz) float array
        Density samples.
    floor : float
        Cells whose corners are all below this density are skipped.
    lo, hi : (3,) float arrays
        Allowed range of fractional indices (ignored when periodic).
    periodic : bool
    kept : (nx, ny, nz) bool array, optional
        Nodes that count as part of the molecule (default ``values >
        floor``); :class:`trackscan.topology.envelope.DensityEnvelope` adds
        the enclosed low-density nodes inside cages.
    level : {0, 1, 2}
        0: cells with all three sign changes (cell centres).
        1: adds cells with at least two sign changes and the nodes that are
        26-neighbour minima of the squared finite-difference gradient.
        2: adds every third node above the floor.
    only_new : bool
        Only the seeds this level adds to the level below it (for retries
        that have already run the lower levels).

    Returns
    -------
    (M, 3) float array
    """
    values = np.asarray(values, dtype=np.float64)
    if kept is None:
        kept = values > floor
    need = 3 if level == 0 else 2
    seeds = []
    if not only_new or level <= 1:
        changes = []
        for axis in range(3):
            anyv, allv = _corner_any_all(_central_sign(values, axis, periodic), periodic)
            changes.append(anyv & ~allv)
        dense, _ = _corner_any_all(kept, periodic)
        count = changes[0].astype(np.int8) + changes[1] + changes[2]
        pick = (count == 2) if (only_new and level == 1) else (count >= need)
        seeds.append(np.argwhere(pick & dense).astype(np.float64) + 0.5)
    if level >= 1 and not (only_new and level >= 2):
        g2 = np.zeros_like(values)
        mode = "wrap" if periodic else "nearest"
        for axis in range(3):
            g2 += ndimage.correlate1d(values, [-0.5, 0.0, 0.5], axis=axis, mode=mode) ** 2
        minima = (g2 == ndimage.minimum_filter(g2, size=3, mode=mode)) & kept
        seeds.append(np.argwhere(minima).astype(np.float64))
    if level >= 2:
        sub = kept[::3, ::3, ::3]
        seeds.append(np.argwhere(sub).astype(np.float64) * 3.0)
    out = np.concatenate(seeds)
    if not periodic:
        ok = np.all((out >= lo) & (out <= hi), axis=1)
        out = out[ok]
    return out


def atom_seeds(positions, *, level: int = 0) -> np.ndarray:
    """Atom-pair midpoints and triple/quadruple centroids (bohr).

    Parameters
    ----------
    positions : (n, 3) float array, bohr
    level : int
        At level >= 1 the cutoffs are 1.5 times larger.

    Returns
    -------
    (M, 3) float array, bohr

    Notes
    -----
    Pairs and groups come from neighbour lists (:class:`scipy.spatial.cKDTree`),
    so the cost grows with the number of near neighbours, not with atoms^2
    or atoms^3.  At most about ``_MAX_QUADS`` quadruples are made.
    """
    pos = np.asarray(positions, dtype=np.float64).reshape(-1, 3)
    n = len(pos)
    if n < 2:
        return np.zeros((0, 3))
    scale = 1.5 if level >= 1 else 1.0
    tree = cKDTree(pos)
    pairs = _sorted_pairs(tree, _PAIR_CUTOFF * scale)
    out = [0.5 * (pos[pairs[:, 0]] + pos[pairs[:, 1]])]
    # neighbour lists (later atoms only): triples and quadruples with all pairs near
    near = _sorted_pairs(tree, _GROUP_CUTOFF * scale)
    later = [set() for _ in range(n)]
    for a, b in near.tolist():
        later[a].add(b)
    triples = [(a, b, c) for a, b in near.tolist()
               for c in sorted(later[a] & later[b])]
    if triples:
        t = np.asarray(triples)
        out.append(pos[t].mean(axis=1))
        quads = []
        for a, b, c in triples:
            quads.extend((a, b, c, e) for e in sorted(later[a] & later[b] & later[c]))
            if len(quads) > _MAX_QUADS:
                break
        if quads:
            out.append(pos[np.asarray(quads)].mean(axis=1))
    return np.concatenate(out)


def _sorted_pairs(tree, radius) -> np.ndarray:
    """Index pairs (i < j) closer than `radius`, in lexicographic order."""
    pairs = tree.query_pairs(radius, output_type="ndarray").reshape(-1, 2)
    return pairs[np.lexsort((pairs[:, 1], pairs[:, 0]))]
