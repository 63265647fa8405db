"""The field protocol: value, gradient and Hessian of a scalar field at points.

Everything topology needs from a density is this protocol, so an interpolated
grid and an analytic model (promolecule, PySCF's analytic density in tests)
are interchangeable.

All methods are vectorised over points: ``points`` is a ``(N, 3)`` array in
bohr; ``value`` returns ``(N,)``, ``gradient`` ``(N, 3)``, ``hessian``
``(N, 3, 3)``.  ``evaluate(points, order)`` returns the tuple of the first
``order + 1`` of these in one pass (implementations should make it the fast
path).

Implementations: :class:`trackscan.fields.GridField` (the interpolated grid,
promolecule subtracted), :class:`trackscan.fields.SphericalSum` (analytic
Gaussian or Slater sums), :class:`trackscan.fields.LocalizedPromolecule` and
:class:`trackscan.promolecule.Promolecule`.
"""

from __future__ import annotations

from typing import Protocol, runtime_checkable

import numpy as np

__all__ = ["Field", "FieldBase"]


@runtime_checkable
class Field(Protocol):
    """A scalar field with first and second derivatives (atomic units)."""

    def value(self, points: np.ndarray) -> np.ndarray:
        """Field values, shape (N,)."""

    def gradient(self, points: np.ndarray) -> np.ndarray:
        """Gradients, shape (N, 3)."""

    def hessian(self, points: np.ndarray) -> np.ndarray:
        """Hessians, shape (N, 3, 3)."""

    def evaluate(self, points: np.ndarray, order: int = 2) -> tuple:
        """``(value,)``, ``(value, gradient)`` or ``(value, gradient, hessian)``."""


class FieldBase:
    """Mixin: ``value``, ``gradient`` and ``hessian`` from ``evaluate``.

    A field implements ``evaluate(points, order)`` (its one fast path) and
    inherits the three single-quantity methods of the protocol.
    """

    def value(self, points) -> np.ndarray:
        """Field values at points, shape (N,)."""
        return self.evaluate(points, 0)[0]

    def gradient(self, points) -> np.ndarray:
        """Gradients at points, shape (N, 3)."""
        return self.evaluate(points, 1)[1]

    def hessian(self, points) -> np.ndarray:
        """Hessians at points, shape (N, 3, 3)."""
        return self.evaluate(points, 2)[2]

    def evaluate(self, points, order: int = 2) -> tuple:  # pragma: no cover - abstract
        """``(value,)``, ``(value, gradient)`` or ``(value, gradient, hessian)``."""
        raise TypeError(f"{type(self).__name__} must implement evaluate(points, order)")
