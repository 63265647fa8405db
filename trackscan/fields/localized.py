"""A promolecule confined to spheres around the nuclei, for spline subtraction.

Interpolating a density with cubic splines fails near nuclei: the cusp and
the steep core shells ring through the whole neighbourhood.  The remedy
(../shared/METHODS.md section 1) is to subtract an analytic promolecule on
the grid, spline only the smooth remainder and add the promolecule's exact
derivatives back.  Only the part of each free atom near its nucleus needs
removing, so each atomic density of :class:`trackscan.promolecule.Promolecule`
is multiplied here by a switching function that is 1 inside ``r_in`` and 0
beyond ``r_out``; the smooth valence tails stay in the spline.  This makes the
cost per atom a small sphere instead of the whole grid.

The switch ``s(x) = 1 - (35x^4 - 84x^5 + 70x^6 - 20x^7)`` with
``x = (r - r_in) / (r_out - r_in)`` has three continuous derivatives at both
ends (the order-3 "smoothstep" polynomial), so the model keeps a continuous
Hessian everywhere except at the nuclei themselves.
"""

from __future__ import annotations

import itertools

import numpy as np

from trackscan.promolecule import _R_FLOOR, MAX_Z, atom_terms, core_terms
from trackscan.promolecule import _radial as _atom_radial
from trackscan.field import FieldBase

__all__ = ["LocalizedPromolecule", "R_INNER", "R_OUTER"]

R_INNER = 2.0
"""Radius (bohr) inside which each free atom is kept whole (default)."""

R_OUTER = 4.0
"""Radius (bohr) beyond which each free atom is dropped (default)."""

SOFTEN = 0.0
"""Cusp-rounding length (bohr) of the subtracted free atoms (default)."""

# Grid values (on_grid) come from a radial table with this step (bohr),
# linearly interpolated, except within _EXACT_RADIUS of the nucleus where the
# cusp makes the table inaccurate; the table error elsewhere is below 1e-8.
_TABLE_STEP = 1e-4
_EXACT_RADIUS = 0.5


def _switch(r, r_in, r_out, order: int = 2):
    """s, s' and s'' of the switching function at distances r (None above `order`)."""
    w = r_out - r_in
    x = np.clip((r - r_in) / w, 0.0, 1.0)
    x2 = x * x
    s = 1.0 - x2 * x2 * (35.0 - 84.0 * x + 70.0 * x2 - 20.0 * x2 * x)
    if order == 0:
        return s, None, None
    om = 1.0 - x
    ds = -140.0 * (x2 * x) * (om * om * om) / w
    if order == 1:
        return s, ds, None
    dds = -420.0 * x2 * (om * om) * (1.0 - 2.0 * x) / (w * w)
    return s, ds, dds


_SLAB = 1 << 14
"""Points per slab in :func:`_table_values` (small enough to stay in cache)."""


