"""Vectorised Newton-Raphson search for zeros of the gradient.

All seeds iterate together: each iteration is one field evaluation (value,
gradient, Hessian) at every active point and one batched eigendecomposition.
The step is the Newton step written in the Hessian eigenbasis,
``dx = -sum_i (F_i / lambda_i) v_i`` with ``F_i = v_i . grad rho``
(../shared/METHODS.md section 1), eigenvalues kept away from zero, and the
whole step scaled down to at most ``max_step``.  Plain Newton converges to
the nearest critical point of any type, which is what an exhaustive search
wants.
"""

from __future__ import annotations

import itertools

import numpy as np
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import connected_components
from scipy.spatial import cKDTree

__all__ = ["newton_search", "merge_points", "outside_nuclear_spheres"]

_EIG_FLOOR = 1e-12


def newton_search(field, x0, *, gtol: float, maxiter: int, max_step: float, inside,
                  nuclei=None, nuclear_radius: float = 0.0, floor: float = 0.0):
    """Run Newton iteration from every seed at once.

    Parameters
    ----------
    field : Field
    x0 : (N, 3) float array, bohr
        Seeds.
    gtol : float
        Converged when |grad rho| < gtol.
    maxiter : int
    max_step : float, bohr
    inside : callable
        ``inside(x) -> (M,) bool``: points that may be visited; seeds leaving
        the region are abandoned.
    nuclei : (n, 3) float array, optional
        Seeds entering a sphere of `nuclear_radius` around a nucleus are
        abandoned (the cusp; the nuclear attractor is placed separately).
    nuclear_radius : float or (n,) float array, bohr
    floor : float or (N,) float array
        Seeds wandering below a tenth of this density are abandoned (per
        seed: 0 for seeds inside a cage, where the floor does not apply).

    Returns
    -------
    x : (N, 3) float array
        Final positions.
    converged : (N,) bool array
    n_iter : int
        Iterations run.
    """
    x = np.array(x0, dtype=np.float64).reshape(-1, 3)
    n = len(x)
    converged = np.zeros(n, dtype=bool)
    alive = np.ones(n, dtype=bool)
    nuc = None if nuclei is None or len(nuclei) == 0 else np.asarray(nuclei, dtype=float)
    if nuc is not None:
        rad = np.broadcast_to(np.asarray(nuclear_radius, dtype=float), (len(nuc),))
        tree = cKDTree(nuc)
    floor = np.broadcast_to(np.asarray(floor, dtype=np.float64), (n,))
    it = 0
    for it in range(1, maxiter + 1):
        idx = np.nonzero(alive & ~converged)[0]
        if len(idx) == 0:
            break
        xi = x[idx]
        v, g, h = field.evaluate(xi, 2)
        gn = np.linalg.norm(g, axis=1)
        done = gn < gtol
        converged[idx[done]] = True
        lost = v < 0.1 * floor[idx]
        alive[idx[lost & ~done]] = False
        go = ~done & ~lost
        if not np.any(go):
            continue
        idx, xi, g, h = idx[go], xi[go], g[go], h[go]
        lam, vec = np.linalg.eigh(h)
        lam = np.where(np.abs(lam) < _EIG_FLOOR, np.where(lam < 0, -_EIG_FLOOR, _EIG_FLOOR), lam)
        f = np.einsum("nij,ni->nj", vec, g)           # components along eigenvectors
        step = -np.einsum("nij,nj->ni", vec, f / lam)
        length = np.linalg.norm(step, axis=1)
        scale = np.minimum(1.0, max_step / np.maximum(length, 1e-300))
        xn = xi + step * scale[:, None]
        x[idx] = xn
        ok = inside(xn)
        if nuc is not None:
            ok &= outside_nuclear_spheres(xn, nuc, rad, tree=tree)
        alive[idx[~ok]] = False
    return x, converged & alive, it


def outside_nuclear_spheres(x, nuclei, radii, *, tree=None) -> np.ndarray:
    """True for points outside every sphere ``radii[i]`` around ``nuclei[i]``.

    A neighbour list (k-d tree of the nuclei, built once by the caller and
    passed as `tree` when called repeatedly) keeps the cost linear in the
    number of points whatever the number of atoms.  A point counts as inside
    when it is at most ``radii[i]`` from nucleus i (the 4 nearest nuclei
    within the largest radius are checked; exclusion spheres are far smaller
    than interatomic distances).
    """
    x = np.asarray(x, dtype=float).reshape(-1, 3)
    nuclei = np.asarray(nuclei, dtype=float).reshape(-1, 3)
    ok = np.ones(len(x), dtype=bool)
    if len(nuclei) == 0 or len(x) == 0:
        return ok
    radii = np.broadcast_to(np.asarray(radii, dtype=float), (len(nuclei),))
    rmax = float(radii.max())
    k = min(4, len(nuclei))
    d, j = (tree if tree is not None else cKDTree(nuclei)).query(x, k=k, distance_upper_bound=rmax)
    d = d.reshape(len(x), k)
    j = j.reshape(len(x), k)
    hit = np.isfinite(d)
    r = np.where(hit, radii[np.minimum(j, len(nuclei) - 1)], -1.0)
    return ~np.any(hit & (d <= r), axis=1)


def merge_points(x, score, tol: float, *, cell=None):
    """Group points closer than `tol` (transitively) and keep one per group.

    Parameters
    ----------
    x : (N, 3) float array
    score : (N,) float array
        The member with the smallest score represents its group.
    tol : float
    cell : (3, 3) float array, optional
        Periodic cell vectors (rows): points that coincide with a periodic
        image of each other are merged too.

    Returns
    -------
    (M,) int array
        Indices of the representatives, in increasing order.
    """
    x = np.asarray(x, dtype=np.float64).reshape(-1, 3)
    n = len(x)
    if n == 0:
        return np.zeros(0, dtype=np.int64)
    if cell is None:
        pairs = cKDTree(x).query_pairs(tol, output_type="ndarray")
    else:
        tree = cKDTree(x)
        found = []
        for shift in itertools.product((-1, 0, 1), repeat=3):
            t = np.asarray(shift, dtype=float) @ np.asarray(cell, dtype=float)
            for i, js in enumerate(tree.query_ball_point(x + t, tol)):
                found.extend((i, j) for j in js if j != i)
        pairs = np.array(found, dtype=np.int64).reshape(-1, 2)
    graph = coo_matrix((np.ones(len(pairs)), (pairs[:, 0], pairs[:, 1])), shape=(n, n))
    _, label = connected_components(graph, directed=False)
    order = np.lexsort((np.arange(n), np.asarray(score), label))
    first = np.ones(n, dtype=bool)
    first[1:] = label[order][1:] != label[order][:-1]
    return np.sort(order[first])
