"""Tricubic B-spline interpolation of gridded samples, with exact derivatives.

The interpolant is the tensor product of cubic B-splines whose coefficients
make it pass through every sample (cardinal interpolation).  Coefficients come
from :func:`scipy.ndimage.spline_filter`; evaluation is our own vectorised
4 x 4 x 4 weight contraction, which returns the value, the gradient and the
Hessian in index space at many points in one pass (the generic SciPy routines
evaluate one derivative order per call and are far slower for this).

Why B-splines rather than the local tricubic scheme of Lekien & Marsden
(2005): a cubic B-spline is C2 everywhere, so the Hessian is continuous
across cell faces and Newton iteration on the gradient converges
quadratically near a critical point; the Lekien-Marsden interpolant is only
C1, its Hessian jumps at faces and Newton can stall there.  The price is a
global prefilter (one linear recursive filter per axis, O(N)).

References
----------
.. [1] C. de Boor, *A Practical Guide to Splines*, Springer (1978).
.. [2] M. Unser, "Splines: a perfect fit for signal and image processing",
   IEEE Signal Process. Mag. 16(6), 22 (1999). :DOI:`10.1109/79.799930`
.. [3] F. Lekien and J. Marsden, "Tricubic interpolation in three
   dimensions", Int. J. Numer. Meth. Eng. 63, 455 (2005).
   :DOI:`10.1002/nme.1296`
"""

from __future__ import annotations

import numpy as np
from scipy import ndimage

__all__ = ["TricubicBSpline", "bspline_weights", "quintic_weights"]

_BINOM6 = np.array([1.0, 6.0, 15.0, 20.0, 15.0, 6.0, 1.0])


def bspline_weights(t: np.ndarray, order: int) -> np.ndarray:
    """Cubic B-spline weights of the 4 coefficients around a cell, and derivatives.

    Parameters
    ----------
    t : (N,) float array
        Offset inside the cell, usually in [0, 1).
    order : {0, 1, 2}
        Highest derivative wanted.

    Returns
    -------
    (N, order + 1, 4) float array
        ``w[:, d, m]`` is the d-th derivative (with respect to t) of the
        weight of coefficient ``i - 1 + m``.
    """
    t2 = t * t
    t3 = t2 * t
    s = 1.0 - t
    w = np.empty((len(t), order + 1, 4))
    w[:, 0, 0] = s * s * s / 6.0
    w[:, 0, 1] = (3.0 * t3 - 6.0 * t2 + 4.0) / 6.0
    w[:, 0, 2] = (-3.0 * t3 + 3.0 * t2 + 3.0 * t + 1.0) / 6.0
    w[:, 0, 3] = t3 / 6.0
    if order >= 1:
        w[:, 1, 0] = -0.5 * s * s
        w[:, 1, 1] = 1.5 * t2 - 2.0 * t
        w[:, 1, 2] = -1.5 * t2 + t + 0.5
        w[:, 1, 3] = 0.5 * t2
    if order >= 2:
        w[:, 2, 0] = s
        w[:, 2, 1] = 3.0 * t - 2.0
        w[:, 2, 2] = 1.0 - 3.0 * t
        w[:, 2, 3] = t
    return w


def quintic_weights(t: np.ndarray, order: int) -> np.ndarray:
    """Quintic B-spline weights of the 6 coefficients around a cell, and derivatives.

    Uses the truncated-power form of the centred quintic B-spline,
    ``b5(x) = (1/120) sum_k (-1)^k C(6, k) (x + 3 - k)_+^5``.

    Parameters
    ----------
    t : (N,) float array
        Offset inside the cell, usually in [0, 1).
    order : {0, 1, 2}

    Returns
    -------
    (N, order + 1, 6) float array
        ``w[:, d, m]`` is the d-th derivative of the weight of coefficient
        ``i - 2 + m``.
    """
    # argument of b5 for coefficient i-2+m at u = i + t is t + 2 - m
    x = t[:, None] + (2.0 - np.arange(6.0))[None, :]            # (N, 6)
    w = np.zeros((len(t), order + 1, 6))
    fac = (1.0, 5.0, 20.0)
    sign = np.array([1.0, -1.0, 1.0, -1.0, 1.0, -1.0, 1.0]) * _BINOM6
    for k in range(7):
        y = np.maximum(x + 3.0 - k, 0.0)
        for d in range(order + 1):
            w[:, d, :] += sign[k] * fac[d] * y ** (5 - d)
    return w / 120.0


def _padded_coefficients(values, degree, lead, periodic):
    """B-spline coefficients of `values`, padded by `lead` before, `lead` + 1 after.

    The same numbers as ``numpy.pad(ndimage.spline_filter(values, ...), pad,
    mode="wrap" or "reflect")``, but the filter writes straight into the
    middle of the padded array and the faces are copied slab by slab, which
    saves a copy of the whole grid.
    """
    mode = "grid-wrap" if periodic else "mirror"
    n = values.shape
    out = np.empty(tuple(k + 2 * lead + 1 for k in n))
    inner = tuple(slice(lead, lead + k) for k in n)
    ndimage.spline_filter(values, order=degree, mode=mode, output=out[inner])

    def index(axis, i):
        return (slice(None),) * axis + (i,)

    for axis, k in enumerate(n):
        # padded index p holds coefficient q(p - lead) of the unpadded axis
        for p in list(range(lead)) + list(range(lead + k, k + 2 * lead + 1)):
            j = p - lead
            if periodic:
                q = j % k
            else:             # reflect about the end points (they are not repeated)
                q = -j if j < 0 else 2 * (k - 1) - j
            out[index(axis, p)] = out[index(axis, q + lead)]
    return out


