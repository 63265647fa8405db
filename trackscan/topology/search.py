"""Critical-point search on one field: seeds, Newton, merging, classification.

Nuclear attractors are placed at the nuclei themselves: at a nucleus the
density has a cusp (Kato 1957), not a smooth maximum, so it is not a CP in
the strict sense but it behaves as a (3,-3) one [1]_.  Newton iterates that
enter a sphere of ``nuclear_radius`` around a nucleus are abandoned, and a
converged point inside such a sphere is that nuclear attractor.

References
----------
.. [1] R. F. W. Bader, *Atoms in Molecules: A Quantum Theory*, Oxford
   University Press (1990), section 2.2.
.. [2] T. Kato, "On the eigenfunctions of many-particle systems in quantum
   mechanics", Commun. Pure Appl. Math. 10, 151 (1957).
   :DOI:`10.1002/cpa.3160100201`
"""

from __future__ import annotations

import logging

import numpy as np

from trackscan.topology.newton import merge_points, newton_search
from trackscan.topology.properties import (abramov_energy_densities, canonical_eigenvectors,
                                           classify, ellipticity)
from trackscan.topology.results import CriticalPoint
from trackscan.topology.seeds import atom_seeds, grid_seeds

__all__ = ["Region", "find_critical_points", "nuclear_points", "describe_points",
           "exclusion_radii"]

logger = logging.getLogger(__name__)


class Region:
    """The part of a grid where critical points are searched.

    Parameters
    ----------
    grid : DensityGrid
    margin : float, bohr
        Distance kept from the faces of a non-periodic grid.
    """

    def __init__(self, grid, margin: float):
        self.grid = grid
        self.periodic = bool(grid.periodic)
        inv = np.linalg.inv(grid.axes)
        self._inv = inv
        n = np.asarray(grid.shape, dtype=float)
        mu = margin * np.linalg.norm(inv, axis=0)   # index units per bohr, per axis
        self.lo = mu
        self.hi = n - 1.0 - mu
        self._lo0 = np.zeros(3)
        self._hi0 = n - 1.0

    def u(self, x):
        """Fractional indices of points."""
        return (np.asarray(x, dtype=float).reshape(-1, 3) - self.grid.origin) @ self._inv

    @property
    def cell(self):
        """Periodic cell vectors (rows), or None for an isolated grid."""
        return self.grid.cell if self.periodic else None

    def wrap(self, x):
        """Points folded into the home cell (unchanged if not periodic)."""
        x = np.asarray(x, dtype=float).reshape(-1, 3)
        if not self.periodic:
            return x
        u = np.mod(self.u(x), np.asarray(self.grid.shape, dtype=float))
        return self.grid.origin + u @ self.grid.axes

    def inside(self, x):
        """True for points inside the search region (always, if periodic)."""
        if self.periodic:
            return np.ones(len(np.asarray(x).reshape(-1, 3)), dtype=bool)
        u = self.u(x)
        return np.all((u >= self.lo) & (u <= self.hi), axis=1)

    def in_grid(self, x):
        """True for points inside the sampled box (for gradient paths)."""
        if self.periodic:
            return np.ones(len(np.asarray(x).reshape(-1, 3)), dtype=bool)
        u = self.u(x)
        return np.all((u >= self._lo0) & (u <= self._hi0), axis=1)


def nuclear_points(field, grid, region) -> tuple:
    """Nuclear attractors: one per real atom (Z > 0) inside the grid.

    Returns
    -------
    cps : list of CriticalPoint
    skipped : list of int
        1-based numbers of atoms left out (ghost atoms or outside the grid).
    """
    cps, skipped = [], []
    pos = grid.positions
    if len(pos) == 0:
        return cps, skipped
    inside = region.in_grid(pos)
    rho = field.evaluate(pos, 0)[0]
    for i, z in enumerate(grid.numbers):
        if z <= 0 or not inside[i]:
            skipped.append(i + 1)
            continue
        cps.append(CriticalPoint(kind="nuclear", position=pos[i].copy(), rho=float(rho[i]),
                                 rank=3, signature=-3, atoms=[i + 1]))
    return cps, skipped


