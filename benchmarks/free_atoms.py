"""The free-atom model of every element H-Rn against PySCF's atomic Hartree-Fock.

For each Z = 1-86 the spherically averaged restricted atomic HF density
(``pyscf.scf.atom_hf.get_atm_nrhf``: fractional occupations averaged over
each open shell, so the density is spherical) is computed in an all-electron
basis (Jorge's DZP, ``dzp`` in PySCF; ANO-RCC, ``ano``, for Ce-Lu, which DZP
lacks: about a minute per atom, skipped with ``--quick``) and compared on a
logarithmic radial grid with :class:`trackscan.promolecule.Promolecule`
(Clementi-Raimondi for H-Ar, Slater's rules beyond).  Printed per element:

- ``N - Z``: the model's electron count minus Z (its normalisation);
- ``L1``: the electrons the model puts in the wrong place,
  ``0.5 * integral |rho_model - rho_HF| 4 pi r^2 dr`` (per cent of Z);
- ``L1 core``: the same within r < 0.5 bohr, in per cent of the HF
  electrons there (the region the grid field subtracts and smooths);
- ``rho ratio`` at 0.5, 1 and 2 bohr (model / HF);
- ``mono``: whether the model density falls monotonically with r (a
  model with a bump would put critical points into a restored core).

Usage::

    python benchmarks/free_atoms.py [--quick] [--z 35 46 53]
"""

from __future__ import annotations

import argparse
import time
import warnings

import numpy as np


def hf_density(z: int, basis: str):
    """Radial grid r (bohr) and the spherical atomic HF density of element z on it."""
    from pyscf import gto
    from pyscf.data.elements import ELEMENTS
    from pyscf.scf import atom_hf

    el = ELEMENTS[z]
    mol = gto.Mole()
    mol.atom = f"{el} 0 0 0"
    mol.basis = basis
    mol.spin = z % 2
    mol.verbose = 0
    mol.build()
    _, _, c, occ = atom_hf.get_atm_nrhf(mol)[el]
    dm = (c * occ) @ c.T
    r = np.geomspace(1e-5, 25.0, 6000)
    pts = np.zeros((len(r), 3))
    pts[:, 2] = r
    ao = mol.eval_gto("GTOval_sph", pts)
    return r, np.einsum("pi,ij,pj->p", ao, dm, ao)


def compare(z: int, basis: str) -> dict:
    """Error measures of the model atom `z` against atomic HF."""
    from trackscan.promolecule import Promolecule

    r, ref = hf_density(z, basis)
    pts = np.zeros((len(r), 3))
    pts[:, 0] = r
    model = Promolecule([z], [[0.0, 0.0, 0.0]]).value(pts)
    w = 4.0 * np.pi * r * r
    diff = np.abs(model - ref) * w
    core = r < 0.5
    at = {x: float(np.interp(x, r, model) / np.interp(x, r, ref)) for x in (0.5, 1.0, 2.0)}
    return {"z": z, "basis": basis, "n_minus_z": float(np.trapezoid(model * w, r)) - z,
            "n_hf": float(np.trapezoid(ref * w, r)),
            "l1": 50.0 * float(np.trapezoid(diff, r)) / z,
            "l1_core": 50.0 * float(np.trapezoid(diff[core], r[core]))
            / float(np.trapezoid((ref * w)[core], r[core])),
            "ratio": at, "monotonic": bool(np.all(np.diff(model) <= 0.0))}


def main(argv=None) -> int:
    from trackscan.elements import symbol

    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="skip Ce-Lu (ANO-RCC is slow)")
    ap.add_argument("--z", type=int, nargs="*", default=None, help="only these elements")
    args = ap.parse_args(argv)
    warnings.filterwarnings("ignore")
    zs = args.z or list(range(1, 87))
    print(f"{'el':>3} {'Z':>3} {'basis':>5} {'N-Z':>9} {'L1 %':>6} {'core %':>7} "
          f"{'r0.5':>6} {'r1':>6} {'r2':>6} mono  s")
    rows = []
    for z in zs:
        basis = "ano" if 58 <= z <= 71 else "dzp"
        if basis == "ano" and args.quick:
            continue
        t = time.perf_counter()
        c = compare(z, basis)
        rows.append(c)
        a = c["ratio"]
        print(f"{symbol(z):>3} {z:3d} {basis:>5} {c['n_minus_z']:9.1e} {c['l1']:6.2f} "
              f"{c['l1_core']:7.2f} {a[0.5]:6.3f} {a[1.0]:6.3f} {a[2.0]:6.3f} "
              f"{'yes' if c['monotonic'] else 'NO':>4} {time.perf_counter() - t:4.1f}",
              flush=True)
    for lo, hi, name in ((1, 18, "H-Ar (Clementi-Raimondi)"), (19, 86, "K-Rn (Slater's rules)")):
        sel = [c for c in rows if lo <= c["z"] <= hi]
        if sel:
            worst = max(sel, key=lambda c: c["l1"])
            print(f"{name}: {len(sel)} atoms, L1 median {np.median([c['l1'] for c in sel]):.2f} %, "
                  f"worst {worst['l1']:.2f} % ({symbol(worst['z'])}); core L1 median "
                  f"{np.median([c['l1_core'] for c in sel]):.2f} %; max |N - Z| "
                  f"{max(abs(c['n_minus_z']) for c in sel):.1e}; non-monotonic: "
                  f"{[symbol(c['z']) for c in sel if not c['monotonic']]}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