class TricubicBSpline:
    """Cardinal tricubic B-spline through the samples of a 3-D array.

    Parameters
    ----------
    values : (nx, ny, nz) float array
        Samples at integer indices; every axis needs at least 4 points.
    periodic : bool
        True: the samples repeat with period ``n`` along every axis.
        False: the samples are mirrored about the first and last point
        (the usual "mirror" boundary of image processing).
    degree : {3, 5}
        Cubic (C2, second derivatives accurate to O(h^2)) or quintic (C4,
        second derivatives accurate to O(h^4); 216 instead of 64
        coefficients per point).  The class keeps its name for the default.

    Notes
    -----
    Evaluation works in index coordinates ``u`` (sample ``(i, j, k)`` sits at
    ``u = (i, j, k)``).  Outside ``[0, n - 1]`` along a non-periodic axis the
    polynomial of the boundary cell is continued.
    Cost per point: a gather of 64 coefficients and three small matrix
    products, all vectorised over points.
    """

    def __init__(self, values, *, periodic: bool = False, degree: int = 3):
        if degree not in (3, 5):
            raise ValueError(f"degree must be 3 or 5, got {degree!r}")
        values = np.asarray(values, dtype=np.float64)
        if values.ndim != 3 or min(values.shape) < degree + 1:
            raise ValueError(f"values must be a 3-D array with >= {degree + 1} points per "
                             f"axis, got shape {values.shape}")
        self.shape = values.shape
        self.periodic = bool(periodic)
        self.degree = degree
        self._w = degree + 1                      # coefficients per axis
        self._lead = (degree - 1) // 2            # coefficients before the cell
        self._weights = bspline_weights if degree == 3 else quintic_weights
        coef = _padded_coefficients(values, degree, self._lead, periodic)
        self._coef = coef.ravel()
        p1, p2 = coef.shape[1], coef.shape[2]
        m = self._w
        a, b, c = np.meshgrid(np.arange(m), np.arange(m), np.arange(m), indexing="ij")
        self._offsets = (a * p1 * p2 + b * p2 + c).ravel()
        self._strides = np.array([p1 * p2, p2, 1])

    def evaluate(self, u, order: int = 2) -> tuple:
        """Value and index-space derivatives at fractional indices.

        Parameters
        ----------
        u : (N, 3) float array
            Fractional grid indices.
        order : {0, 1, 2}

        Returns
        -------
        tuple
            ``(value,)``, ``(value, grad_u)`` or ``(value, grad_u, hess_u)``
            with shapes (N,), (N, 3), (N, 3, 3); derivatives are with respect
            to the index coordinates.
        """
        u = np.asarray(u, dtype=np.float64).reshape(-1, 3)
        n = np.asarray(self.shape)
        cell = np.floor(u)
        if self.periodic:
            t = u - cell
            cell = np.mod(cell, n)
        else:
            cell = np.clip(cell, 0, n - 2)
            t = u - cell
        base = cell.astype(np.int64) @ self._strides
        coef = self._coef[base[:, None] + self._offsets[None, :]]  # (N, w^3)
        k = order + 1
        m = len(u)
        # the weights of the three axes in one call (elementwise, so the same
        # numbers as one call per axis); axis-major, so each axis is contiguous
        wx, wy, wz = self._weights(t.T.ravel(), order).reshape(3, m, k, self._w)
        q = self._w
        # contract z, then y, then x: c[a,b,c] -> f[dx,dy,dz]
        tz = np.matmul(coef.reshape(m, q * q, q), wz.transpose(0, 2, 1))     # [a b | dz]
        tz = tz.reshape(m, q, q, k)
        ty = np.matmul(wy, tz.transpose(0, 2, 1, 3).reshape(m, q, q * k))    # [dy | a dz]
        ty = ty.reshape(m, k, q, k).transpose(0, 2, 1, 3).reshape(m, q, k * k)  # [a | dy dz]
        f = np.matmul(wx, ty).reshape(m, k, k, k)                            # [dx, dy, dz]
        val = f[:, 0, 0, 0]
        if order == 0:
            return (val,)
        grad = np.stack([f[:, 1, 0, 0], f[:, 0, 1, 0], f[:, 0, 0, 1]], axis=1)
        if order == 1:
            return val, grad
        hess = np.empty((m, 3, 3))
        hess[:, 0, 0] = f[:, 2, 0, 0]
        hess[:, 1, 1] = f[:, 0, 2, 0]
        hess[:, 2, 2] = f[:, 0, 0, 2]
        hess[:, 0, 1] = hess[:, 1, 0] = f[:, 1, 1, 0]
        hess[:, 0, 2] = hess[:, 2, 0] = f[:, 1, 0, 1]
        hess[:, 1, 2] = hess[:, 2, 1] = f[:, 0, 1, 1]
        return val, grad, hess
