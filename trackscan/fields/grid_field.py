"""The interpolated grid field: a DensityGrid seen through the Field protocol.

Point ``p`` maps to fractional indices ``u = (p - o) A^-1`` (rows of ``A`` are
the step vectors), the tricubic B-spline is evaluated in ``u`` and the
derivatives are carried to Cartesian coordinates by the chain rule,
``grad_p = A^-1 grad_u`` and ``H_p = A^-1 H_u A^-T``, so skewed grids are
handled exactly.

By default a core-localised promolecule (:mod:`trackscan.fields.localized`)
is subtracted from the samples before the spline is fitted, and its exact
value and derivatives are added back at every evaluation: the scheme that
cut the position errors of bond critical points by one to two orders of
magnitude at 0.15-0.2 bohr spacing (../shared/METHODS.md section 1).
"""

from __future__ import annotations

import logging

import numpy as np

from trackscan.fields.bspline import TricubicBSpline
from trackscan.fields.core_model import core_radius as valence_core_radius
from trackscan.fields.core_model import find_valence_only
from trackscan.fields.localized import R_INNER, R_OUTER, LocalizedPromolecule
from trackscan.grid import DensityGrid
from trackscan.field import FieldBase
from trackscan.promolecule import MAX_Z

__all__ = ["GridField", "CORE_RADIUS"]

CORE_RADIUS = 0.45
"""Radius (bohr) of the core sphere of atoms heavier than He whose remainder
samples are replaced by a smooth fit (see :class:`GridField`)."""

logger = logging.getLogger(__name__)


