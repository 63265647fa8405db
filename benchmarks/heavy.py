"""Heavy elements and ECP densities: cost of an ECP frame, and bond-CP errors.

1. Pd(C2H4) RHF, def2-SVP with the def2 ECP on Pd (28 core electrons
   removed) and the same complex all-electron (DZVP on Pd), written by
   PySCF's cube writer at the same spacing (0.1 bohr, margin 3 bohr: the
   same grid): best of a few alternating runs of ``read_cube`` +
   ``analyze_frame`` for each; prints both times, the ECP / all-electron
   ratio (target <= 1, noise aside) and the counts and bonded pairs of both.
2. CH3Br RHF/6-31G* at 0.0796 and 0.0803 bohr (the cube writer's grids of
   issue 12) and 0.12 bohr: the largest distance of a bond CP from the
   analytic density's (Newton on PySCF's analytic derivatives, as in the
   tests) with and without the core promolecule subtracted.

Usage::

    python benchmarks/heavy.py [--repeat 3] [--spacing 0.1]
"""

from __future__ import annotations

import argparse
import importlib.util
import sys
import tempfile
import time
import warnings
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))
_spec = importlib.util.spec_from_file_location(
    "heavy_tests", ROOT / "tests" / "topology" / "test_heavy_elements.py")


def _molecules():
    """The molecule builders of the heavy-element tests (one source of geometries)."""
    import pytest  # noqa: F401  (the test module imports it)

    mod = importlib.util.module_from_spec(_spec)
    _spec.loader.exec_module(mod)
    return mod


def _time(path, repeat):
    from trackscan.io.cube import read_cube
    from trackscan.topology import analyze_frame

    best, topo = np.inf, None
    for _ in range(repeat):
        t = time.perf_counter()
        topo = analyze_frame(read_cube(path))
        best = min(best, time.perf_counter() - t)
    return best, topo


def main(argv=None) -> int:
    from pyscf.tools import cubegen

    from trackscan.io.cube import read_cube
    from trackscan.settings import AnalysisSettings
    from trackscan.topology import analyze_frame

    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--spacing", type=float, default=0.1)
    args = ap.parse_args(argv)
    warnings.filterwarnings("ignore")
    mod = _molecules()
    with tempfile.TemporaryDirectory() as tmp:
        cubes = {}
        for name, kw in (("ecp", {"basis": "def2-svp", "ecp": {"Pd": "def2-svp"}}),
                         ("all-electron", {"basis": {"Pd": "dzvp", "C": "def2-svp",
                                                     "H": "def2-svp"}})):
            m = mod.Molecule(mod._pd_ethylene(), **kw)
            cubes[name] = Path(tmp) / f"pd_{name}.cube"
            cubegen.density(m.mol, str(cubes[name]), m.dm, resolution=args.spacing)
        times = {k: [] for k in cubes}
        topos = {}
        for _ in range(args.repeat):
            for k, p in cubes.items():
                t, topos[k] = _time(p, 1)
                times[k].append(t)
        shape = read_cube(cubes["ecp"]).shape
        print(f"Pd(C2H4), {shape[0]}x{shape[1]}x{shape[2]} points at {args.spacing:g} bohr")
        for k in cubes:
            topo = topos[k]
            pairs = sorted(tuple(bp.atoms) for bp in topo.bond_paths)
            print(f"  {k:<13} {min(times[k]):6.2f} s  counts {topo.counts}  PH "
                  f"{topo.poincare_hopf['value']}  pairs {pairs}")
        print(f"  ECP / all-electron time: {min(times['ecp']) / min(times['all-electron']):.2f}")

        m = mod.Molecule(mod._methyl("Br", 1.934), "6-31g*")
        reference = [cp for cp in mod.ref.critical_points(m.field, m.positions,
                                                          nuclear_radius=0.2)
                     if cp["kind"] == "bond"]
        print("CH3Br bond CPs: largest distance from the analytic ones (bohr), C-Br path")
        for h in (0.0796, 0.0803, 0.12):
            path = Path(tmp) / f"ch3br_{h}.cube"
            cubegen.density(m.mol, str(path), m.dm, resolution=h)
            grid = read_cube(path)
            row = []
            for sub in (True, False):
                topo = analyze_frame(grid, AnalysisSettings(subtract_promolecule=sub))
                err = max(min(np.linalg.norm(cp.position - r["position"]) for r in reference)
                          for cp in topo.by_kind("bond"))
                cbr = [bp for bp in topo.bond_paths if sorted(map(str, bp.atoms)) == ["1", "2"]]
                row.append(f"{'subtracted' if sub else 'not subtracted'} {err:.4f} "
                           f"C-Br {'closed' if cbr and cbr[0].complete else 'OPEN'}")
            print(f"  {h:g} bohr {grid.shape}: " + "; ".join(row))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
