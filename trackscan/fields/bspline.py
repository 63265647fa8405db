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

__all__ = ["TricubicBSpline", "bspline_weights"]

# pad the coefficient array by 1 before and 2 after each axis so that the
# 4 coefficients i-1 .. i+2 of every cell i in 0 .. n-2 exist
_PAD = ((1, 2), (1, 2), (1, 2))


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

    Notes
    -----
    Evaluation works in index coordinates ``u`` (sample ``(i, j, k)`` sits at
    ``u = (i, j, k)``).  Outside ``[0, n - 1]`` along a non-periodic axis the
    polynomial of the boundary cell is continued.
    Cost per point: a gather of 64 coefficients and three small matrix
    products, all vectorised over points.
    """

    def __init__(self, values, *, periodic: bool = False):
        values = np.asarray(values, dtype=np.float64)
        if values.ndim != 3 or min(values.shape) < 4:
            raise ValueError(f"values must be a 3-D array with >= 4 points per axis, "
                             f"got shape {values.shape}")
        self.shape = values.shape
        self.periodic = bool(periodic)
        mode = "grid-wrap" if periodic else "mirror"
        coef = ndimage.spline_filter(values, order=3, mode=mode, output=np.float64)
        coef = np.pad(coef, _PAD, mode="wrap" if periodic else "reflect")
        self._coef = coef.ravel()
        p1, p2 = coef.shape[1], coef.shape[2]
        a, b, c = np.meshgrid(np.arange(4), np.arange(4), np.arange(4), indexing="ij")
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
        coef = self._coef[base[:, None] + self._offsets[None, :]]  # (N, 64)
        wx = bspline_weights(t[:, 0], order)
        wy = bspline_weights(t[:, 1], order)
        wz = bspline_weights(t[:, 2], order)
        k = order + 1
        m = len(u)
        # contract z, then y, then x: c[a,b,c] -> f[dx,dy,dz]
        tz = np.matmul(coef.reshape(m, 16, 4), wz.transpose(0, 2, 1))        # (m, 16, k): [a b | dz]
        tz = tz.reshape(m, 4, 4, k)
        ty = np.matmul(wy, tz.transpose(0, 2, 1, 3).reshape(m, 4, 4 * k))    # (m, k, 4k): [dy | a dz]
        ty = ty.reshape(m, k, 4, k).transpose(0, 2, 1, 3).reshape(m, 4, k * k)  # [a | dy dz]
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
