"""Bounds on the work of one frame, and checks of grids that have no traceable topology.

A molecular density has a few critical points per atom (Poincaré–Hopf ties
their numbers together) and bond paths of a few hundred steps.  A grid of
random noise has a critical point in almost every cell, and a constant grid
(a plateau) has a degenerate one at every point: traced, either takes
gigabytes and minutes.  Such grids are refused with a
:class:`~trackscan.errors.DegenerateDensityError` (bad input, exit code 2),
the constant grid before any work, the others as soon as a count passes its
cap:

- :func:`check_analysable`: at least :data:`MIN_POINTS_PER_AXIS` points per
  axis (the tricubic spline's support), not constant;
- :func:`critical_point_cap`: :data:`CP_CAP_BASE` plus
  :data:`CP_CAP_PER_ATOM` per atom critical points (and
  :data:`SEEDS_PER_CP` times as many first-pass seeds);
- :data:`MAX_PATH_STEPS`: gradient-path steps per batch of paths.

:func:`density_warnings` names grids that can be analysed but whose result
is not what it seems: negative values (a difference or spin density), and
data far below the core model subtracted before the fit (the densities
reported near the nuclei are then the model's, not the file's).
"""

from __future__ import annotations

import numpy as np

from trackscan.errors import DegenerateDensityError

__all__ = ["MIN_POINTS_PER_AXIS", "CP_CAP_BASE", "CP_CAP_PER_ATOM", "SEEDS_PER_CP",
           "MAX_PATH_STEPS", "NEGATIVE_TOLERANCE", "MODEL_DOMINANCE", "check_analysable",
           "critical_point_cap", "check_count", "density_warnings"]

MIN_POINTS_PER_AXIS = 4
"""Fewest grid points along an axis: a tricubic B-spline needs four."""

CP_CAP_BASE = 2000
CP_CAP_PER_ATOM = 40
"""Most critical points one frame may have: CP_CAP_BASE + CP_CAP_PER_ATOM per
atom.  Molecules and crystal cells have fewer than 10 per atom; random noise
has one in every few cells."""

SEEDS_PER_CP = 10
"""First-pass grid seeds allowed per allowed critical point (a smooth density
gives about two seeds per critical point: 40 for cyclopropanol's 21)."""

MAX_PATH_STEPS = 1_000_000
"""Most integration steps of one batch of gradient paths (all its paths
together; each path also stops after its own step limit)."""

NEGATIVE_TOLERANCE = 1e-6
"""Grid values below -NEGATIVE_TOLERANCE times the largest value count as
negative (round-off in a density stays far smaller)."""

MODEL_DOMINANCE = 0.5
"""The data dominates the subtracted core model at a nucleus when, at the grid
point nearest to it, the data is at least this fraction of the model."""


def _name(grid) -> str | None:
    return grid.source or None


def check_analysable(grid) -> None:
    """Refuse a grid the analysis cannot fit or whose topology is a plateau.

    Raises
    ------
    DegenerateDensityError
        Fewer than :data:`MIN_POINTS_PER_AXIS` points along an axis, or the
        same value at every grid point (a constant or all-zero grid).
    """
    shape = tuple(int(n) for n in grid.shape)
    if min(shape) < MIN_POINTS_PER_AXIS:
        raise DegenerateDensityError(
            f"the grid has {'x'.join(map(str, shape))} points; the analysis needs at least "
            f"{MIN_POINTS_PER_AXIS} along each axis (a tricubic spline)", _name(grid))
    values = grid.values
    lo, hi = float(values.min()), float(values.max())
    if lo == hi:
        raise DegenerateDensityError(
            f"degenerate density: every grid value is {lo:g} (a plateau, no critical points "
            "to trace)", _name(grid))


def critical_point_cap(n_atoms: int) -> int:
    """Most critical points a frame with `n_atoms` atoms may have."""
    return CP_CAP_BASE + CP_CAP_PER_ATOM * int(n_atoms)


def check_count(count: int, cap: int, what: str, grid) -> None:
    """Raise DegenerateDensityError when `count` of `what` passes `cap`."""
    if count > cap:
        raise DegenerateDensityError(
            f"degenerate or noisy density: {count} {what}, more than the cap of {cap} for "
            f"{grid.n_atoms} atom(s) (is this a density grid? noise or a plateau cannot be "
            "traced)", _name(grid))


def density_warnings(grid, field=None) -> list:
    """Warnings about a grid whose analysis would mislead.

    Parameters
    ----------
    grid : DensityGrid
    field : GridField, optional
        The fitted field; its ``model`` (the subtracted core promolecule,
        when there is one) is compared with the data at the nuclei.

    Returns
    -------
    list of str
    """
    out = []
    values = grid.values
    top = float(np.max(np.abs(values)))
    low = float(values.min())
    if top > 0 and low < -NEGATIVE_TOLERANCE * top:
        n = int(np.count_nonzero(values < -NEGATIVE_TOLERANCE * top))
        out.append(f"{n} of {values.size} grid values are negative (down to {low:.3g}): "
                   "a difference or spin density? its critical points are not those of an "
                   "electron density")
    model = getattr(field, "model", None)
    if model is not None and grid.n_atoms:
        u = (np.asarray(grid.positions, dtype=float) - grid.origin) @ np.linalg.inv(grid.axes)
        idx = np.rint(u).astype(np.int64)
        shape = np.asarray(grid.shape)
        inside = np.all((idx >= 0) & (idx < shape), axis=1)
        if np.any(inside):
            k = idx[inside]
            data = values[k[:, 0], k[:, 1], k[:, 2]]
            nodes = grid.origin + k @ grid.axes
            with np.errstate(all="ignore"):
                core = model.evaluate(nodes, 0)[0]
            weak = (core > 0) & (data < MODEL_DOMINANCE * core)
            if np.any(weak):
                atoms = (np.nonzero(inside)[0][weak] + 1).tolist()
                i = int(np.argmax(core - data))
                out.append(f"at atom(s) {atoms} the data is far below the subtracted core model "
                           f"(at the grid point nearest atom {np.nonzero(inside)[0][i] + 1}: "
                           f"data {float(data[i]):.3g}, model {float(core[i]):.3g} e/bohr^3): "
                           "the densities reported there are mostly the model's; for a "
                           "valence-only or difference density set "
                           "analysis.subtract_promolecule: false")
    return out
