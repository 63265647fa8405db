"""The DensityGrid value type: a scalar field sampled on a (possibly skewed) grid.

Point ``(i, j, k)`` of the grid sits at ``origin + i*axes[0] + j*axes[1] +
k*axes[2]`` (bohr), as in the cube format.  Values are the electron density in
e/bohr^3.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from trackscan.elements import symbol

__all__ = ["DensityGrid"]


def _read_only_through(a) -> bool:
    """True when neither `a` nor any array it is a view of can be written."""
    while isinstance(a, np.ndarray):
        if a.flags.writeable:
            return False
        a = a.base
    return True


def _frozen(a, dtype, shape=None, name="array"):
    # a read-only array of the right type is adopted as it is (nobody can
    # write through it); anything else is copied and made read-only
    if isinstance(a, np.ndarray) and a.dtype == dtype and a.flags.c_contiguous \
            and _read_only_through(a):
        arr = a
    else:
        arr = np.array(a, dtype=dtype, copy=True)
    if shape is not None:
        if arr.ndim != len(shape) or any(
            s is not None and s != n for s, n in zip(shape, arr.shape)
        ):
            raise ValueError(f"{name} has wrong shape {arr.shape}, expected {shape}")
    arr.setflags(write=False)
    return arr


@dataclass(frozen=True, eq=False)
class DensityGrid:
    """A density sampled on a regular grid, with the molecule it belongs to.

    Parameters
    ----------
    values : (nx, ny, nz) float64 array, e/bohr^3
        Samples; the last axis varies fastest in files.
    origin : (3,) float64 array, bohr
        Position of point (0, 0, 0).
    axes : (3, 3) float64 array, bohr
        Row ``a`` is the step vector of grid axis ``a`` (may be non-orthogonal).
    numbers : (n,) int array
        Atomic numbers Z.
    charges : (n,) float64 array
        Nuclear charges as written in the file (differ from Z with an
        effective core potential).
    positions : (n, 3) float64 array, bohr
        Nuclear positions.
    source : str, optional
        File the grid came from.
    comments : tuple of str
        The two free-text comment lines of a cube file.
    periodic : bool
        True when the grid samples one periodic cell (the point past the last
        one along each axis is point 0 again).

    Notes
    -----
    Arrays are copied and made read-only, so a grid can be shared safely; an
    array that is already read-only is adopted without a copy.
    """

    values: np.ndarray
    origin: np.ndarray
    axes: np.ndarray
    numbers: np.ndarray
    charges: np.ndarray
    positions: np.ndarray
    source: str | None = None
    comments: tuple = ("", "")
    periodic: bool = False
    _inverse: np.ndarray = field(init=False, repr=False)

    def __post_init__(self):
        values = _frozen(self.values, np.float64, (None, None, None), "values")
        object.__setattr__(self, "values", values)
        object.__setattr__(self, "origin", _frozen(self.origin, np.float64, (3,), "origin"))
        axes = _frozen(self.axes, np.float64, (3, 3), "axes")
        object.__setattr__(self, "axes", axes)
        numbers = _frozen(self.numbers, np.int64, (None,), "numbers")
        object.__setattr__(self, "numbers", numbers)
        n = len(numbers)
        object.__setattr__(self, "charges", _frozen(self.charges, np.float64, (n,), "charges"))
        object.__setattr__(self, "positions", _frozen(self.positions, np.float64, (n, 3), "positions"))
        object.__setattr__(self, "comments", tuple(self.comments))
        if abs(np.linalg.det(axes)) < 1e-12:
            raise ValueError("grid axes are linearly dependent")
        inv = np.linalg.inv(axes)
        inv.setflags(write=False)
        object.__setattr__(self, "_inverse", inv)

    # -- shape and geometry ---------------------------------------------
    @property
    def shape(self) -> tuple:
        """Number of points along each axis, ``(nx, ny, nz)``."""
        return self.values.shape

    @property
    def n_atoms(self) -> int:
        """Number of atoms."""
        return len(self.numbers)

    @property
    def symbols(self) -> list:
        """Element symbols of the atoms."""
        return [symbol(z) for z in self.numbers]

    @property
    def spacing(self) -> np.ndarray:
        """Length of each step vector (bohr), shape (3,)."""
        return np.linalg.norm(self.axes, axis=1)

    @property
    def voxel_volume(self) -> float:
        """Volume of one grid cell (bohr^3)."""
        return float(abs(np.linalg.det(self.axes)))

    @property
    def is_orthogonal(self) -> bool:
        """True when the three step vectors are mutually perpendicular."""
        g = self.axes @ self.axes.T
        off = g - np.diag(np.diag(g))
        return bool(np.all(np.abs(off) <= 1e-10 * np.max(np.abs(g))))

    @property
    def cell(self) -> np.ndarray:
        """Cell vectors (bohr): each step vector times its point count.

        For a periodic grid this is the periodic cell; for an isolated one it
        is the box spanned by the points plus one step.
        """
        return self.axes * np.asarray(self.shape)[:, None]

    def position(self, index) -> np.ndarray:
        """Cartesian position (bohr) of grid index or indices.

        Parameters
        ----------
        index : (..., 3) array_like
            Integer or fractional grid indices.

        Returns
        -------
        (..., 3) float64 array
        """
        idx = np.asarray(index, dtype=np.float64)
        return self.origin + idx @ self.axes

    def fractional_index(self, points) -> np.ndarray:
        """Fractional grid index of Cartesian points (bohr).

        Parameters
        ----------
        points : (..., 3) array_like, bohr

        Returns
        -------
        (..., 3) float64 array
            ``u`` such that ``position(u) == points``.
        """
        p = np.asarray(points, dtype=np.float64)
        return (p - self.origin) @ self._inverse

    def integral(self) -> float:
        """Riemann sum of the values times the voxel volume (electrons)."""
        return float(self.values.sum(dtype=np.float64) * self.voxel_volume)

    def with_values(self, values) -> "DensityGrid":
        """A copy of this grid with other values of the same shape."""
        values = np.asarray(values, dtype=np.float64)
        if values.shape != self.shape:
            raise ValueError(f"values has shape {values.shape}, expected {self.shape}")
        return DensityGrid(values, self.origin, self.axes, self.numbers, self.charges,
                           self.positions, source=self.source, comments=self.comments,
                           periodic=self.periodic)