def exclusion_radii(field, grid, settings) -> np.ndarray:
    """Per atom, the radius (bohr) of the sphere kept free of critical points.

    ``settings.nuclear_radius``, or the field's core-smoothing radius
    (:attr:`trackscan.fields.GridField.core_radii`) where that is larger.
    Atoms beyond Ar, which the free-atom model does not cover, get the
    default core radius: their unsubtracted cores ring in the spline.
    """
    from trackscan.fields.grid_field import CORE_RADIUS

    r = np.full(grid.n_atoms, float(settings.nuclear_radius))
    r = np.where(grid.numbers > 18, np.maximum(r, CORE_RADIUS), r)
    core = getattr(field, "core_radii", None)
    if core is not None and len(core) == grid.n_atoms:
        r = np.maximum(r, core)
    return r


def find_critical_points(field, grid, settings, region, *, level: int = 0,
                         extra_seeds=None) -> tuple:
    """Non-nuclear critical points of `field` inside `region`.

    Parameters
    ----------
    field : Field
    grid : DensityGrid
        Supplies the samples for the exhaustive seeding and the atoms.
    settings : AnalysisSettings
    region : Region
    level : int
        Seeding level (see :func:`trackscan.topology.seeds.grid_seeds`).
    extra_seeds : (M, 3) float array, optional
        More seeds (bohr).

    Returns
    -------
    points : (K, 3) float array
        Converged, merged points (bohr), not yet classified.
    n_seeds : int
    """
    u = grid_seeds(grid.values, floor=settings.density_floor, lo=region.lo, hi=region.hi,
                   periodic=region.periodic, level=level)
    seeds = [grid.position(u)]
    real = grid.numbers > 0
    seeds.append(atom_seeds(grid.positions[real], level=level))
    if extra_seeds is not None and len(extra_seeds):
        seeds.append(np.asarray(extra_seeds, dtype=float).reshape(-1, 3))
    x0 = np.concatenate(seeds)
    x0 = x0[region.inside(x0)]
    nuclei = grid.positions[real]
    radii = exclusion_radii(field, grid, settings)[real]
    if len(nuclei) and len(x0):
        d2 = ((x0[:, None, :] - nuclei[None]) ** 2).sum(-1)
        x0 = x0[np.all(d2 > radii[None, :] ** 2, axis=1)]
    n_seeds = len(x0)
    if n_seeds == 0:
        return np.zeros((0, 3)), 0
    # seeds closer than a tenth of a grid step lead to the same place
    x0 = region.wrap(x0)
    keep = merge_points(x0, np.arange(n_seeds), 0.1 * float(np.min(grid.spacing)),
                        cell=region.cell)
    x0 = x0[keep]
    x, conv, n_iter = newton_search(field, x0, gtol=settings.gtol, maxiter=settings.maxiter,
                                    max_step=settings.max_step, inside=region.inside,
                                    nuclei=nuclei, nuclear_radius=radii,
                                    floor=settings.density_floor)
    logger.debug("Newton: %d seeds, %d converged, %d iterations", len(x0), int(conv.sum()), n_iter)
    x = region.wrap(x[conv])
    if len(x) == 0:
        return x, n_seeds
    g = np.linalg.norm(field.evaluate(x, 1)[1], axis=1)
    keep = merge_points(x, g, settings.xtol, cell=region.cell)
    return x[keep], n_seeds


def describe_points(field, x, settings) -> list:
    """Classify converged points and compute their properties.

    Points below the density floor are dropped.

    Returns
    -------
    list of CriticalPoint (ids not yet assigned)
    """
    x = np.asarray(x, dtype=float).reshape(-1, 3)
    if len(x) == 0:
        return []
    v, g, h = field.evaluate(x, 2)
    h = 0.5 * (h + h.transpose(0, 2, 1))
    lam, vec = np.linalg.eigh(h)
    vec = canonical_eigenvectors(vec)
    rank, signature, kinds = classify(lam, settings.degenerate_tol)
    gn = np.linalg.norm(g, axis=1)
    out = []
    for i in range(len(x)):
        if v[i] < settings.density_floor:
            continue
        lap = float(lam[i].sum())
        cp = CriticalPoint(kind=kinds[i], position=x[i].copy(), rho=float(v[i]),
                           rank=int(rank[i]), signature=int(signature[i]), laplacian=lap,
                           eigenvalues=lam[i].copy(), eigenvectors=vec[i].T.copy(),
                           gradient_norm=float(gn[i]))
        if cp.kind == "bond":
            cp.ellipticity = ellipticity(lam[i])
            cp.energy_densities = abramov_energy_densities(float(v[i]), lap, float(gn[i]))
        out.append(cp)
    return out