class GridField(FieldBase):
    """Value, gradient and Hessian of a gridded density (a Field).

    Parameters
    ----------
    grid : DensityGrid
    subtract_promolecule : bool
        Spline ``rho - P`` and add the analytic ``P`` back, with ``P`` the
        core-localised free-atom model (every element H-Rn).  H/He atoms
        whose samples show no nuclear cusp (a Gaussian basis set; see
        ``_smooth_light_nuclei``) are left out of ``P``.  Atoms whose density
        has no core (an effective core potential, recognised by
        :func:`trackscan.fields.core_model.find_valence_only`) first get
        their missing core electrons back as the innermost shells of the
        free atom, and their core sphere reaches ``CORE_MARGIN`` beyond the
        valence shell maximum (:func:`~trackscan.fields.core_model.core_radius`):
        inside it the field is the free atom plus the smooth fill, so the
        atom has one attractor at its nucleus and no critical point in its
        core.  Without subtraction the restored core is added analytically.
    r_in, r_out : float, bohr
        Switching radii of the localised promolecule.
    degree : {3, 5}
        B-spline degree.  Cubic is the default: its short support keeps the
        ringing of what remains of the cores local; quintic converges faster
        on fine grids (<= 0.1 bohr) but rings badly on coarser ones.
    core_radius : float, bohr
        With subtraction, the remainder samples within this distance of a
        nucleus heavier than He are replaced by the smoothest continuation
        of the samples around them (``_smooth_cores``).  A single-zeta free
        atom describes the 1s core only roughly, so the remainder there is a
        steep, under-sampled bump (tens of e/bohr^3 at 0.1 bohr from an O
        nucleus, for an all-electron Gaussian-basis density) that makes the
        spline ring and creates
        spurious critical points out to 0.7 bohr.  No critical point lies in
        a heavy atom's core, and the nuclear attractor is placed at the
        nucleus, so nothing is lost; the field inside the core sphere is
        model plus fill.  Without subtraction the density samples themselves
        are smoothed so, at every all-electron atom heavier than He: the
        bare cores ring even further (a spline of the raw RHF/STO-3G density
        of CO2 or ozone at 0.15-0.2 bohr had 10-30 spurious critical points
        within 0.85 bohr of the nuclei and failed Poincare-Hopf; with the
        cores smoothed it finds the analytic density's critical points),
        but the curvatures near the cores stay poorer than with subtraction
        (CO2 bond-CP ellipticity 0.3-0.5 instead of 0 at 0.1-0.15 bohr).
        0 disables it.

    Attributes
    ----------
    grid : DensityGrid
    model : LocalizedPromolecule or None
        The subtracted model (None when nothing is subtracted).
    core_radii : (n,) float array, bohr
        Per atom, the radius of the sphere whose samples were replaced (0
        where nothing was); the critical-point search keeps out of it.
    valence_only : list of ValenceOnlyAtom
        Atoms whose density has no core (see :mod:`trackscan.fields.core_model`).
    core_electrons : (n,) int array
        Per atom, the model core electrons added to the density (0 for
        all-electron atoms).

    Notes
    -----
    Fitting costs one recursive filter pass over the grid (O(N)); each
    evaluation costs a 64-coefficient gather per point plus, near nuclei,
    the free-atom terms.  Periodic grids wrap points into the cell.

    References
    ----------
    .. [1] C. de Boor, *A Practical Guide to Splines*, Springer (1978).
    .. [2] E. Clementi and D. L. Raimondi, J. Chem. Phys. 38, 2686 (1963).
       :DOI:`10.1063/1.1733573`
    """

    def __init__(self, grid: DensityGrid, *, subtract_promolecule: bool = True,
                 r_in: float = R_INNER, r_out: float = R_OUTER, degree: int = 3,
                 core_radius: float = CORE_RADIUS):
        self.grid = grid
        self._inv = np.linalg.inv(grid.axes)
        self._origin = grid.origin
        self._shape = np.asarray(grid.shape, dtype=float)
        values = grid.values
        self.model = None
        self.core_radii = np.zeros(grid.n_atoms)
        self.valence_only = find_valence_only(grid) if grid.n_atoms else []
        self.core_electrons = np.zeros(grid.n_atoms, dtype=np.int64)
        z = grid.numbers
        cell = grid.cell if grid.periodic else None
        radii = np.full(grid.n_atoms, float(core_radius))
        if grid.n_atoms > 1:
            d = np.linalg.norm(grid.positions[:, None] - grid.positions[None], axis=-1)
            np.fill_diagonal(d, np.inf)
            nearest = d.min(axis=1)
        else:
            nearest = np.full(grid.n_atoms, np.inf)
        for a in self.valence_only:
            self.core_electrons[a.index] = a.missing_electrons
            radii[a.index] = valence_core_radius(a, float(nearest[a.index]),
                                                 max(float(core_radius), CORE_RADIUS))
        ecp = self.core_electrons > 0
        modelled = (z >= 1) & (z <= MAX_Z)
        heavy = (z > 2) & modelled
        if subtract_promolecule and grid.n_atoms:
            smooth = _smooth_light_nuclei(grid, (z >= 1) & (z <= 2) & ~ecp)
            model = LocalizedPromolecule(z, grid.positions, r_in=r_in, r_out=r_out,
                                         include=~smooth, cell=cell)
            if np.any(smooth):
                logger.info("promolecule not subtracted at %d H/He atom(s) whose density has "
                            "no cusp", int(smooth.sum()))
            if np.any(ecp):
                # the missing cores restored (spherical model cores), then the
                # whole free atoms subtracted as for all-electron atoms
                core = LocalizedPromolecule(z[ecp], grid.positions[ecp], r_in=r_in, r_out=r_out,
                                            electrons=self.core_electrons[ecp], cell=cell)
                values = values + core.on_grid(grid.origin, grid.axes, grid.shape)
            if len(model):
                values = values - model.on_grid(grid.origin, grid.axes, grid.shape)
                self.model = model
                values = _smooth_cores(values, grid, heavy, radii)
                self.core_radii = np.where(heavy, radii, 0.0)
        elif grid.n_atoms and (core_radius > 0 or np.any(ecp)):
            # the density itself: its cores are still far too steep for the
            # spline; a missing core is added back analytically as its model
            values = _smooth_cores(values, grid, heavy, radii)
            self.core_radii = np.where(heavy, radii, 0.0)
            if np.any(ecp):
                self.model = LocalizedPromolecule(z[ecp], grid.positions[ecp], r_in=r_in,
                                                  r_out=r_out,
                                                  electrons=self.core_electrons[ecp], cell=cell)
        self.spline = TricubicBSpline(values, periodic=grid.periodic, degree=degree)

    def fractional_index(self, points) -> np.ndarray:
        """Fractional grid indices of points (bohr), shape (N, 3)."""
        return (np.asarray(points, dtype=np.float64).reshape(-1, 3) - self._origin) @ self._inv

    def evaluate(self, points, order: int = 2) -> tuple:
        """Value and Cartesian derivatives at points (bohr).

        Parameters
        ----------
        points : (N, 3) array_like, bohr
        order : {0, 1, 2}

        Returns
        -------
        tuple
            ``(value,)``, ``(value, gradient)`` or ``(value, gradient, hessian)``.
        """
        if order not in (0, 1, 2):
            raise ValueError(f"order must be 0, 1 or 2, got {order!r}")
        pts = np.asarray(points, dtype=np.float64).reshape(-1, 3)
        u = (pts - self._origin) @ self._inv
        if self.grid.periodic:
            u = np.mod(u, self._shape)
            pts = self._origin + u @ self.grid.axes
        out = self.spline.evaluate(u, order)
        inv = self._inv
        result = [out[0]]
        if order >= 1:
            result.append(out[1] @ inv.T)
        if order >= 2:
            result.append(inv @ out[2] @ inv.T)
        if self.model is not None:
            extra = self.model.evaluate(pts, order)
            result = [a + b for a, b in zip(result, extra)]
        return tuple(result)


