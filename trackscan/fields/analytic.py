"""Analytic model fields: sums of spherical Gaussian or Slater functions.

They give exactly known densities with exact derivatives, for tests and for
building model scans (a fold between three model atoms, say).  Each term is
``a * exp(-b * r**2)`` (Gaussian) or ``a * exp(-b * r)`` (Slater, with a cusp
at its centre like a real nucleus).
"""

from __future__ import annotations

import numpy as np
from trackscan.field import FieldBase

__all__ = ["SphericalSum"]

_KINDS = ("gaussian", "slater")


class SphericalSum(FieldBase):
    """A sum of spherical Gaussian or Slater functions (a Field).

    Parameters
    ----------
    centers : (m, 3) array_like, bohr
    amplitudes : (m,) array_like, e/bohr^3
    exponents : (m,) array_like
        ``b`` of each term (1/bohr^2 for Gaussians, 1/bohr for Slaters).
    kind : {'gaussian', 'slater'}

    Examples
    --------
    >>> import numpy as np
    >>> f = SphericalSum([[0, 0, -1], [0, 0, 1]], [1, 1], [1, 1])
    >>> g = f.gradient(np.zeros((1, 3)))
    >>> float(abs(g).max())
    0.0
    """

    def __init__(self, centers, amplitudes, exponents, *, kind: str = "gaussian"):
        if kind not in _KINDS:
            raise ValueError(f"kind must be one of {_KINDS}, got {kind!r}")
        self.centers = np.asarray(centers, dtype=np.float64).reshape(-1, 3)
        m = len(self.centers)
        self.amplitudes = np.broadcast_to(np.asarray(amplitudes, dtype=np.float64), (m,)).copy()
        self.exponents = np.broadcast_to(np.asarray(exponents, dtype=np.float64), (m,)).copy()
        if np.any(self.exponents <= 0):
            raise ValueError("exponents must be positive")
        self.kind = kind

    def evaluate(self, points, order: int = 2) -> tuple:
        """Value and exact derivatives at points; see :class:`trackscan.field.Field`."""
        pts = np.asarray(points, dtype=np.float64).reshape(-1, 3)
        n = len(pts)
        val = np.zeros(n)
        grad = np.zeros((n, 3)) if order >= 1 else None
        hess = np.zeros((n, 3, 3)) if order >= 2 else None
        eye = np.eye(3)
        for c, a, b in zip(self.centers, self.amplitudes, self.exponents):
            d = pts - c
            r2 = np.einsum("ij,ij->i", d, d)
            if self.kind == "gaussian":
                f = a * np.exp(-b * r2)
                d1r = -2.0 * b * f                 # f'(r) / r
                c2 = 4.0 * b * b * f               # (f'' - f'/r) / r^2
            else:
                r = np.sqrt(r2)
                f = a * np.exp(-b * r)
                rs = np.maximum(r, 1e-12)
                d1r = -b * f / rs
                c2 = (b * b * f - d1r) / (rs * rs)
            val += f
            if order >= 1:
                grad += d1r[:, None] * d
            if order >= 2:
                hess += d1r[:, None, None] * eye + c2[:, None, None] * d[:, :, None] * d[:, None, :]
        return (val, grad, hess)[: order + 1]
