"""What to do when Poincare-Hopf fails: look where the missing CPs should be.

A failed count ``n - b + r - c`` says which kinds are short: too high means
missing bond or cage CPs (or a spurious ring), too low missing ring CPs.
Missing points are nearly always in predictable places [1]_:

- a cage CP inside a closed set of rings: at the grid's local density
  minima inside the molecule, at the centroid of all ring CPs, and at the
  centroid of the ring CPs around each ring CP;
- a ring CP among bond CPs: at the centroid of the bond CPs around each
  bond CP, and half-way between neighbouring bond CPs;
- a bond or ring CP between two rings: half-way between neighbouring ring
  CPs.

These targeted seeds (a few per CP found, from neighbour lists, so linear
in the molecule's size) are tried first; only if the count still fails are
the denser grid seeds run (:func:`trackscan.topology.seeds.grid_seeds`
levels 1 and 2, only the seeds each level adds).  All retries together run
at most :data:`RETRY_SEED_FACTOR` times as many Newton seeds as the first
pass, so a failing frame costs at most about three times a frame that holds:
the seed count, not the clock, sets the bound, so results stay deterministic.

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

__all__ = ["targeted_seeds", "RETRY_SEED_FACTOR", "thin_seeds", "RING_NEIGHBOUR_RADIUS",
           "BOND_NEIGHBOUR_RADIUS"]

RETRY_SEED_FACTOR = 2.0
"""All retries together run at most this many times the first pass's seeds."""

RING_NEIGHBOUR_RADIUS = 6.0
"""Ring CPs closer than this (bohr) are neighbours (midpoints, cage centroids)."""

BOND_NEIGHBOUR_RADIUS = 3.5
"""Bond CPs closer than this (bohr) are neighbours (ring candidates)."""


def _neighbour_seeds(points, radius):
    """Midpoints of neighbouring pairs and the centroid of each point's neighbours."""
    points = np.asarray(points, dtype=float).reshape(-1, 3)
    if len(points) < 2:
        return np.zeros((0, 3))
    tree = cKDTree(points)
    pairs = tree.query_pairs(radius, output_type="ndarray")
    out = [0.5 * (points[pairs[:, 0]] + points[pairs[:, 1]])] if len(pairs) else []
    for i, nb in enumerate(tree.query_ball_point(points, radius)):
        if len(nb) >= 3:
            out.append(points[sorted(nb)].mean(axis=0)[None])
    return np.concatenate(out) if out else np.zeros((0, 3))


def targeted_seeds(cps, grid, kept) -> np.ndarray:
    """Seeds where missing critical points are to be expected (bohr).

    Parameters
    ----------
    cps : list of CriticalPoint
        The non-nuclear points found so far.
    grid : DensityGrid
    kept : (nx, ny, nz) bool array
        Nodes belonging to the molecule (above the floor, or enclosed).

    Returns
    -------
    (M, 3) float array, in a deterministic order
    """
    rings = np.array([cp.position for cp in cps if cp.kind == "ring"]).reshape(-1, 3)
    bonds = np.array([cp.position for cp in cps if cp.kind == "bond"]).reshape(-1, 3)
    out = [_neighbour_seeds(rings, RING_NEIGHBOUR_RADIUS),
           _neighbour_seeds(bonds, BOND_NEIGHBOUR_RADIUS)]
    if len(rings) >= 4:
        out.append(rings.mean(axis=0)[None])
    values = np.asarray(grid.values)
    mode = "wrap" if grid.periodic else "nearest"
    minima = (values == ndimage.minimum_filter(values, size=3, mode=mode)) & kept
    # flat vacuum plateaus are no minima
    minima &= values < ndimage.maximum_filter(values, size=3, mode=mode)
    out.append(grid.position(np.argwhere(minima).astype(float)))
    return np.concatenate(out)


def thin_seeds(x, budget: int) -> np.ndarray:
    """At most `budget` of the seeds `x`, evenly spread over their order."""
    x = np.asarray(x, dtype=float).reshape(-1, 3)
    budget = max(0, int(budget))
    if len(x) <= budget:
        return x
    if budget == 0:
        return x[:0]
    return x[np.unique(np.linspace(0, len(x) - 1, budget).round().astype(np.int64))]
