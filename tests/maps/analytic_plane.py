"""Reference structures of a planar sum of hydrogen-atom densities, with scipy only.

The density of a free hydrogen atom in its ground state is exactly
``exp(-2 r) / pi`` (atomic units; the 1s orbital ``exp(-r)/sqrt(pi)``
squared, any quantum-chemistry textbook).  A sum of such atoms placed in the
plane z = 0 is symmetric under z -> -z, so all its critical points lie in the
plane, and off a nucleus the curvature along z is ``-2 rho_i / r_i`` summed,
negative.  Hence in the plane: a saddle of rho(x, y) is a bond CP (3, -1), a
minimum a ring CP (3, +1), a maximum away from the nuclei a non-nuclear
attractor.  The bond paths are the two steepest-ascent lines leaving each
saddle along its positive-curvature direction.

This module is independent of trackscan: numpy and scipy only.
"""

from __future__ import annotations

import numpy as np
from scipy.integrate import solve_ivp
from scipy.optimize import root

ANGSTROM = 1.0 / 0.529177210903      # bohr per angstrom (CODATA 2018)


def density(points, nuclei):
    """rho at (m, 2) points of the plane; nuclei (n, 2), bohr."""
    d = np.linalg.norm(points[:, None, :] - nuclei[None, :, :], axis=2)
    return np.exp(-2.0 * d).sum(axis=1) / np.pi


def gradient(p, nuclei):
    v = p[None, :] - nuclei
    r = np.linalg.norm(v, axis=1)
    return (-2.0 * np.exp(-2.0 * r) / (np.pi * r))[:, None].__mul__(v).sum(axis=0)


def hessian(p, nuclei):
    h = np.zeros((2, 2))
    for n in nuclei:
        v = p - n
        r = np.linalg.norm(v)
        e = np.exp(-2.0 * r) / np.pi
        u = v / r
        # d2/dx_i dx_j of e^{-2r}: e * (4 u_i u_j - 2 (delta_ij - u_i u_j) / r)
        h += e * (4.0 * np.outer(u, u) - 2.0 * (np.eye(2) - np.outer(u, u)) / r)
    return h


def critical_points(nuclei, *, step=0.05, margin=1.5, floor=1e-4):
    """Non-nuclear CPs of the plane: list of (position, kind) with kind 'bond'/'ring'/'nna'."""
    lo = nuclei.min(axis=0) - margin
    hi = nuclei.max(axis=0) + margin
    xs = np.arange(lo[0], hi[0] + step, step)
    ys = np.arange(lo[1], hi[1] + step, step)
    X, Y = np.meshgrid(xs, ys, indexing="ij")
    pts = np.column_stack([X.ravel(), Y.ravel()])
    v = pts[:, None, :] - nuclei[None, :, :]
    r = np.linalg.norm(v, axis=2)
    g = (-2.0 * np.exp(-2.0 * r) / (np.pi * np.maximum(r, 1e-12)))[:, :, None] * v
    g = g.sum(axis=1).reshape(X.shape + (2,))
    g2 = (g ** 2).sum(axis=2)
    found = []
    for i in range(1, g2.shape[0] - 1):
        for j in range(1, g2.shape[1] - 1):
            if g2[i, j] > g2[i - 1:i + 2, j - 1:j + 2].min():
                continue
            x0 = np.array([X[i, j], Y[i, j]])
            if np.min(np.linalg.norm(nuclei - x0, axis=1)) < 0.15:
                continue
            x = root(gradient, x0, args=(nuclei,), jac=hessian, method="hybr", tol=1e-12).x
            if np.linalg.norm(gradient(x, nuclei)) > 1e-9:
                continue
            if np.min(np.linalg.norm(nuclei - x, axis=1)) < 0.1:
                continue
            if density(x[None], nuclei)[0] < floor:
                continue
            if any(np.linalg.norm(x - y) < 1e-4 for y, _ in found):
                continue
            ev = np.linalg.eigvalsh(hessian(x, nuclei))
            kind = "bond" if ev[0] < 0 < ev[1] else "ring" if ev[0] > 0 else "nna"
            found.append((x, kind))
    return found


def _climb(start, nuclei):
    def rhs(t, p):
        g = gradient(p, nuclei)
        return g / max(np.linalg.norm(g), 1e-300)

    def hit(t, p):
        return np.min(np.linalg.norm(nuclei - p, axis=1)) - 0.05
    hit.terminal = True
    sol = solve_ivp(rhs, (0.0, 50.0), start, events=hit, max_step=0.05, rtol=1e-8, atol=1e-10)
    end = sol.y[:, -1]
    return int(np.argmin(np.linalg.norm(nuclei - end, axis=1))) + 1


def structure(nuclei, *, step=0.05):
    """Bonded pairs (1-based, sorted) and the number of ring CPs of the planar H_n sum.

    The search is repeated on finer seed grids until the critical points
    satisfy the Poincare-Hopf relation n - b + r = 1 of the plane (an
    isolated molecule; all CPs lie in the plane here), which a coalescing
    pair near a fold can otherwise hide.
    """
    nuclei = np.asarray(nuclei, dtype=float)
    for _ in range(4):
        cps = critical_points(nuclei, step=step)
        kinds = [k for _, k in cps]
        n = len(nuclei) + kinds.count("nna")
        if n - kinds.count("bond") + kinds.count("ring") == 1:
            break
        step /= 2.5
    else:
        raise AssertionError(f"no Poincare-Hopf-consistent CP set for nuclei {nuclei.tolist()}")
    bonds = []
    rings = 0
    for x, kind in cps:
        if kind == "ring":
            rings += 1
        elif kind == "bond":
            w, v = np.linalg.eigh(hessian(x, nuclei))
            u = v[:, 1]
            ends = sorted({_climb(x + 1e-3 * u, nuclei), _climb(x - 1e-3 * u, nuclei)})
            bonds.append(tuple(ends))
    return tuple(sorted(bonds)), rings
