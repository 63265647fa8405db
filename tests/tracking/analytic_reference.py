"""Independent reference: molecular graphs on PySCF's ANALYTIC density.

Test code only, separate from the product's grid code.  The density and its
first and second derivatives come from the Gaussian basis functions and
their analytic derivatives (``mol.eval_gto('GTOval_sph_deriv2')``):

    rho = sum_ij D_ij phi_i phi_j
    d_a rho = 2 sum_ij D_ij phi_i d_a phi_j
    d_ab rho = 2 sum_ij D_ij (d_a phi_i d_b phi_j + phi_i d_ab phi_j)

Critical points: plain Newton steps (capped) from seeds at atom-pair
midpoints, triangle centroids and a coarse lattice over the molecule; kinds
from the signs of the Hessian eigenvalues.  Bond paths: classical RK4 on
grad rho / |grad rho| from the bond CP, displaced along the positive
eigenvector, until the path is within a capture radius of a nucleus.
"""

from __future__ import annotations

import itertools

import numpy as np

_KIND = {0: "nuclear_or_nna", 1: "bond", 2: "ring", 3: "cage"}


class AnalyticDensity:
    """rho, grad rho and Hessian of a PySCF density matrix, analytically."""

    def __init__(self, mol, dm):
        self.mol = mol
        self.dm = np.asarray(dm)

    def evaluate(self, pts):
        pts = np.atleast_2d(np.asarray(pts, dtype=float))
        ao = self.mol.eval_gto("GTOval_sph_deriv2", pts)   # (10, N, nao)
        d = self.dm
        phi = ao[0]
        dphi = ao[1:4]
        dd = ao[4:10]
        phid = phi @ d                                        # (N, nao)
        rho = np.einsum("pi,pi->p", phid, phi)
        grad = 2.0 * np.einsum("pi,api->pa", phid, dphi)
        dphid = np.einsum("api,ij->apj", dphi, d)
        first = 2.0 * np.einsum("api,bpi->pab", dphid, dphi)
        second = np.empty_like(first)
        idx = {(0, 0): 0, (0, 1): 1, (0, 2): 2, (1, 1): 3, (1, 2): 4, (2, 2): 5}
        for (a, b), k in idx.items():
            val = 2.0 * np.einsum("pi,pi->p", phid, dd[k])
            second[:, a, b] = val
            second[:, b, a] = val
        return rho, grad, first + second


def _newton(field, x, *, maxiter=60, cap=0.3, gtol=1e-10):
    """Capped Newton steps on grad rho = 0; converged points leave the active set."""
    x = x.copy()
    active = np.ones(len(x), bool)
    for _ in range(maxiter):
        if not active.any():
            break
        rho, g, h = field.evaluate(x[active])
        w, v = np.linalg.eigh(h)
        gl = np.einsum("pai,pa->pi", v, g)
        step_l = -gl / np.where(np.abs(w) < 1e-12, 1e-12, w)
        step = np.einsum("pai,pi->pa", v, step_l)
        n = np.linalg.norm(step, axis=1, keepdims=True)
        step = np.where(n > cap, step * cap / np.maximum(n, 1e-300), step)
        idx = np.flatnonzero(active)
        x[idx] += step
        done = (np.linalg.norm(g, axis=1) < gtol) | (rho < 1e-6)
        active[idx[done]] = False
    rho, g, h = field.evaluate(x)
    return x, rho, g, h


