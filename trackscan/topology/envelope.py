"""Where the density floor applies: the outer vacuum, not the molecule's inside.

The density floor (``AnalysisSettings.density_floor``) exists to reject
numerical noise in the vacuum around a molecule.  Inside a cage (a
fullerene, a cryptand, the cavity of a host) the density may fall below it
too: the cage CP of C60 in the built-in model has rho of about 7e-6 against
the default floor of 1e-4.  Such a point is part of the molecule's topology,
and dropping it breaks Poincare-Hopf.

The envelope of a frame is the set of grid nodes whose density is above the
floor.  A connected region of nodes at or below the floor that does not
reach the faces of the box is enclosed by that envelope: it is inside the
molecule, and the floor does not apply there.  Regions that touch the box
faces are the outer vacuum.  Connectivity is 26-neighbour for the low-density
nodes, so a region counts as enclosed only if no diagonal gap leaks to the
outside.

For periodic grids every low-density region that touches a cell face is
treated as outer vacuum (conservative: the floor applies there as before).
"""

from __future__ import annotations

import numpy as np
from scipy import ndimage

__all__ = ["DensityEnvelope"]


class DensityEnvelope:
    """The nodes of a grid to which the density floor does not apply.

    Parameters
    ----------
    grid : DensityGrid
    floor : float
        The density floor (e/bohr^3).

    Attributes
    ----------
    enclosed : (nx, ny, nz) bool array
        Nodes at or below the floor, in a region that does not reach the box
        faces (inside the molecule).
    n_enclosed : int
        Number of such nodes.
    """

    def __init__(self, grid, floor: float):
        self.grid = grid
        self.floor = float(floor)
        values = np.asarray(grid.values)
        low = values <= self.floor
        if not low.any():
            self.enclosed = np.zeros(values.shape, dtype=bool)
        else:
            label, n = ndimage.label(low, structure=np.ones((3, 3, 3), dtype=bool))
            outer = np.zeros(n + 1, dtype=bool)
            for axis in range(3):
                for end in (0, -1):
                    face = np.take(label, end, axis=axis)
                    outer[np.unique(face)] = True
            outer[0] = True          # label 0: nodes above the floor
            self.enclosed = ~outer[label]
        self.n_enclosed = int(self.enclosed.sum())
        self._kept = None
        self._inv = np.linalg.inv(np.asarray(grid.axes, dtype=float))

    def kept(self) -> np.ndarray:
        """Nodes that count for seeding: above the floor, or enclosed (computed once)."""
        if self._kept is None:
            above = np.asarray(self.grid.values) > self.floor
            self._kept = above | self.enclosed if self.n_enclosed else above
        return self._kept

    def inside(self, x) -> np.ndarray:
        """True for points in a cell with an enclosed corner (the floor does not apply).

        Parameters
        ----------
        x : (M, 3) float array, bohr

        Returns
        -------
        (M,) bool array
        """
        x = np.asarray(x, dtype=float).reshape(-1, 3)
        out = np.zeros(len(x), dtype=bool)
        if self.n_enclosed == 0 or len(x) == 0:
            return out
        shape = np.asarray(self.enclosed.shape)
        u = (x - np.asarray(self.grid.origin, dtype=float)) @ self._inv
        base = np.floor(u).astype(np.int64)
        for corner in np.ndindex(2, 2, 2):
            idx = base + np.asarray(corner)
            ok = np.all((idx >= 0) & (idx < shape), axis=1)
            hit = np.zeros(len(x), dtype=bool)
            hit[ok] = self.enclosed[idx[ok, 0], idx[ok, 1], idx[ok, 2]]
            out |= hit
        return out

    def floors(self, x) -> np.ndarray:
        """Per point, the density floor that applies there (0 inside the envelope)."""
        return np.where(self.inside(x), 0.0, self.floor)