def _table_values(table, r, step, last):
    """Linear interpolation of a radial table (spacing `step`) at distances `r`.

    ``t = min(r / step, last + 0.999999)``, ``k = floor(t)``, value
    ``table[k] + (t - k) (table[k + 1] - table[k])``; computed in slabs along
    the first axis of `r`, in place within each, so that the temporaries
    stay in cache (the blocks are large and this runs once per atom).
    """
    f = np.empty_like(r)
    rows = max(1, _SLAB // max(1, r[0].size))
    upper = table[1:]
    for a in range(0, len(r), rows):
        t = np.multiply(r[a:a + rows], 1.0 / step)
        np.minimum(t, last + 0.999999, out=t)
        k = t.astype(np.int64)
        fa = f[a:a + rows]
        np.take(table, k, out=fa)
        up = np.take(upper, k)
        up -= fa
        t -= k
        up *= t
        fa += up
    return f


def _sum_pairs(sel, contrib, n):
    """Per-point sums of pair contributions (P, C): shape (n * C,), in pair order."""
    c = contrib.shape[1]
    idx = (sel[:, None] * c + np.arange(c)).ravel()
    return np.bincount(idx, weights=contrib.ravel(), minlength=n * c)


class LocalizedPromolecule(FieldBase):
    """Free-atom densities switched off smoothly between `r_in` and `r_out`.

    Implements :class:`trackscan.field.Field`.

    Parameters
    ----------
    numbers : (n,) array_like of int
        Atomic numbers; atoms outside H-Rn (or with ``include`` False) are
        left out.
    positions : (n, 3) array_like, bohr
    r_in, r_out : float, bohr
        Switching radii, ``0 <= r_in < r_out``.
    soften : float, bohr
        Each free atom is evaluated at ``sqrt(r^2 + soften^2)`` instead of
        ``r``: this rounds off the nuclear cusp within about ``2 * soften``
        and leaves the density unchanged beyond.  Densities from Gaussian
        basis sets have no cusp, so subtracting a cusped model would put a
        kink into the remainder that the spline rings on.
    include : (n,) array_like of bool, optional
        Which atoms to model (e.g. not those with an effective core).
    cell : (3, 3) array_like, optional
        Periodic cell vectors (rows); periodic images within `r_out` of the
        cell are then included.
    electrons : (n,) array_like of int, optional
        Per atom, how many of its innermost electrons are modelled (default
        all ``Z``): the model core of an atom whose density was computed
        with an effective core potential (:func:`~trackscan.promolecule.core_terms`).

    Notes
    -----
    The free atoms are those of :class:`~trackscan.promolecule.Promolecule`
    (Clementi & Raimondi 1963 Slater-type orbitals for H-Ar, Slater's rules
    1930 beyond).
    """

    def __init__(self, numbers, positions, *, r_in: float = R_INNER, r_out: float = R_OUTER,
                 soften: float = SOFTEN, include=None, cell=None, electrons=None):
        if not 0 <= r_in < r_out:
            raise ValueError(f"need 0 <= r_in < r_out, got {r_in}, {r_out}")
        numbers = np.asarray(numbers, dtype=np.int64).reshape(-1)
        positions = np.asarray(positions, dtype=np.float64).reshape(-1, 3)
        electrons = numbers.copy() if electrons is None else \
            np.asarray(electrons, dtype=np.int64).reshape(-1)
        keep = np.array([1 <= z <= MAX_Z for z in numbers], dtype=bool) & (electrons > 0)
        if include is not None:
            keep &= np.asarray(include, dtype=bool)
        numbers, positions, electrons = numbers[keep], positions[keep], electrons[keep]
        if cell is not None and len(numbers):
            cell = np.asarray(cell, dtype=np.float64)
            inv = np.linalg.inv(cell)
            pad = r_out * np.linalg.norm(inv, axis=0)  # fractional margin per axis
            imgs_z, imgs_p, imgs_e = [], [], []
            for shift in itertools.product((-1, 0, 1), repeat=3):
                p = positions + np.asarray(shift, dtype=float) @ cell
                f = p @ inv
                ok = np.all((f > -pad) & (f < 1 + pad), axis=1)
                imgs_z.append(numbers[ok])
                imgs_p.append(p[ok])
                imgs_e.append(electrons[ok])
            numbers, positions = np.concatenate(imgs_z), np.concatenate(imgs_p)
            electrons = np.concatenate(imgs_e)
        self.numbers = numbers
        self.positions = positions
        self.soften = float(soften)
        self.r_in = float(r_in)
        self.r_out = float(r_out)
        self.electrons = electrons
        # a species is (Z, modelled electrons): the whole atom, or its core
        self._species = [(int(z), int(e)) for z, e in zip(numbers, electrons)]
        self._groups = sorted(set(self._species))               # species present
        index = {s: i for i, s in enumerate(self._groups)}
        self._code = np.array([index[s] for s in self._species], dtype=np.int64)
        # atoms about their centroid, for the cheap first pass of _near_pairs
        self._centre = positions.mean(axis=0) if len(positions) else np.zeros(3)
        centred = positions - self._centre
        sq = np.einsum("ij,ij->i", centred, centred)
        self._centred_t = np.ascontiguousarray(centred.T)           # (3, n)
        self._half_sq = -0.5 * sq                                   # -|a|^2 / 2
        self._reach_sq = float(sq.max()) if len(sq) else 0.0
        self._table_r = np.linspace(0.0, self.r_out, int(np.ceil(self.r_out / _TABLE_STEP)) + 1)
        self._tables = {}
        self._terms = {}
        self.max_value = sum(sum(c for c, m, a in self._terms_of(s) if m == 0)
                             for s in self._species)

    def _table(self, z):
        """Switched radial density of species z on the fine table of radii."""
        if z not in self._tables:
            self._tables[z] = self._switched(self._table_r, 0.0, 0, z=z)[0]
        return self._tables[z]

    def __len__(self):
        return len(self._species)

    def evaluate(self, points, order: int = 2) -> tuple:
        """Value and derivatives at points; see :class:`trackscan.field.Field`.

        All atoms are handled in one pass: the (point, atom) pairs within
        ``r_out`` are listed point by point, in atom order for each point, the
        radial functions are computed per element for all its pairs at once,
        and the contributions are summed per point in atom order (so the sums equal those of a loop
        over the atoms, bit for bit).  Calls with few points (path steps,
        Newton iterations) then cost a fixed number of array operations
        instead of some per atom.
        """
        pts = np.asarray(points, dtype=np.float64).reshape(-1, 3)
        n = len(pts)
        val = np.zeros(n)
        grad = np.zeros((n, 3)) if order >= 1 else None
        hess = np.zeros((n, 3, 3)) if order >= 2 else None
        if n == 0 or len(self._species) == 0:
            return (val, grad, hess)[: order + 1]
        atom, sel, d, r2 = self._near_pairs(pts)
        if len(sel) == 0:
            return (val, grad, hess)[: order + 1]
        r = np.sqrt(r2)
        m = len(sel)
        f, _, d1_over, d2 = self._switched(r, self.positions[atom, 0], order,
                                           codes=self._code[atom])
        val += np.bincount(sel, weights=f, minlength=n)
        if order == 0:
            return (val,)
        # one bincount over (point, component): each component's sum keeps atom order
        grad += _sum_pairs(sel, d1_over[:, None] * d, n).reshape(n, 3)
        if order == 1:
            return val, grad
        safe = np.maximum(r, 1e-12)
        e = d / safe[:, None]
        ee = e[:, :, None] * e[:, None, :]
        contrib = (d2[:, None, None] * ee + d1_over[:, None, None] * (np.eye(3) - ee))
        hess += _sum_pairs(sel, contrib.reshape(m, 9), n).reshape(n, 3, 3)
        return val, grad, hess

    def _near_pairs(self, pts):
        """The (atom, point) pairs closer than ``r_out``, point by point.

        Returns
        -------
        atom, sel : (P,) int arrays
            Atom and point index of each pair, sorted by point, then atom
            (the order in which each point's sums run over the atoms).
        d : (P, 3) float array
            ``pts[sel] - positions[atom]``.
        r2 : (P,) float array
            Squared lengths of `d`.

        Notes
        -----
        A first pass tests ``|p - a|^2 < r_out^2`` as ``a.p - |a|^2 / 2 >
        (|p|^2 - r_out^2) / 2`` (coordinates about the atoms' centroid), the
        left side from one matrix product, with a margin far above its
        rounding error; the pairs it keeps get their differences and squared
        lengths computed directly, which decide.  The result is the pairs,
        and the numbers, of testing every difference directly, at a fraction
        of the cost when each point has only a few atoms within ``r_out``.
        """
        c = pts - self._centre
        c2 = np.einsum("ij,ij->i", c, c)
        cut2 = self.r_out * self.r_out
        slack = 1e-9 * (self._reach_sq + float(c2.max()) + cut2)
        lhs = c @ self._centred_t
        lhs += self._half_sq
        sel, atom = np.divmod(np.flatnonzero(lhs > 0.5 * (c2 - cut2 - slack)[:, None]),
                              len(self._half_sq))
        d = np.take(pts, sel, axis=0)
        d -= np.take(self.positions, atom, axis=0)
        r2 = np.einsum("ij,ij->i", d, d)
        keep = r2 < cut2
        if keep.all():      # the usual case: the margin rarely admits a pair
            return atom, sel, d, r2
        return atom[keep], sel[keep], d[keep], r2[keep]

    def _switched(self, r, x0, order, *, codes=None, z=None):
        """F, F' and F'/r, F'' of the softened, switched atoms at distances r.

        Parameters
        ----------
        r : (P,) float array
            Distances from the atoms.
        x0 : (P,) float array or float
            x coordinates of the atoms.
        order : {0, 1, 2}
        codes : (P,) int array, optional
            Element of each distance (index into the elements present).
        z : (int, int), optional
            The one species (Z, electrons) of all distances (instead of `codes`).

        Notes
        -----
        The free atom is evaluated at ``(x0 + rs, y, z)`` for an atom at
        ``(x0, y, z)`` -- the rounding of ``(x0 + rs) - x0`` is kept, so the
        numbers equal those of ``Promolecule([z], [p]).evaluate`` along x --
        from its radial terms, without building 3 x 3 Hessians.
        """
        a = self.soften
        rs = np.sqrt(r * r + a * a)
        dx = (rs + x0) - x0
        rr = np.sqrt(dx * dx)
        f, d1r, d2 = self._free(rr, order, codes, z)
        s, ds, dds = _switch(r, self.r_in, self.r_out, order)
        if order == 0:
            return s * f, None, None, None
        near = rr < _R_FLOOR
        f1 = np.where(near, 0.0, d1r) * dx                  # f'(rs)
        f1_over = f1 / np.maximum(rs, 1e-300)               # f'(rs) / rs
        g1 = f1_over * r                                    # d f(rs(r)) / dr
        big = s * f
        d1 = s * g1 + ds * f
        d1_over = s * f1_over + np.where(r > 1e-12, ds / np.maximum(r, 1e-300), 0.0) * f
        if order == 1:
            return big, d1, d1_over, None
        coef = np.where(near, 0.0, (d2 - d1r) / np.where(near, 1.0, rr * rr))
        f2 = d1r * 1.0 + coef * dx * dx                     # f''(rs)
        g2 = f2 * (r / rs) ** 2 + f1 * a * a / rs ** 3
        d2 = s * g2 + 2.0 * ds * g1 + dds * f
        return big, d1, d1_over, d2

    def _free(self, rr, order, codes, z):
        """f, f'/r and f'' of the free atoms (per element) at distances rr."""
        if z is None and len(self._groups) == 1:
            z = self._groups[0]
        if z is not None:
            f, _, d1r, d2 = _atom_radial(self._terms_of(z), rr, order)
            return f, d1r, d2
        f = np.empty(len(rr))
        d1r = np.empty(len(rr)) if order >= 1 else None
        d2 = np.empty(len(rr)) if order >= 2 else None
        for c, zc in enumerate(self._groups):
            k = np.flatnonzero(codes == c)
            if len(k) == 0:
                continue
            out = _atom_radial(self._terms_of(zc), rr[k], order)
            f[k] = out[0]
            if order >= 1:
                d1r[k] = out[2]
            if order >= 2:
                d2[k] = out[3]
        return f, d1r, d2

    def _terms_of(self, species):
        """Radial terms of a species (Z, electrons): the free atom or its core."""
        if species not in self._terms:
            z, e = species
            self._terms[species] = atom_terms(z) if e >= z else core_terms(z, e)
        return self._terms[species]

    def on_grid(self, origin, axes, shape) -> np.ndarray:
        """Values at every point of a regular grid, touching only the spheres.

        Parameters
        ----------
        origin : (3,) array_like, bohr
        axes : (3, 3) array_like, bohr (rows are step vectors)
        shape : tuple of 3 int

        Returns
        -------
        (nx, ny, nz) float array

        Notes
        -----
        Away from the nuclei the values come from a fine radial table
        (linear interpolation, error below 1e-8 e/bohr^3); within 0.5 bohr
        of a nucleus they are computed exactly.  For a periodic grid build
        the model with ``cell``: the periodic images then supply the
        contributions across the cell faces.
        """
        origin = np.asarray(origin, dtype=np.float64)
        axes = np.asarray(axes, dtype=np.float64)
        shape = np.asarray(shape, dtype=np.int64)
        out = np.zeros(tuple(shape))
        inv = np.linalg.inv(axes)
        half = self.r_out * np.linalg.norm(inv, axis=0)  # index half-widths
        near_half = _EXACT_RADIUS * np.linalg.norm(inv, axis=0) + 1.0
        step = self._table_r[1]
        last = len(self._table_r) - 2
        orthogonal = bool(np.all(axes[~np.eye(3, dtype=bool)] == 0.0))
        for species, pos in zip(self._species, self.positions):
            c = (pos - origin) @ inv
            lo = np.maximum(np.floor(c - half).astype(np.int64), 0)
            hi = np.minimum(np.ceil(c + half).astype(np.int64), shape - 1)
            if np.any(hi < lo):
                continue
            ranges = [np.arange(a, b + 1, dtype=np.float64) for a, b in zip(lo, hi)]
            rel = origin - pos
            if orthogonal:
                # each component depends on one index: the same sums, made on
                # the axes and broadcast once
                sq = [(ranges[c] * axes[c, c] + rel[c]) ** 2 for c in range(3)]
                r2 = (sq[0][:, None, None] + sq[1][None, :, None]) + sq[2][None, None, :]
            else:
                r2 = None
                for comp in range(3):
                    dc = (ranges[0][:, None, None] * axes[0, comp]
                          + (ranges[1][None, :, None] * axes[1, comp]
                             + (ranges[2][None, None, :] * axes[2, comp] + rel[comp])))
                    r2 = dc * dc if r2 is None else r2 + dc * dc
            r = np.sqrt(r2, out=r2)
            f = _table_values(self._table(species), r, step, last)
            # the exact values near the nucleus, looked for only in the box around it
            near_lo = np.maximum(np.floor(c - near_half).astype(np.int64), lo) - lo
            near_hi = np.minimum(np.ceil(c + near_half).astype(np.int64), hi) - lo + 1
            if np.all(near_hi > near_lo):
                box = tuple(slice(a, b) for a, b in zip(near_lo, near_hi))
                r_box, f_box = r[box], f[box]
                near = r_box < _EXACT_RADIUS
                if np.any(near):
                    f_box[near] = self._switched(r_box[near], pos[0], 0, z=species)[0]
            out[lo[0]:hi[0] + 1, lo[1]:hi[1] + 1, lo[2]:hi[2] + 1] += f
        return out
