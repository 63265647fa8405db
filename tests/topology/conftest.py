"""Shared PySCF references for the topology tests (session-scoped, computed once).

Each case is an RHF/6-31G* calculation.  The reference critical points come
from PySCF's analytic density and its analytic first and second derivatives
(``mol.eval_gto('GTOval_sph_deriv2')`` contracted with the density matrix),
located by a Newton search written here, independently of trackscan's grid
code.  The cubes are written by ``pyscf.tools.cubegen`` and read back with
``trackscan.io.cube.read_cube``, cached in a session temporary directory.
"""

from __future__ import annotations

import math

import numpy as np
import pytest


def _water():
    # experimental geometry: r(OH) 0.9572 A, angle 104.52 deg
    r, a = 0.9572, math.radians(104.52)
    return [("O", (0.0, 0.0, 0.0)),
            ("H", (r * math.sin(a / 2), 0.0, r * math.cos(a / 2))),
            ("H", (-r * math.sin(a / 2), 0.0, r * math.cos(a / 2)))]


def _cyclopropane():
    # r(CC) 1.510, r(CH) 1.089 A, angle HCH 115.1 deg (D3h)
    rcc, rch, hch = 1.510, 1.089, math.radians(115.1)
    rc = rcc / math.sqrt(3.0)
    atoms, hs = [], []
    for k in range(3):
        phi = 2 * math.pi * k / 3
        u = np.array([math.cos(phi), math.sin(phi), 0.0])
        atoms.append(("C", tuple(rc * u)))
        for s in (1.0, -1.0):
            hs.append(("H", tuple(rc * u + rch * (math.cos(hch / 2) * u
                                                  + math.sin(hch / 2) * np.array([0, 0, s])))))
    return atoms + hs


def _water_dimer():
    # a near-equilibrium hydrogen-bonded water dimer (Cs), in angstrom
    # [from memory: a common MP2-level geometry; O...O 2.91 A, H...O 1.95 A]
    return [("O", (-1.551007, -0.114520, 0.000000)),
            ("H", (-1.934259, 0.762503, 0.000000)),
            ("H", (-0.599677, 0.040712, 0.000000)),
            ("O", (1.350625, 0.111469, 0.000000)),
            ("H", (1.680398, -0.373741, -0.758561)),
            ("H", (1.680398, -0.373741, 0.758561))]


def _ethane():
    # staggered, r(CC) 1.536, r(CH) 1.091 A, angle HCC 110.9 deg
    rcc, rch, hcc = 1.536, 1.091, math.radians(110.9)
    atoms = [("C", (0.0, 0.0, rcc / 2)), ("C", (0.0, 0.0, -rcc / 2))]
    for c, sgn, off in ((0, 1.0, 0.0), (1, -1.0, math.pi / 3)):
        z0 = sgn * rcc / 2
        for k in range(3):
            phi = off + 2 * math.pi * k / 3
            rho = rch * math.sin(hcc)
            atoms.append(("H", (rho * math.cos(phi), rho * math.sin(phi),
                                z0 - sgn * rch * math.cos(hcc))))
    return atoms


def _ethylene():
    # r(CC) 1.339, r(CH) 1.086 A, angle HCH 117.6 deg
    rcc, rch, hch = 1.339, 1.086, math.radians(117.6)
    atoms = [("C", (0.0, 0.0, rcc / 2)), ("C", (0.0, 0.0, -rcc / 2))]
    for sgn in (1.0, -1.0):
        for s in (1.0, -1.0):
            atoms.append(("H", (s * rch * math.sin(hch / 2), 0.0,
                                sgn * (rcc / 2 + rch * math.cos(hch / 2)))))
    return atoms


GEOMETRIES = {"water": _water, "cyclopropane": _cyclopropane, "water_dimer": _water_dimer,
              "ethane": _ethane, "ethylene": _ethylene}

# a small off-centre shift so the grid is not aligned with the molecule's symmetry
_SHIFT = np.array([0.0137, -0.0291, 0.0213])


class AnalyticDensity:
    """PySCF's analytic density with analytic gradient and Hessian (reference)."""

    def __init__(self, mol, dm):
        self.mol = mol
        self.dm = dm

    def evaluate(self, points, order=2):
        pts = np.asarray(points, dtype=float).reshape(-1, 3)
        out_v = np.empty(len(pts))
        out_g = np.empty((len(pts), 3))
        out_h = np.empty((len(pts), 3, 3))
        for lo in range(0, len(pts), 4000):
            p = pts[lo:lo + 4000]
            ao = self.mol.eval_gto("GTOval_sph_deriv2", p)       # (10, n, nao)
            c0 = ao[0] @ self.dm
            out_v[lo:lo + 4000] = np.einsum("pi,pi->p", c0, ao[0])
            for a in range(3):
                out_g[lo:lo + 4000, a] = 2.0 * np.einsum("pi,pi->p", c0, ao[1 + a])
            ca = [ao[1 + a] @ self.dm for a in range(3)]
            # second derivatives: xx, xy, xz, yy, yz, zz at indices 4..9
            pair = {(0, 0): 4, (0, 1): 5, (0, 2): 6, (1, 1): 7, (1, 2): 8, (2, 2): 9}
            for (a, b), k in pair.items():
                h = 2.0 * (np.einsum("pi,pi->p", ca[a], ao[1 + b])
                           + np.einsum("pi,pi->p", c0, ao[k]))
                out_h[lo:lo + 4000, a, b] = h
                out_h[lo:lo + 4000, b, a] = h
        return (out_v, out_g, out_h)[: order + 1]


