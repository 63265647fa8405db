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

from trackscan.topology.limits import SEEDS_PER_CP, check_count, critical_point_cap
from trackscan.topology.newton import merge_points, newton_search, outside_nuclear_spheres
from trackscan.topology.properties import (abramov_energy_densities, canonical_eigenvectors,
                                           classify, ellipticity)
from trackscan.topology.results import CriticalPoint
from trackscan.topology.seeds import atom_seeds, grid_seeds

__all__ = ["Region", "find_critical_points", "converge_seeds", "outside_nuclear_spheres",
           "nuclear_points", "describe_points",
           "exclusion_radii", "nuclear_maxima", "ATTACH_RADIUS"]

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


ATTACH_RADIUS = 0.5
"""Largest distance (bohr) from a nucleus at which a density maximum reached
uphill from it still counts as that nucleus's attractor (see
:func:`nuclear_maxima`)."""


def nuclear_maxima(field, positions, *, reach=None, start_radius: float = 0.1,
                   gtol: float = 1e-8) -> tuple:
    """The density maximum that each nucleus belongs to, found uphill from it.

    A density from a Gaussian basis set has no nuclear cusp, and near a
    light nucleus (H, He) the maximum drifts off the nucleus towards its
    bonded partner: 0.11 bohr in H3+ and 0.2 bohr in compressed H2 or in
    water at RHF/STO-3G (measured on PySCF's analytic densities).  A bond
    path then runs to that maximum and stalls outside the capture sphere of
    the nucleus, and Newton may report the maximum as a non-nuclear
    attractor.  The grid field adds a cusped free atom back at the nucleus
    (:mod:`trackscan.fields.localized`), so the nucleus itself may stay a
    tiny local maximum beside the real one.  Therefore climbs start at the
    nucleus and at 14 points `start_radius` around it (Newton steps where
    the Hessian is negative definite, otherwise gradient steps; a step is
    kept only when rho rises), all nuclei at once, and the highest maximum
    reached within `reach` is the nucleus's attractor.

    Parameters
    ----------
    field : Field
    positions : (n, 3) float array, bohr
        The nuclei.
    reach : float or (n,) float array, bohr, optional
        A climb that goes further than this from its nucleus has left it
        (default: ``ATTACH_RADIUS``, or 0.45 times the distance to the
        nearest other nucleus where that is shorter).
        When every climb does, the nucleus is no maximum of its own (the
        density rises from it towards a neighbour).
    start_radius : float, bohr
    gtol : float
        Converged when |grad rho| < gtol.

    Returns
    -------
    maxima : (n, 3) float array, bohr
        The maximum each nucleus belongs to (the nucleus itself at a cusp).
    attractor : (n,) bool array
        False where every climb left `reach`.
    """
    nuc = np.asarray(positions, dtype=np.float64).reshape(-1, 3)
    n = len(nuc)
    if n == 0:
        return nuc.copy(), np.ones(0, dtype=bool)
    dirs = np.array([[0, 0, 0], [1, 0, 0], [-1, 0, 0], [0, 1, 0], [0, -1, 0], [0, 0, 1],
                     [0, 0, -1]] + [[a, b, c] for a in (-1, 1) for b in (-1, 1) for c in (-1, 1)],
                    dtype=float)
    dirs[1:] /= np.linalg.norm(dirs[1:], axis=1)[:, None]
    if reach is None:
        d = np.linalg.norm(nuc[:, None] - nuc[None], axis=-1)
        np.fill_diagonal(d, np.inf)
        reach = np.minimum(ATTACH_RADIUS, 0.45 * d.min(axis=1))
    x0 = (nuc[:, None, :] + start_radius * dirs[None]).reshape(-1, 3)
    home = np.repeat(nuc, len(dirs), axis=0)
    reach = np.repeat(np.broadcast_to(np.asarray(reach, dtype=float), (n,)), len(dirs))
    x, v, inside = _climb(field, x0, home, reach, gtol)
    v = np.where(inside, v, -np.inf).reshape(n, len(dirs))
    best = np.argmax(v, axis=1)
    attractor = np.isfinite(v[np.arange(n), best])
    maxima = x.reshape(n, len(dirs), 3)[np.arange(n), best]
    return np.where(attractor[:, None], maxima, nuc), attractor