def _smooth_light_nuclei(grid, light, *, reach: float = 1.5, factor: float = 2.0):
    """Light atoms (H, He) whose sampled density has no nuclear cusp.

    A density from a Gaussian basis set is smooth at the nuclei.  There,
    subtracting the cusped free atom would *put* a cusp into the remainder
    (an inverted one), and the spline, which rounds it off, leaves a spike
    at the nucleus when the free atom is added back: 0.02 e/bohr^3 above
    the true density at an H nucleus of water at RHF/STO-3G, enough to make
    the nucleus a spurious maximum beside the real one.  H and He have no
    core that needs the subtraction, so for each light atom the roughness
    of the samples with and without its free atom subtracted is compared
    (the sum of squared fourth differences along the three axes, at the
    nodes within `reach` grid steps of the nucleus: what a cubic cannot
    follow), and the atom is left out of the model when subtracting makes
    the samples more than `factor` times rougher.  Measured ratios (with /
    without, water): 3.2-100 for RHF/STO-3G at 0.2-0.1 bohr, 4.7 for
    cc-pVDZ at 0.1 bohr, 1.4 for 6-31G* at 0.1 bohr and 0.1 at 0.15-0.2 bohr
    (its tight primitive looks like a cusp there), 0 for the free-atom model
    itself.  The factor keeps the subtraction where the two are close: at
    6-31G* and 0.1 bohr it gives the better ellipticity at the O-H bond CP.

    Returns
    -------
    (n,) bool array
    """
    from trackscan.promolecule import Promolecule

    out = np.zeros(grid.n_atoms, dtype=bool)
    inv = np.linalg.inv(grid.axes)
    shape = np.asarray(grid.shape)
    h = float(np.max(grid.spacing))
    half = (reach + 2.5) * h * np.linalg.norm(inv, axis=0)
    for i in np.nonzero(light)[0]:
        c = (grid.positions[i] - grid.origin) @ inv
        lo = np.floor(c - half).astype(np.int64)
        hi = np.ceil(c + half).astype(np.int64)
        if grid.periodic:
            ranges = [np.arange(a, b + 1) for a, b in zip(lo, hi)]
        else:
            ranges = [np.arange(max(a, 0), min(b, n - 1) + 1) for a, b, n in zip(lo, hi, shape)]
        if min(len(r) for r in ranges) < 5:
            continue
        rho = grid.values[np.ix_(*[np.mod(r, n) for r, n in zip(ranges, shape)])]
        nodes = np.stack(np.meshgrid(*ranges, indexing="ij"), -1).astype(np.float64)
        pts = grid.origin + nodes.reshape(-1, 3) @ grid.axes
        atom = Promolecule([int(grid.numbers[i])], [grid.positions[i]])
        rest = rho - atom.evaluate(pts, 0)[0].reshape(rho.shape)
        near = (np.linalg.norm(pts - grid.positions[i], axis=1) < reach * h).reshape(rho.shape)

        def roughness(y):
            total = 0.0
            for ax in range(3):
                inner = np.take(near, np.arange(2, near.shape[ax] - 2), axis=ax)
                total += float(np.sum(np.diff(y, 4, axis=ax)[inner] ** 2))
            return total

        out[i] = roughness(rest) > factor * roughness(rho)
    return out


_FILL_DIRECT_MAX = 2000
"""Largest core fill (unknown samples) solved directly; larger ones (the
cores of valence-only atoms) by conjugate gradients, which is 15 times
faster at 8000 unknowns (0.25 s against 3.9 s for Pd at 0.1 bohr) and
agrees to 2e-9 e/bohr^3 (rtol 1e-10), far below the printed digits of a cube."""

_FILL_RTOL = 1e-10


