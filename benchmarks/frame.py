"""Speed of the single-frame analysis, as a ratio to parsing the same cube.

Builds a 120^3 cube of cyclopropanol (10 atoms, RHF/6-31G* with PySCF's
cube writer) in a temporary folder, or uses the cube given on the command
line, then times

- parse: ``read_cube`` alone;
- full: ``read_cube`` + ``analyze_frame`` (field fit, critical points, bond
  paths, rings and cages, molecular graph),

each the best of a few repetitions, and prints full / parse.  Target: <= 3.

Usage::

    python benchmarks/frame.py [FILE.cube] [--repeat N]
"""

from __future__ import annotations

import argparse
import math
import tempfile
import time
from pathlib import Path

import numpy as np

from trackscan.io.cube import read_cube
from trackscan.topology import analyze_frame


def cyclopropanol():
    """Cyclopropane (r(CC) 1.51, r(CH) 1.089 A) with one H replaced by OH."""
    rcc, rch, hch = 1.510, 1.089, math.radians(115.1)
    rc = rcc / math.sqrt(3.0)
    atoms = []
    for k in range(3):
        phi = 2 * math.pi * k / 3
        atoms.append(("C", rc * np.array([math.cos(phi), math.sin(phi), 0.0])))
    for k in range(3):
        phi = 2 * math.pi * k / 3
        u = np.array([math.cos(phi), math.sin(phi), 0.0])
        for s in (1.0, -1.0):
            d = math.cos(hch / 2) * u + math.sin(hch / 2) * np.array([0, 0, s])
            if k == 0 and s > 0:
                o = atoms[0][1] + 1.42 * d
                perp = np.cross(d, [0.0, 1.0, 0.0])
                perp /= np.linalg.norm(perp)
                h = o + 0.96 * (math.cos(math.radians(71)) * d + math.sin(math.radians(71)) * perp)
                atoms += [("O", o), ("H", h)]
            else:
                atoms.append(("H", atoms[k][1] + rch * d))
    return [(s, tuple(p)) for s, p in atoms]


def make_cube(path: Path, n: int = 120) -> Path:
    from pyscf import gto, scf
    from pyscf.tools import cubegen

    mol = gto.M(atom=cyclopropanol(), basis="6-31g*", unit="Angstrom", verbose=0)
    mf = scf.RHF(mol).run()
    cubegen.density(mol, str(path), mf.make_rdm1(), nx=n, ny=n, nz=n, margin=3.0)
    return path


def best(fn, repeat):
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t0)
    return min(times), out


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("cube", nargs="?", help="cube file (default: build a 120^3 one)")
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args(argv)
    with tempfile.TemporaryDirectory() as tmp:
        if args.cube:
            path = Path(args.cube)
        else:
            t0 = time.perf_counter()
            path = make_cube(Path(tmp) / "cyclopropanol_120.cube")
            print(f"built {path.name} in {time.perf_counter() - t0:.1f} s")
        t_parse, grid = best(lambda: read_cube(path), args.repeat)
        t_full, topo = best(lambda: analyze_frame(read_cube(path)), args.repeat)
    c = topo.counts
    print(f"grid {grid.shape}, {grid.n_atoms} atoms, spacing {grid.spacing.round(4).tolist()} bohr")
    print(f"found: {c}; Poincare-Hopf {topo.poincare_hopf}")
    print("stages (s): " + ", ".join(f"{k} {v:.3f}" for k, v in topo.timings.items()))
    print(f"parse {t_parse:.3f} s, parse + analysis {t_full:.3f} s, "
          f"ratio {t_full / t_parse:.2f} (target <= 3)")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