def critical_points(field, positions, *, lattice=0.6, pad=2.0, rho_min=1e-4,
                    nuclear_radius=0.0, seed_nuclei=False):
    """Non-nuclear critical points of the analytic density.

    With `seed_nuclei` Newton also starts at every nucleus, which finds the
    off-nucleus maxima of light atoms in a cusp-free density.

    Returns a list of dicts ``{"kind", "position", "rho", "eigenvalues",
    "eigenvectors"}``; nuclear attractors are the nuclei and not listed.
    """
    pos = np.asarray(positions, dtype=float)
    seeds = [0.5 * (pos[i] + pos[j]) for i, j in itertools.combinations(range(len(pos)), 2)]
    seeds += [pos[list(c)].mean(axis=0) for c in itertools.combinations(range(len(pos)), 3)]
    lo, hi = pos.min(axis=0) - pad, pos.max(axis=0) + pad
    axes = [np.arange(lo[a], hi[a] + 1e-9, lattice) for a in range(3)]
    grid = np.stack(np.meshgrid(*axes, indexing="ij"), axis=-1).reshape(-1, 3)
    x0 = np.vstack([np.array(seeds).reshape(-1, 3), grid] + ([pos] if seed_nuclei else []))
    x0 = x0[field.evaluate(x0)[0] > 10 * rho_min]
    x, rho, g, h = _newton(field, x0)
    ok = (np.linalg.norm(g, axis=1) < 1e-8) & (rho > rho_min)
    dn = np.linalg.norm(x[:, None, :] - pos[None, :, :], axis=2).min(axis=1)
    ok &= dn >= nuclear_radius
    found = []
    for i in np.flatnonzero(ok):
        if any(np.linalg.norm(x[i] - f["position"]) < 1e-4 for f in found):
            continue
        w, v = np.linalg.eigh(h[i])
        if np.min(np.abs(w)) < 1e-8:
            continue
        kind = _KIND[int(np.sum(w > 0))]
        found.append({"kind": "non_nuclear" if kind == "nuclear_or_nna" else kind,
                      "position": x[i], "rho": float(rho[i]), "eigenvalues": w,
                      "eigenvectors": v.T})
    return found


def _ascend(field, x, targets, *, h=0.05, capture=0.1, max_steps=1000):
    """RK4 ascent of many paths at once; index of the target each reaches (or -1)."""
    x = np.array(x, dtype=float)
    out = np.full(len(x), -1)
    live = np.ones(len(x), bool)

    def f(y):
        g = field.evaluate(y)[1]
        return g / np.maximum(np.linalg.norm(g, axis=1, keepdims=True), 1e-300)

    for _ in range(max_steps):
        d = np.linalg.norm(x[:, None, :] - targets[None, :, :], axis=2)
        hit = live & (d.min(axis=1) < capture)
        out[hit] = np.argmin(d[hit], axis=1)
        live &= ~hit
        if not live.any():
            break
        y = x[live]
        k1 = f(y)
        k2 = f(y + 0.5 * h * k1)
        k3 = f(y + 0.5 * h * k2)
        k4 = f(y + h * k3)
        x[live] = y + h / 6.0 * (k1 + 2 * k2 + 2 * k3 + k4)
    return out


def molecular_graph(field, positions, *, eps=1e-3, attach=0.4, seed_nuclei=False):
    """Reference molecular graph of one frame.

    A Gaussian-basis density has no nuclear cusp, so its maximum near a
    nucleus may sit slightly off it: a maximum within `attach` bohr of a
    nucleus is that nucleus' attractor; others are non-nuclear attractors.

    Returns
    -------
    dict
        ``bonds`` (sorted list of sorted atom pairs, 1-based; non-nuclear
        attractors as ``"nna<k>"``, open ends None), ``counts`` per kind,
        ``poincare_hopf`` (n - b + r - c) and ``cps`` (the critical points).
    `seed_nuclei`: see :func:`critical_points`.
    """
    pos = np.asarray(positions, dtype=float)
    cps = []
    maxima_near = {}
    for cp in critical_points(field, pos, seed_nuclei=seed_nuclei):
        if cp["kind"] == "non_nuclear":
            d = np.linalg.norm(pos - cp["position"], axis=1)
            if d.min() < attach:
                maxima_near[int(np.argmin(d))] = cp["position"]
                continue
        cps.append(cp)
    nnas = [cp for cp in cps if cp["kind"] == "non_nuclear"]
    nuc = np.array([maxima_near.get(i, pos[i]) for i in range(len(pos))])
    targets = np.vstack([nuc] + [cp["position"][None] for cp in nnas])
    labels = list(range(1, len(pos) + 1)) + [f"nna{k + 1}" for k in range(len(nnas))]
    bond_cps = [cp for cp in cps if cp["kind"] == "bond"]
    starts = [cp["position"] + s * eps * cp["eigenvectors"][2] for cp in bond_cps for s in (1, -1)]
    ends = _ascend(field, np.array(starts).reshape(-1, 3), targets) if starts else []
    bonds = []
    for i in range(len(bond_cps)):
        pair = [None if e < 0 else labels[e] for e in ends[2 * i: 2 * i + 2]]
        bonds.append(tuple(sorted(pair, key=str)))
    counts = {k: sum(cp["kind"] == k for cp in cps) for k in ("non_nuclear", "bond", "ring", "cage")}
    ph = len(pos) + counts["non_nuclear"] - counts["bond"] + counts["ring"] - counts["cage"]
    return {"bonds": sorted(bonds, key=str), "counts": counts, "poincare_hopf": ph, "cps": cps}