def _solve_large_fill(normal, rhs):
    """Conjugate gradients (Jacobi preconditioned) on the fill's normal equations."""
    from scipy import sparse
    from scipy.sparse.linalg import cg, spsolve

    x, info = cg(normal, rhs, rtol=_FILL_RTOL, maxiter=20 * normal.shape[0],
                 M=sparse.diags(1.0 / normal.diagonal()))
    if info != 0:
        logger.info("core fill: conjugate gradients did not converge; solving directly")
        x = spsolve(normal, rhs)
    return x


def _smooth_cores(values, grid, heavy, radius):
    """Replace the samples inside core spheres by the smoothest continuation of the rest.

    The samples within `radius` (bohr; one number, or one per atom) of each
    nucleus in `heavy` become the values
    that minimise the sum of squared discrete Laplacians (7-point stencil)
    over the surrounding block, the others held fixed: a discrete
    biharmonic fill [1]_, which meets the outside samples with matching
    value and slope.  It replaced a quadratic least-squares fit to a shell
    of samples, whose mismatch at the sphere made the spline ring: at the
    C-O bond CP of CO2, 0.77 bohr from C, the ellipticity (0 by symmetry)
    came out 0.12 at 0.15 bohr spacing (RHF/6-31G), now 0.02.

    References
    ----------
    .. [1] D. T. Sandwell, "Biharmonic spline interpolation of GEOS-3 and
       SEASAT altimeter data", Geophys. Res. Lett. 14, 139 (1987).
       :DOI:`10.1029/GL014i002p00139`
    """
    from scipy.sparse.linalg import spsolve

    radii = np.broadcast_to(np.asarray(radius, dtype=np.float64), (grid.n_atoms,))
    heavy = np.asarray(heavy, dtype=bool) & (radii > 0)
    if not np.any(heavy):
        return values
    values = np.array(values, dtype=np.float64)
    inv = np.linalg.inv(grid.axes)
    shape = np.asarray(grid.shape)
    laplacians = {}
    for pos, radius in zip(grid.positions[heavy], radii[heavy]):
        half = radius * np.linalg.norm(inv, axis=0) + 3.0
        c = (pos - grid.origin) @ inv
        lo = np.floor(c - half).astype(np.int64)
        hi = np.ceil(c + half).astype(np.int64)
        if not grid.periodic:
            lo, hi = np.maximum(lo, 0), np.minimum(hi, shape - 1)
        ranges = [np.arange(a, b + 1) for a, b in zip(lo, hi)]
        dims = tuple(len(r) for r in ranges)
        if min(dims) < 3:
            continue
        block = np.ix_(*[np.mod(r, n) for r, n in zip(ranges, shape)])
        y = values[block].reshape(-1)
        nodes = np.stack(np.meshgrid(*ranges, indexing="ij"), -1).reshape(-1, 3)
        d = grid.origin + nodes.astype(np.float64) @ grid.axes - pos
        inner = np.linalg.norm(d, axis=1) < radius
        if not np.any(inner):
            continue
        if dims not in laplacians:      # blocks of the same size share it
            laplacians[dims] = _block_laplacian(dims)
        lap = laplacians[dims]
        lu, lk = lap[:, inner], lap[:, ~inner]
        normal = (lu.T @ lu).tocsc()
        rhs = -(lu.T @ (lk @ y[~inner]))
        if normal.shape[0] <= _FILL_DIRECT_MAX:
            y[inner] = spsolve(normal, rhs)
        else:
            y[inner] = _solve_large_fill(normal, rhs)
        values[block] = y.reshape(dims)
    return values


def _block_laplacian(dims):
    """The 7-point Laplacian of the interior nodes of a block (sparse, rows: interior nodes)."""
    from scipy import sparse

    size = dims[0] * dims[1] * dims[2]
    flat = np.arange(size).reshape(dims)
    centre = flat[1:-1, 1:-1, 1:-1].ravel()
    m = len(centre)
    nbrs = [flat[2:, 1:-1, 1:-1], flat[:-2, 1:-1, 1:-1], flat[1:-1, 2:, 1:-1],
            flat[1:-1, :-2, 1:-1], flat[1:-1, 1:-1, 2:], flat[1:-1, 1:-1, :-2]]
    return sparse.csr_matrix(
        (np.concatenate([np.full(m, -6.0), np.ones(6 * m)]),
         (np.tile(np.arange(m), 7), np.concatenate([centre] + [b.ravel() for b in nbrs]))),
        shape=(m, size))
