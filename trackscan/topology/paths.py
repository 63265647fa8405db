"""Gradient paths, integrated for many starting points at once.

A gradient path solves ``dr/ds = +/- grad rho / |grad rho|`` (unit speed, so
``s`` is arc length).  The integrator is the embedded Runge-Kutta 3(2) pair
of Bogacki & Shampine [1]_ with a per-path adaptive step: all active paths
advance together, each with its own step, accepted or rejected on its own
local error estimate.  A path ends when it comes within a capture radius of
a target (nuclei and non-nuclear attractors going uphill; cage CPs going
downhill), leaves the allowed region, drops below the density floor, stalls
(|grad rho| vanishes away from every target), or runs out of steps.

Several sets of paths (each with its own direction, targets and limits) can
be integrated together (:func:`trace_path_sets`): every step then evaluates
the field once at the points of all sets.  A point's value and gradient do
not depend on the other points of an evaluation, so each path is the same,
number for number, as when its set is traced alone.

Used for bond paths (from a bond CP along +/- the eigenvector of its
positive eigenvalue [2]_), for the gradient paths of a ring surface (from a
ring CP within the plane of its two positive eigenvectors) and for the path
from a ring CP down to a cage CP.

References
----------
.. [1] P. Bogacki and L. F. Shampine, "A 3(2) pair of Runge-Kutta
   formulas", Appl. Math. Lett. 2, 321 (1989).
   :DOI:`10.1016/0893-9659(89)90079-7`
.. [2] R. F. W. Bader, *Atoms in Molecules: A Quantum Theory*, Oxford
   University Press (1990), chapter 2.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from trackscan.errors import DegenerateDensityError
from trackscan.topology.limits import MAX_PATH_STEPS

__all__ = ["trace_paths", "trace_path_sets", "PathBundle", "OPEN", "TARGET"]

TARGET = "target"
OPEN = "open"

_H0 = 0.05       # initial step (bohr)
_HMIN = 1e-4
_HMAX = 0.25
_TOL = 1e-5      # local error per step (bohr)
_GSTALL = 1e-10
_MAX_STEPS = 4000
_MAX_BACKWARDS = 8   # steps without progress in rho before a path counts as stalled


@dataclass
class PathBundle:
    """Result of :func:`trace_paths`.

    Attributes
    ----------
    points : list of (M_i, 3) float arrays
        Polyline of each path, from its start to the end point (the target
        centre when a target was reached).
    target : (P,) int array
        Index of the target reached, or -1.
    reason : list of str
        ``"target"``, ``"outside"``, ``"floor"``, ``"stalled"`` or ``"steps"``.
    """

    points: list
    target: np.ndarray
    reason: list


def _direction(v, g, sign):
    """Value, unit step direction and gradient norm from a field evaluation."""
    gn = np.linalg.norm(g, axis=1)
    return v, sign * g / np.maximum(gn, 1e-300)[:, None], gn


def trace_paths(field, starts, *, uphill: bool = True, targets=None, radii=None,
                inside=None, floor: float = 0.0, first_points=None,
                max_steps: int = _MAX_STEPS, tol: float = _TOL) -> PathBundle:
    """Integrate gradient paths from many starting points together.

    Parameters
    ----------
    field : Field
    starts : (P, 3) float array, bohr
    uphill : bool
        Follow +grad rho (True) or -grad rho.
    targets : (T, 3) float array, optional
        Points that end a path when it comes within ``radii`` of them.
    radii : (T,) float array or float
        Capture radii (bohr).
    inside : callable, optional
        ``inside(x) -> bool array``; paths leaving it end as ``outside``.
    floor : float
        Paths reaching a lower density end as ``floor``.
    first_points : (P, 3) float array, optional
        Extra first vertex of each polyline (the CP the path leaves).
    max_steps : int
    tol : float
        Local error per step (bohr).

    Returns
    -------
    PathBundle
    """
    return trace_path_sets(field, [dict(starts=starts, uphill=uphill, targets=targets,
                                        radii=radii, inside=inside, floor=floor,
                                        first_points=first_points, max_steps=max_steps,
                                        tol=tol)])[0]


def trace_path_sets(field, sets) -> list:
    """Integrate several sets of gradient paths together, one field evaluation per step.

    Parameters
    ----------
    field : Field
    sets : list of dict
        The keyword arguments of :func:`trace_paths` (``starts`` and the
        options) for each set.

    Returns
    -------
    list of PathBundle
        One per set, each equal to what :func:`trace_paths` gives for that
        set alone.
    """
    runs = [_integrate(**options) for options in sets]
    out = [None] * len(runs)
    wanted = {}
    for k, run in enumerate(runs):
        try:
            wanted[k] = next(run)
        except StopIteration as stop:
            out[k] = stop.value
    while wanted:
        keys = list(wanted)
        sizes = [len(wanted[k]) for k in keys]
        v, g = field.evaluate(np.concatenate([wanted[k] for k in keys]), 1)
        bounds = np.cumsum([0] + sizes)
        for k, a, b in zip(keys, bounds[:-1], bounds[1:]):
            try:
                wanted[k] = runs[k].send((v[a:b], g[a:b]))
            except StopIteration as stop:
                out[k] = stop.value
                del wanted[k]
    return out


class _Targets:
    """Capture spheres, with a cheap first test of which points may be in one."""

    def __init__(self, centres, radii):
        self.centres = centres
        self.radii = radii
        if len(centres):
            self._origin = centres.mean(axis=0)
            c = centres - self._origin
            # |y - c|^2 < r^2  <=>  y.c - |c|^2 / 2 + r^2 / 2 > |y|^2 / 2
            self._shift = 0.5 * (radii * radii - np.einsum("ij,ij->i", c, c))
            self._centred = c
            self._scale = float(np.max(np.einsum("ij,ij->i", c, c) + radii * radii))

    def near(self, y):
        """Rows of `y` that may lie within a capture sphere (a superset of those that do)."""
        c = y - self._origin
        c2 = np.einsum("ij,ij->i", c, c)
        lhs = c @ self._centred.T
        lhs += self._shift
        slack = 1e-9 * (self._scale + float(c2.max()))
        return np.any(lhs > 0.5 * c2[:, None] - slack, axis=1)


def _integrate(*, starts, uphill=True, targets=None, radii=None, inside=None, floor=0.0,
               first_points=None, max_steps=_MAX_STEPS, tol=_TOL):
    """The integration of :func:`trace_paths`, as a generator.

    Yields the points at which it needs the field, receives ``(value,
    gradient)`` there, and returns the PathBundle.
    """
    y = np.array(starts, dtype=np.float64).reshape(-1, 3)
    p = len(y)
    sign = 1.0 if uphill else -1.0
    tg = np.zeros((0, 3)) if targets is None else np.asarray(targets, dtype=float).reshape(-1, 3)
    rad = np.broadcast_to(np.asarray(0.1 if radii is None else radii, dtype=float), (len(tg),))
    spheres = _Targets(tg, rad)
    target = np.full(p, -1, dtype=np.int64)
    reason = [""] * p
    # the polylines: every accepted step is logged as (path indices, points)
    # and sorted into the paths at the end
    log_idx, log_pts = [np.arange(p)], [y.copy()]
    h = np.full(p, _H0)
    steps = np.zeros(p, dtype=np.int64)
    backwards = np.zeros(p, dtype=np.int64)   # accepted steps on which rho did not progress
    last_v = np.full(p, -np.inf if uphill else np.inf)
    active = np.ones(p, dtype=bool)
    total_steps = 0

    def finish(idx, why):
        for i in idx:
            reason[i] = why
        active[idx] = False

    _check_end(y, np.arange(p), spheres, target, finish, inside, None, floor)
    k1 = np.zeros_like(y)
    idx = np.nonzero(active)[0]
    if len(idx):
        _, k1[idx], _ = _direction(*(yield y[idx]), sign)
    while True:
        idx = np.nonzero(active)[0]
        if len(idx) == 0:
            break
        yi, hi, a1 = y[idx], h[idx][:, None], k1[idx]
        _, a2, _ = _direction(*(yield yi + 0.5 * hi * a1), sign)
        _, a3, _ = _direction(*(yield yi + 0.75 * hi * a2), sign)
        y3 = yi + hi * (2.0 / 9.0 * a1 + 1.0 / 3.0 * a2 + 4.0 / 9.0 * a3)
        v4, a4, g4 = _direction(*(yield y3), sign)
        y2 = yi + hi * (7.0 / 24.0 * a1 + 0.25 * a2 + 1.0 / 3.0 * a3 + 0.125 * a4)
        err = np.linalg.norm(y3 - y2, axis=1)
        ok = (err <= tol) | (hi[:, 0] <= _HMIN * 1.0001)
        fac = np.clip(0.9 * (tol / np.maximum(err, 1e-300)) ** (1.0 / 3.0), 0.2, 4.0)
        h[idx] = np.clip(hi[:, 0] * fac, _HMIN, _HMAX)
        acc = idx[ok]
        total_steps += len(acc)
        if total_steps > MAX_PATH_STEPS:
            raise DegenerateDensityError(
                f"degenerate or noisy density: gradient paths took more than {MAX_PATH_STEPS} "
                f"steps ({p} paths)")
        y[acc] = y3[ok]
        k1[acc] = a4[ok]
        steps[acc] += 1
        # at a maximum (uphill) or minimum (downhill) that is no target, unit-speed
        # steps oscillate about it: rho stops progressing
        vn = v4[ok]
        worse = (vn <= last_v[acc]) if uphill else (vn >= last_v[acc])
        backwards[acc] += worse
        last_v[acc] = vn
        log_idx.append(acc)
        log_pts.append(y3[ok])
        stalled = acc[(g4[ok] < _GSTALL) | (backwards[acc] >= _MAX_BACKWARDS)]
        _check_end(y, acc, spheres, target, finish, inside, (v4[ok], acc), floor)
        still = stalled[active[stalled]]
        finish(still, "stalled")
        over = acc[active[acc] & (steps[acc] >= max_steps)]
        finish(over, "steps")
    return PathBundle(_polylines(p, log_idx, log_pts, first_points, target, tg), target, reason)


def _polylines(p, log_idx, log_pts, first_points, target, tg):
    """Each path's vertices: its first point, its steps in order, the target it reached."""
    idx = np.concatenate(log_idx)
    pts = np.concatenate(log_pts)
    order = np.argsort(idx, kind="stable")
    pts = pts[order]
    ends = np.cumsum(np.bincount(idx, minlength=p))
    out = []
    for i in range(p):
        parts = [pts[ends[i - 1] if i else 0:ends[i]]]
        if first_points is not None:
            parts.insert(0, np.asarray(first_points[i], dtype=float).reshape(1, 3))
        if target[i] >= 0:
            parts.append(tg[target[i]][None])
        out.append(np.concatenate(parts) if len(parts) > 1 else parts[0].copy())
    return out


def _check_end(y, idx, spheres, target, finish, inside, values, floor):
    """End the paths `idx` that reached a target, left the region or the floor."""
    if len(idx) == 0:
        return
    yi = y[idx]
    tg, rad = spheres.centres, spheres.radii
    if len(tg):
        hit = np.zeros(len(idx), dtype=bool)
        near = np.nonzero(spheres.near(yi))[0]
        if len(near):
            d = np.linalg.norm(yi[near][:, None, :] - tg[None], axis=-1) - rad[None]
            best = np.argmin(d, axis=1)
            got = d[np.arange(len(near)), best] < 0
            hit[near[got]] = True
            target[idx[near[got]]] = best[got]
        finish(idx[hit], TARGET)
        idx, yi = idx[~hit], yi[~hit]
        if values is not None:
            values = (values[0][~hit], values[1][~hit])
    if inside is not None and len(idx):
        out = ~inside(yi)
        finish(idx[out], "outside")
        idx = idx[~out]
        if values is not None:
            values = (values[0][~out], values[1][~out])
    if values is not None and floor > 0 and len(idx):
        low = values[0] < floor
        finish(idx[low], "floor")