def _climb(field, x0, home, reach, gtol, max_iter=200):
    """Uphill from every point of `x0` until |grad rho| < gtol, a cusp, or `reach`."""
    x = np.array(x0, dtype=np.float64)
    n = len(x)
    value = np.full(n, -np.inf)
    inside = np.ones(n, dtype=bool)
    step = np.full(n, 0.02)
    active = np.ones(n, dtype=bool)
    for _ in range(max_iter):
        idx = np.nonzero(active)[0]
        if len(idx) == 0:
            break
        with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
            v, g, h = field.evaluate(x[idx], 2)
        # a cusped model has no Hessian (nor a gradient) at the nucleus itself
        g = np.where(np.isfinite(g), g, 0.0)
        h = np.where(np.all(np.isfinite(h), axis=(1, 2))[:, None, None], h, 0.0)
        value[idx] = v
        gn = np.linalg.norm(g, axis=1)
        done = gn < gtol
        active[idx[done]] = False
        go = ~done
        idx, v, g, h, gn = idx[go], v[go], g[go], h[go], gn[go]
        if len(idx) == 0:
            break
        lam = np.linalg.eigvalsh(0.5 * (h + h.transpose(0, 2, 1)))
        newton = np.zeros_like(g)
        neg = lam[:, -1] < 0
        if np.any(neg):
            newton[neg] = -np.linalg.solve(h[neg], g[neg][..., None])[..., 0]
        use = neg & (np.linalg.norm(newton, axis=1) <= step[idx])
        dx = np.where(use[:, None], newton, g / gn[:, None] * step[idx][:, None])
        trial = x[idx] + dx
        vt = field.evaluate(trial, 0)[0]
        up = vt > v
        x[idx[up]] = trial[up]
        value[idx[up]] = vt[up]
        step[idx[up]] = np.minimum(2.0 * step[idx[up]], 0.05)
        step[idx[~up]] *= 0.5
        # a step that failed next to the nucleus: if the nucleus itself is
        # higher, go there (at a cusp the next evaluation ends the climb
        # instead of halving the step twenty times)
        near = idx[~up][np.linalg.norm(x[idx[~up]] - home[idx[~up]], axis=1) < 0.1]
        if len(near):
            vh = field.evaluate(home[near], 0)[0]
            jump = vh > value[near]
            x[near[jump]] = home[near[jump]]
            value[near[jump]] = vh[jump]
        active[idx[~up & (step[idx] < 1e-6)]] = False      # rho falls every way: a cusp
        # on the nucleus, falling every way at a small step already: the cusp maximum
        at_home = np.linalg.norm(x[idx] - home[idx], axis=1) == 0.0
        active[idx[~up & at_home & (step[idx] < 0.01)]] = False
        gone = np.linalg.norm(x[idx] - home[idx], axis=1) > reach[idx]
        inside[idx[gone]] = False
        active[idx[gone]] = False
    return x, value, inside


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
                         extra_seeds=None, envelope=None) -> tuple:
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
    envelope : DensityEnvelope, optional
        Where the density floor does not apply (inside cages); default:
        everywhere below the floor is vacuum.

    Returns
    -------
    points : (K, 3) float array
        Converged, merged points (bohr), not yet classified.
    n_seeds : int
    """
    kept = None if envelope is None else envelope.kept()
    u = grid_seeds(grid.values, floor=settings.density_floor, lo=region.lo, hi=region.hi,
                   periodic=region.periodic, level=level, kept=kept)
    cap = critical_point_cap(grid.n_atoms)
    if level == 0:   # bounded work: noise has seeds in most cells (limits.py)
        check_count(len(u), SEEDS_PER_CP * cap, "first-pass seeds", grid)
    seeds = [grid.position(u)]
    real = grid.numbers > 0
    seeds.append(atom_seeds(grid.positions[real], level=level))
    if extra_seeds is not None and len(extra_seeds):
        seeds.append(np.asarray(extra_seeds, dtype=float).reshape(-1, 3))
    return converge_seeds(field, grid, settings, region, np.concatenate(seeds),
                          envelope=envelope)


def converge_seeds(field, grid, settings, region, x0, *, envelope=None,
                   max_seeds=None) -> tuple:
    """Newton from seeds (bohr): the distinct critical points they converge to.

    Seeds outside `region` or inside a nuclear exclusion sphere are dropped,
    seeds closer than a tenth of a grid step are run once.  With `max_seeds`
    at most that many are run, evenly spread over their order.

    Returns
    -------
    points : (K, 3) float array
        Converged, merged points (bohr), not yet classified.
    n_seeds : int
        Seeds kept after the region and sphere filters.
    """
    x0 = np.asarray(x0, dtype=float).reshape(-1, 3)
    x0 = x0[region.inside(x0)]
    real = grid.numbers > 0
    nuclei = grid.positions[real]
    radii = exclusion_radii(field, grid, settings)[real]
    if len(nuclei) and len(x0):
        x0 = x0[outside_nuclear_spheres(x0, nuclei, radii)]
    n_seeds = len(x0)
    if n_seeds == 0:
        return np.zeros((0, 3)), 0
    # seeds closer than a tenth of a grid step lead to the same place
    x0 = region.wrap(x0)
    keep = merge_points(x0, np.arange(n_seeds), 0.1 * float(np.min(grid.spacing)),
                        cell=region.cell)
    x0 = x0[keep]
    if max_seeds is not None and len(x0) > max_seeds:
        from trackscan.topology.retry import thin_seeds

        x0 = thin_seeds(x0, max_seeds)
        n_seeds = len(x0)
    floor = settings.density_floor if envelope is None else envelope.floors(x0)
    x, conv, n_iter = newton_search(field, x0, gtol=settings.gtol, maxiter=settings.maxiter,
                                    max_step=settings.max_step, inside=region.inside,
                                    nuclei=nuclei, nuclear_radius=radii,
                                    floor=floor)
    logger.debug("Newton: %d seeds, %d converged, %d iterations", len(x0), int(conv.sum()), n_iter)
    x = region.wrap(x[conv])
    if len(x) == 0:
        return x, n_seeds
    g = np.linalg.norm(field.evaluate(x, 1)[1], axis=1)
    keep = merge_points(x, g, settings.xtol, cell=region.cell)
    check_count(len(keep), critical_point_cap(grid.n_atoms), "critical points", grid)
    return x[keep], n_seeds


def describe_points(field, x, settings, *, envelope=None) -> list:
    """Classify converged points and compute their properties.

    Points below the density floor are dropped, except inside the molecule
    (`envelope`, a :class:`~trackscan.topology.envelope.DensityEnvelope`):
    those are kept with ``below_floor = True``.

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
    low = v < settings.density_floor
    enclosed = np.zeros(len(x), dtype=bool)
    if envelope is not None and np.any(low):
        enclosed = envelope.inside(x)
    out = []
    for i in range(len(x)):
        if low[i] and not enclosed[i]:
            continue
        lap = float(lam[i].sum())
        cp = CriticalPoint(kind=kinds[i], position=x[i].copy(), rho=float(v[i]),
                           rank=int(rank[i]), signature=int(signature[i]), laplacian=lap,
                           eigenvalues=lam[i].copy(), eigenvectors=vec[i].T.copy(),
                           gradient_norm=float(gn[i]), below_floor=bool(low[i]))
        if cp.kind == "bond":
            cp.ellipticity = ellipticity(lam[i])
            cp.energy_densities = abramov_energy_densities(float(v[i]), lap, float(gn[i]))
        out.append(cp)
    return out