def reference_critical_points(field, coords, lo, hi):
    """All non-nuclear CPs of the analytic density inside the box [lo, hi] (bohr).

    Seeds: atom-pair midpoints, triple centroids and the nodes of a 0.3 bohr
    lattice that are local minima of |grad rho| among their 26 neighbours.
    Newton with a 0.2 bohr step cap; converged at |grad rho| < 1e-10.
    Returns a list of dicts: kind, position, rho, laplacian, eigenvalues.
    """
    n = len(coords)
    seeds = [0.5 * (coords[i] + coords[j]) for i in range(n) for j in range(i + 1, n)]
    seeds += [(coords[i] + coords[j] + coords[k]) / 3 for i in range(n)
              for j in range(i + 1, n) for k in range(j + 1, n)]
    axes = [np.arange(a, b, 0.3) for a, b in zip(lo, hi)]
    mesh = np.stack(np.meshgrid(*axes, indexing="ij"), -1)
    v, g = field.evaluate(mesh.reshape(-1, 3), 1)
    gn = np.linalg.norm(g, axis=1).reshape(mesh.shape[:3])
    vv = v.reshape(mesh.shape[:3])
    from scipy.ndimage import minimum_filter
    mins = (gn == minimum_filter(gn, size=3, mode="nearest")) & (vv > 1e-4)
    seeds += list(mesh[mins])
    x = np.array(seeds)
    ok = np.ones(len(x), bool)
    for _ in range(60):
        v, g, h = field.evaluate(x[ok], 2)
        step = -np.linalg.solve(h, g[..., None])[..., 0]
        ln = np.linalg.norm(step, axis=1)
        step *= np.minimum(1.0, 0.2 / np.maximum(ln, 1e-300))[:, None]
        xi = x[ok] + step
        x[ok] = xi
        if np.all(np.linalg.norm(g, axis=1) < 1e-10):
            break
    v, g, h = field.evaluate(x, 2)
    good = (np.linalg.norm(g, axis=1) < 1e-9) & (v > 1e-4) & np.all((x > lo) & (x < hi), axis=1)
    dn = np.min(np.linalg.norm(x[:, None] - coords[None], axis=-1), axis=1)
    good &= dn > 0.2
    out = []
    for xi, vi, hi_ in zip(x[good], v[good], h[good]):
        if any(np.linalg.norm(xi - o["position"]) < 1e-4 for o in out):
            continue
        lam = np.linalg.eigvalsh(hi_)
        sig = int(np.sum(np.sign(lam)))
        kind = {-3: "non_nuclear", -1: "bond", 1: "ring", 3: "cage"}[sig]
        out.append({"kind": kind, "position": xi, "rho": float(vi), "laplacian": float(lam.sum()),
                    "eigenvalues": lam})
    return out


class Case:
    """One molecule: SCF, analytic field, reference CPs and cached cubes."""

    def __init__(self, name, tmpdir):
        from pyscf import gto, scf

        atoms = GEOMETRIES[name]()
        atoms = [(s, tuple(np.asarray(p) + _SHIFT)) for s, p in atoms]
        self.name = name
        self.mol = gto.M(atom=atoms, basis="6-31g*", unit="Angstrom", verbose=0)
        mf = scf.RHF(self.mol)
        mf.conv_tol = 1e-10
        mf.kernel()
        assert mf.converged
        self.dm = mf.make_rdm1()
        self.field = AnalyticDensity(self.mol, self.dm)
        self.coords = self.mol.atom_coords()
        self.tmpdir = tmpdir
        self._cubes = {}
        self._reference = None

    def cube(self, spacing, margin=3.0):
        key = (spacing, margin)
        if key not in self._cubes:
            from pyscf.tools import cubegen

            path = self.tmpdir / f"{self.name}_{spacing:g}_{margin:g}.cube"
            cubegen.density(self.mol, str(path), self.dm, resolution=spacing, margin=margin)
            self._cubes[key] = path
        return self._cubes[key]

    def reference(self):
        if self._reference is None:
            lo = self.coords.min(axis=0) - 2.5
            hi = self.coords.max(axis=0) + 2.5
            self._reference = reference_critical_points(self.field, self.coords, lo, hi)
        return self._reference


@pytest.fixture(scope="session")
def pyscf_case(tmp_path_factory):
    """Factory: ``pyscf_case(name)`` gives the cached :class:`Case`."""
    pytest.importorskip("pyscf")
    tmp = tmp_path_factory.mktemp("pyscf_cubes")
    cache = {}

    def get(name):
        if name not in cache:
            cache[name] = Case(name, tmp)
        return cache[name]

    return get