def expected_changes(values, graphs):
    """Changes derived from the reference graphs alone (ascending values)."""
    out = []
    for k in range(len(values) - 1):
        a, b = graphs[k], graphs[k + 1]
        key = lambda g: (g["bonds"], g["counts"]["ring"], g["counts"]["cage"],
                         g["counts"]["non_nuclear"])
        if key(a) == key(b):
            continue
        broken = sorted(set(a["bonds"]) - set(b["bonds"]))
        formed = sorted(set(b["bonds"]) - set(a["bonds"]))
        out.append({"between": [k, k + 1], "bracket": [values[k], values[k + 1]],
                    "broken": broken, "formed": formed,
                    "rings": b["counts"]["ring"] - a["counts"]["ring"]})
    return out


def found_changes(scan):
    """The same summary of the changes in a scan.json dict."""
    out = []
    for c in scan["changes"]:
        broken = sorted(tuple(e["atoms"]) for e in c["events"] if e["kind"] == "bond_broken")
        formed = sorted(tuple(e["atoms"]) for e in c["events"] if e["kind"] == "bond_formed")
        for e in c["events"]:
            if e["kind"] == "bond_switched":
                broken.append(tuple(e["atoms_before"]))
                formed.append(tuple(e["atoms_after"]))
        rings = sum(e["kind"] == "ring_formed" for e in c["events"]) - \
            sum(e["kind"] == "ring_lost" for e in c["events"])
        out.append({"between": c["between"], "bracket": c["bracket"], "broken": sorted(broken),
                    "formed": sorted(formed), "rings": rings})
    return out


def scf_density_grid(atoms, *, basis, spacing, margin=3.0, charge=0, digits=None):
    """RHF density of a small molecule, sampled on a box grid as a DensityGrid.

    Parameters
    ----------
    atoms : list of (symbol, (x, y, z)) in bohr
    basis : str
    spacing, margin : float, bohr (the box of ``trackscan.promolecule.grid_box``)
    charge : int
    digits : int, optional
        Round each value to this many digits after the point in ``%e``
        notation, as a cube file prints them (5 is customary).

    Returns
    -------
    mol, dm, grid
        The PySCF molecule, its converged density matrix, the sampled grid.
    """
    from pyscf import gto, scf

    from trackscan.grid import DensityGrid
    from trackscan.promolecule import grid_box

    mol = gto.M(atom=[(s, tuple(float(x) for x in p)) for s, p in atoms], basis=basis,
                charge=charge, unit="Bohr", verbose=0)
    mf = scf.RHF(mol)
    mf.conv_tol = 1e-10
    mf.kernel()
    assert mf.converged
    dm = mf.make_rdm1()
    pos = mol.atom_coords()
    origin, axes, shape = grid_box(pos, spacing=spacing, margin=margin)
    pts = origin + np.indices(shape).reshape(3, -1).T @ axes
    ao = mol.eval_gto("GTOval_sph", pts)
    rho = np.einsum("pi,ij,pj->p", ao, dm, ao).reshape(shape)
    if digits is not None:
        rho = np.array([float(f"{v:.{digits}e}") for v in rho.ravel()]).reshape(shape)
    z = mol.atom_charges()
    return mol, dm, DensityGrid(rho, origin, axes, z, z.astype(float), pos)

