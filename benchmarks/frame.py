"""Speed of the single-frame analysis, as a ratio to parsing the same cube.

Writes cubes of cyclopropanol (10 atoms) at 80^3, 120^3 and 200^3 points on
the same box (built-in promolecular density, or RHF/6-31G* with PySCF's cube
writer with ``--pyscf``), and of two 60-atom molecules at 0.15 bohr (the
built-in model): the C60 cage (142^3; its cage CP lies below the density
floor) and decacene C42H24 (66 atoms, ten fused rings in a row, 384 x 117 x
55), in a temporary folder, or uses the cubes given on the command line,
then times, alternating, best of a few repetitions:

- parse: ``read_cube`` alone;
- full: ``read_cube`` + ``analyze_frame`` (field fit, critical points, bond
  paths, rings and cages, molecular graph).

Prints a table: atoms, grid, CPs found (n, b, r, c and Poincare-Hopf),
parse and full seconds, full / parse (target <= 3 for every cube), seconds
per stage (field fit, critical points, paths), and the time per grid point
of the full analysis and of the analysis alone (full - parse).  Below it:
the per-point analysis time at the largest cyclopropanol grid over that at
the smallest (target <= 1: flat in the grid size), and of each 60-atom
molecule over cyclopropanol at 120^3 (flat in the number of atoms: it may
grow with the number of CPs, not with atoms^2).

Usage::

    python benchmarks/frame.py [CUBE ...] [--sizes 80 120 200] [--big c60 acene]
                               [--repeat N] [--pyscf]
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

from molecules import BIG_MOLECULES, make_cube, spaced_cube  # noqa: E402

from trackscan.io.cube import read_cube  # noqa: E402
from trackscan.topology import analyze_frame  # noqa: E402


def measure(path: Path, repeat: int):
    """Best parse and parse + analysis times of one cube, and the result."""
    parse, full = [], []
    topo = None
    for _ in range(repeat):
        t0 = time.perf_counter()
        read_cube(path)
        parse.append(time.perf_counter() - t0)
        t0 = time.perf_counter()
        topo = analyze_frame(read_cube(path))
        full.append(time.perf_counter() - t0)
    return min(parse), min(full), topo


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("cubes", nargs="*", help="cube files (default: build one per size)")
    ap.add_argument("--sizes", type=int, nargs="+", default=[80, 120, 200])
    ap.add_argument("--big", nargs="*", default=list(BIG_MOLECULES),
                    choices=list(BIG_MOLECULES), help="60-atom molecules at 0.15 bohr")
    ap.add_argument("--repeat", type=int, default=3, help="repetitions below 150^3 (default 3)")
    ap.add_argument("--pyscf", action="store_true", help="RHF/6-31G* densities (slow to build)")
    args = ap.parse_args(argv)
    kind = "pyscf" if args.pyscf else "promolecule"
    rows = []
    with tempfile.TemporaryDirectory() as tmp:
        if args.cubes:
            cases = [(Path(c).name, Path(c)) for c in args.cubes]
        else:
            cases = []
            for n in args.sizes:
                t0 = time.perf_counter()
                path = make_cube(Path(tmp) / f"cyclopropanol_{n}.cube", n, kind=kind)
                cases.append((f"cyclopropanol {n}^3", path))
                print(f"built {path.name} ({kind}) in {time.perf_counter() - t0:.1f} s",
                      flush=True)
            for name in args.big:
                t0 = time.perf_counter()
                geometry, _ = BIG_MOLECULES[name]
                path = spaced_cube(Path(tmp) / f"{name}.cube", geometry(), 0.15)
                cases.append((name, path))
                print(f"built {path.name} (promolecule, 0.15 bohr) in "
                      f"{time.perf_counter() - t0:.1f} s", flush=True)
        for label, path in cases:
            grid = read_cube(path)
            shape, n_atoms = grid.shape, grid.n_atoms
            del grid
            npts = shape[0] * shape[1] * shape[2]
            repeat = args.repeat if npts < 150 ** 3 else max(1, min(args.repeat, 2))
            t_parse, t_full, topo = measure(path, repeat)
            rows.append((label, n_atoms, shape, npts, t_parse, t_full, topo))
            c = {k: v for k, v in topo.counts.items() if v}
            print(f"{label}: found {c}, Poincare-Hopf "
                  f"{'holds' if topo.poincare_hopf['holds'] else 'FAILS'}; stages (s) "
                  + ", ".join(f"{k} {v:.3f}" for k, v in topo.timings.items()), flush=True)
    print()
    print(f"{'molecule':<20} {'atoms':>5} {'grid':>12} {'n/b/r/c':>14} {'PH':>5} {'parse s':>7} "
          f"{'full s':>7} {'full/parse':>10} {'target':>9} {'field s':>7} {'CPs s':>6} "
          f"{'paths s':>7} {'full us/pt':>10} {'anal. us/pt':>11}")
    for label, n_atoms, shape, npts, tp, tf, topo in rows:
        ok = "ok" if tf / tp <= 3 else "MISSED"
        c = topo.counts
        cps = f"{c['nuclear'] + c['non_nuclear']}/{c['bond']}/{c['ring']}/{c['cage']}"
        t = topo.timings
        print(f"{label:<20} {n_atoms:5d} {'x'.join(map(str, shape)):>12} {cps:>14} "
              f"{'ok' if topo.poincare_hopf['holds'] else 'FAIL':>5} {tp:7.3f} {tf:7.3f} "
              f"{tf / tp:10.2f} {'<= 3 ' + ok:>9} {t.get('field', 0):7.3f} "
              f"{t.get('critical_points', 0):6.3f} {t.get('paths', 0):7.3f} "
              f"{1e6 * tf / npts:10.3f} {1e6 * (tf - tp) / npts:11.3f}")
    small = [r for r in rows if r[0].startswith("cyclopropanol")]
    if len(small) > 1:
        (_, _, _, n0, p0, f0, _), (_, _, _, n1, p1, f1, _) = small[0], small[-1]
        print(f"per-point time, largest / smallest cyclopropanol grid: full "
              f"{(f1 / n1) / (f0 / n0):.2f}, analysis {((f1 - p1) / n1) / ((f0 - p0) / n0):.2f} "
              f"(target <= 1)")
    ref = next((r for r in small if r[2] == (120, 120, 120)), small[0] if small else None)
    for label, n_atoms, _, npts, tp, tf, topo in rows:
        if ref is None or label.startswith("cyclopropanol") or not args.big:
            continue
        per = (tf - tp) / npts / ((ref[5] - ref[4]) / ref[3])
        ncp = len(topo.critical_points) / len(ref[6].critical_points)
        print(f"per-point analysis time, {label} ({n_atoms} atoms) / {ref[0]} ({ref[1]} atoms): "
              f"{per:.2f} (atoms x{n_atoms / ref[1]:.1f}, CPs x{ncp:.1f})")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
