"""The built-in promolecular density: a sum of spherical free-atom densities.

Each atom H–Ar is a set of Slater-type orbitals with the screening constants
of Clementi & Raimondi [1]_ (``zeta = Z_eff / n``), occupied in aufbau order
(1s, 2s, 2p, 3s, 3p) and averaged over the sphere.  Each atom K–Rn (Z =
19-86) has one Slater-type orbital per occupied subshell of its ground-state
configuration, with the exponent and effective quantum number ``n*`` of
Slater's rules [2]_ (:mod:`trackscan.slater`).  So

.. math::

    \\rho_A(r) = \\sum_{nl} N_{nl} \\frac{(2\\zeta_{nl})^{2n^*+1}}{4\\pi \\Gamma(2n^*+1)}
                 r^{2n^*-2} e^{-2\\zeta_{nl} r}

(``n* = n`` for Clementi & Raimondi).  Each term integrates to its
occupation ``N_nl``, so an atom integrates to ``Z`` exactly.  Measured
against PySCF's spherically averaged atomic Hartree-Fock densities
(``benchmarks/free_atoms.py``) the Slater atoms are rougher than the
Clementi-Raimondi ones, chiefly in the shell structure between the core
shells; that is why :class:`trackscan.fields.GridField` smooths the
remainder inside each core rather than trusting the model there.  Value, gradient and Hessian are analytic, so the model
implements :class:`trackscan.field.Field` and topology runs on it without a
grid.  It is a *model*: every output made from it says so through
:attr:`Promolecule.label`.

References
----------
.. [1] E. Clementi and D. L. Raimondi, "Atomic screening constants from SCF
   functions", J. Chem. Phys. 38, 2686 (1963). :DOI:`10.1063/1.1733573`
.. [2] J. C. Slater, "Atomic shielding constants", Phys. Rev. 36, 57 (1930).
   :DOI:`10.1103/PhysRev.36.57`
"""

from __future__ import annotations

import math

import numpy as np

from trackscan.grid import DensityGrid
from trackscan.field import FieldBase
from trackscan.slater import MAX_Z, slater_shells

__all__ = ["Promolecule", "CLEMENTI_RAIMONDI", "atom_terms", "core_terms", "MODEL_LABEL",
           "MAX_Z", "model_label", "promolecule_grid", "grid_box"]

MODEL_LABEL = "promolecular model (Clementi-Raimondi STO free atoms)"
"""Label carried by every output made from the built-in model."""

HEAVY_LABEL = MODEL_LABEL + " with Slater-rule STO atoms beyond Ar"
"""Label of a model with atoms beyond Ar (starts with :data:`MODEL_LABEL`)."""


def model_label(numbers) -> str:
    """:data:`MODEL_LABEL`, or :data:`HEAVY_LABEL` when an atom is beyond Ar."""
    return HEAVY_LABEL if any(int(z) > 18 for z in numbers) else MODEL_LABEL

#: Clementi & Raimondi (1963) effective nuclear charges Z_eff, in the order
#: 1s, 2s, 2p, 3s, 3p (as tabulated in ../shared/METHODS.md section 5).
CLEMENTI_RAIMONDI = {
    1: (1.0000,),
    2: (1.6875,),
    3: (2.6906, 1.2792),
    4: (3.6848, 1.9120),
    5: (4.6795, 2.5762, 2.4214),
    6: (5.6727, 3.2166, 3.1358),
    7: (6.6651, 3.8474, 3.8340),
    8: (7.6579, 4.4916, 4.4532),
    9: (8.6501, 5.1276, 5.1000),
    10: (9.6421, 5.7584, 5.7584),
    11: (10.6259, 6.5714, 6.8018, 2.5074),
    12: (11.6089, 7.3920, 7.8258, 3.3075),
    13: (12.5910, 8.2136, 8.9634, 4.1172, 4.0656),
    14: (13.5745, 9.0200, 9.9450, 4.9032, 4.2852),
    15: (14.5578, 9.8250, 10.9612, 5.6418, 4.8864),
    16: (15.5409, 10.6288, 11.9770, 6.3669, 5.4819),
    17: (16.5239, 11.4304, 12.9932, 7.0683, 6.1161),
    18: (17.5075, 12.2304, 14.0082, 7.7568, 6.7641),
}

# (principal quantum number n, capacity) of the shells 1s, 2s, 2p, 3s, 3p.
_SHELLS = ((1, 2), (2, 2), (2, 6), (3, 2), (3, 6))

# Below this distance (bohr) from a nucleus the direction of the gradient is
# undefined (the cusp); see Promolecule.evaluate.
_R_FLOOR = 1e-8

_CHUNK = 65536


def atom_shells(z: int) -> list:
    """Occupied shells of the free atom `z`, innermost first.

    Returns
    -------
    list of (electrons, n_star, zeta)
        Clementi & Raimondi (1s, 2s, 2p, 3s, 3p) for H-Ar, Slater's rules
        (:func:`trackscan.slater.slater_shells`) for K-Rn.

    Raises
    ------
    ValueError
        If `z` is outside H-Rn.
    """
    z = int(z)
    if z in CLEMENTI_RAIMONDI:
        left = z
        out = []
        for (n, cap), zeff in zip(_SHELLS, CLEMENTI_RAIMONDI[z]):
            occ = min(cap, left)
            left -= occ
            if occ == 0:
                break
            out.append((occ, n, zeff / n))
        assert left == 0
        return out
    if not 1 <= z <= MAX_Z:
        raise ValueError(f"the promolecular model covers H-Rn (Z = 1-{MAX_Z}), got Z = {z}")
    return [(occ, n_star, zeta) for n, l, occ, zeta, n_star in slater_shells(z)]


def _terms(shells):
    terms = []
    for occ, n, zeta in shells:
        a = 2.0 * zeta
        if float(n).is_integer():
            n = int(n)
            norm = math.factorial(2 * n)
        else:
            norm = math.gamma(2.0 * n + 1.0)
        c = occ * a ** (2 * n + 1) / (4.0 * math.pi * norm)
        terms.append((c, 2 * n - 2, a))
    return terms


def atom_terms(z: int):
    """Radial terms ``c * r**m * exp(-a*r)`` of the spherical atom `z`.

    Parameters
    ----------
    z : int
        Atomic number, 1 to 86.

    Returns
    -------
    list of (c, m, a)
        Coefficient (e/bohr^(3+m)), power ``m = 2n* - 2`` and decay ``a = 2 zeta``
        (1/bohr) of each occupied shell.

    Raises
    ------
    ValueError
        If `z` is outside H-Rn.
    """
    return _terms(atom_shells(z))


def core_terms(z: int, electrons: int):
    """Radial terms of the innermost `electrons` electrons of the free atom `z`.

    The model core of an atom whose density was computed with an effective
    core potential: the shells are taken innermost first (Slater's group
    order), the last one partly if `electrons` ends inside it.

    Parameters
    ----------
    z : int
    electrons : int
        Core electrons, 0 to ``z``.

    Returns
    -------
    list of (c, m, a), as :func:`atom_terms`
    """
    left = int(electrons)
    if not 0 <= left <= int(z):
        raise ValueError(f"core electrons must be 0 to Z = {z}, got {electrons}")
    shells = []
    for occ, n, zeta in atom_shells(z):
        if left <= 0:
            break
        shells.append((min(occ, left), n, zeta))
        left -= occ
    return _terms(shells)


def _radial(terms, r, order):
    """f, f', f'/r and f'' of a sum of radial terms at distances r (> 0 for 1/r).

    f'' is None below order 2.
    """
    f = np.zeros_like(r)
    if order == 0:
        for c, m, a in terms:
            e = c * np.exp(-a * r)
            f += e * r ** m if m else e
        return f, None, None, None
    second = order >= 2
    d1_over_r = np.zeros_like(r)
    d2 = np.zeros_like(r) if second else None
    rs = np.maximum(r, _R_FLOOR)
    for c, m, a in terms:
        e = c * np.exp(-a * r)
        if m == 0:
            f += e
            d1_over_r -= a * e / rs
            if second:
                d2 += a * a * e
        else:
            rm2 = r ** (m - 2) if m > 2 else 1.0
            rm1 = rm2 * r
            rm = rm1 * r
            f += e * rm
            d1_over_r += e * (m * rm2 - a * rm1)
            if second:
                d2 += e * (m * (m - 1) * rm2 - 2.0 * a * m * rm1 + a * a * rm)
    d1 = d1_over_r * r
    return f, d1, d1_over_r, d2


class Promolecule(FieldBase):
    """Sum of free-atom densities (Clementi–Raimondi, Slater); a :class:`~trackscan.field.Field`.

    Parameters
    ----------
    numbers : (n,) array_like of int
        Atomic numbers, 1 to 86.
    positions : (n, 3) array_like, bohr
        Nuclear positions.

    Attributes
    ----------
    label : str
        ``"promolecular model (Clementi-Raimondi STO free atoms)"`` (with
        " with Slater-rule STO atoms beyond Ar" when there are such atoms);
        put it in every output that uses the model.
    numbers, positions : numpy arrays (read-only)

    Notes
    -----
    Cost is O(N * n_atoms) per call; points are processed in chunks of
    65536 to bound memory.  At a nucleus (within 1e-8 bohr) the density has
    a cusp: there the gradient is returned as zero and the Hessian as the
    isotropic limit ``f'(r0)/r0 * I`` at ``r0 = 1e-8`` bohr (large, negative
    and finite), which marks the nucleus as a maximum.

    References
    ----------
    .. [1] E. Clementi and D. L. Raimondi, J. Chem. Phys. 38, 2686 (1963).
       :DOI:`10.1063/1.1733573`
    .. [2] J. C. Slater, Phys. Rev. 36, 57 (1930). :DOI:`10.1103/PhysRev.36.57`

    Examples
    --------
    >>> import numpy as np
    >>> h2 = Promolecule([1, 1], [[0, 0, -0.7], [0, 0, 0.7]])
    >>> round(float(h2.value(np.zeros((1, 3)))[0]), 5)
    0.15699
    """

    label = MODEL_LABEL

    def __init__(self, numbers, positions):
        numbers = np.array(numbers, dtype=np.int64).reshape(-1)
        positions = np.array(positions, dtype=np.float64)
        if positions.shape != (len(numbers), 3):
            raise ValueError(f"positions has shape {positions.shape}, expected ({len(numbers)}, 3)")
        if not np.all(np.isfinite(positions)):
            raise ValueError("positions must be finite")
        self._terms = [atom_terms(z) for z in numbers]
        numbers.setflags(write=False)
        positions.setflags(write=False)
        self.label = model_label(numbers)
        self.numbers = numbers
        self.positions = positions

    @classmethod
    def from_grid(cls, grid: DensityGrid) -> "Promolecule":
        """The promolecule of the atoms of a :class:`~trackscan.grid.DensityGrid`."""
        return cls(grid.numbers, grid.positions)

    def __repr__(self) -> str:
        return f"Promolecule({len(self.numbers)} atoms)"

    # -- Field protocol --------------------------------------------------

    def evaluate(self, points, order: int = 2) -> tuple:
        """Value and derivatives in one pass.

        Parameters
        ----------
        points : (N, 3) array_like, bohr
        order : {0, 1, 2}
            Highest derivative wanted.

        Returns
        -------
        tuple
            ``(value,)``, ``(value, gradient)`` or ``(value, gradient, hessian)``
            with shapes (N,), (N, 3), (N, 3, 3).
        """
        if order not in (0, 1, 2):
            raise ValueError(f"order must be 0, 1 or 2, got {order!r}")
        pts = np.asarray(points, dtype=np.float64)
        if pts.ndim == 1 and pts.shape == (3,):
            pts = pts[None, :]
        if pts.ndim != 2 or pts.shape[1] != 3:
            raise ValueError(f"points must have shape (N, 3), got {pts.shape}")
        n = len(pts)
        val = np.zeros(n)
        grad = np.zeros((n, 3)) if order >= 1 else None
        hess = np.zeros((n, 3, 3)) if order >= 2 else None
        for lo in range(0, n, _CHUNK):
            hi = min(n, lo + _CHUNK)
            self._accumulate(pts[lo:hi], order, val[lo:hi],
                             None if grad is None else grad[lo:hi],
                             None if hess is None else hess[lo:hi])
        return (val, grad, hess)[: order + 1]

    def _accumulate(self, pts, order, val, grad, hess):
        eye = np.eye(3)
        for pos, terms in zip(self.positions, self._terms):
            d = pts - pos
            r = np.sqrt(np.einsum("ij,ij->i", d, d))
            f, d1, d1r, d2 = _radial(terms, r, order)
            val += f
            if order == 0:
                continue
            # grad = f'(r) d / r = (f'/r) d; zero at the nucleus (the cusp)
            near = r < _R_FLOOR
            grad += np.where(near, 0.0, d1r)[:, None] * d
            if order == 1:
                continue
            r2 = np.where(near, 1.0, r * r)
            coef = np.where(near, 0.0, (d2 - d1r) / r2)
            hess += d1r[:, None, None] * eye + coef[:, None, None] * d[:, :, None] * d[:, None, :]


def grid_box(positions, *, spacing: float = 0.15, margin: float = 4.0):
    """Origin, axes and shape of an axis-aligned box around atoms.

    Parameters
    ----------
    positions : (n, 3) array_like, bohr
    spacing : float
        Grid step (bohr), the same along x, y and z.
    margin : float
        Distance (bohr) from the outermost atoms to the box faces (at least).

    Returns
    -------
    origin : (3,) ndarray
    axes : (3, 3) ndarray
    shape : tuple of int
    """
    if not spacing > 0 or not math.isfinite(spacing):
        raise ValueError(f"spacing must be a positive number of bohr, got {spacing!r}")
    if not margin >= 0 or not math.isfinite(margin):
        raise ValueError(f"margin must be >= 0 bohr, got {margin!r}")
    pos = np.asarray(positions, dtype=np.float64).reshape(-1, 3)
    lo = pos.min(axis=0) - margin
    hi = pos.max(axis=0) + margin
    shape = np.ceil((hi - lo) / spacing - 1e-9).astype(int) + 1
    # centre the box on the atoms so the layout does not depend on rounding
    origin = 0.5 * (lo + hi) - 0.5 * (shape - 1) * spacing
    return origin, np.eye(3) * spacing, tuple(int(s) for s in shape)


def sample_field(field, origin, axes, shape, *, chunk: int = 262144) -> np.ndarray:
    """Values of a field on the points of a regular grid, computed in chunks.

    Parameters
    ----------
    field : Field
    origin : (3,) array_like, bohr
    axes : (3, 3) array_like, bohr
    shape : tuple of 3 int
    chunk : int
        Points per call to ``field.evaluate`` (bounds memory).

    Returns
    -------
    (nx, ny, nz) ndarray
    """
    origin = np.asarray(origin, dtype=np.float64)
    axes = np.asarray(axes, dtype=np.float64)
    nx, ny, nz = shape
    out = np.empty(nx * ny * nz)
    # the (j, k) plane is reused for every i
    j, k = np.meshgrid(np.arange(ny), np.arange(nz), indexing="ij")
    plane = j.reshape(-1, 1) * axes[1] + k.reshape(-1, 1) * axes[2]
    per = ny * nz
    rows = max(1, chunk // per)
    for i0 in range(0, nx, rows):
        i1 = min(nx, i0 + rows)
        ii = np.arange(i0, i1)
        pts = (origin + ii[:, None, None] * axes[0] + plane[None, :, :]).reshape(-1, 3)
        out[i0 * per: i1 * per] = field.evaluate(pts, order=0)[0]
    return out.reshape(nx, ny, nz)


def promolecule_grid(numbers, positions, *, spacing: float = 0.15, margin: float = 4.0,
                     source: str | None = None) -> DensityGrid:
    """Sample the promolecular density on a box around the atoms.

    Parameters
    ----------
    numbers : (n,) array_like of int
    positions : (n, 3) array_like, bohr
    spacing : float
        Grid step (bohr).
    margin : float
        Space (bohr) between the atoms and the box faces.
    source : str, optional
        Recorded as the grid's source.

    Returns
    -------
    DensityGrid
        Its first comment line is the model's label (:func:`model_label`).
    """
    model = Promolecule(numbers, positions)
    origin, axes, shape = grid_box(model.positions, spacing=spacing, margin=margin)
    values = sample_field(model, origin, axes, shape)
    return DensityGrid(values, origin, axes, model.numbers, model.numbers.astype(float),
                       model.positions, source=source,
                       comments=(model.label, f"trackscan promolecule, spacing {spacing:g} bohr"))
