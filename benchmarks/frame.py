"""Speed of the single-frame analysis, as a ratio to parsing the same cube.

Writes cubes of cyclopropanol (10 atoms) at 80^3, 120^3 and 200^3 points on
the same box (built-in promolecular density, or RHF/6-31G* with PySCF's cube
writer with ``--pyscf``) in a temporary folder, or uses the cubes given on
the command line, then times, alternating, best of a few repetitions:

- parse: ``read_cube`` alone;
- full: ``read_cube`` + ``analyze_frame`` (field fit, critical points, bond
  paths, rings and cages, molecular graph).

Prints, per size, full / parse (target <= 3 at every size) and the time per
grid point of the full analysis and of the analysis alone (full - parse),
which must not grow with the grid; the last line gives the per-point time
at the largest size over that at the smallest (target <= 1, noise aside).

Usage::

    python benchmarks/frame.py [CUBE ...] [--sizes 80 120 200] [--repeat N] [--pyscf]
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

from molecules import make_cube  # noqa: E402

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
    ap.add_argument("--repeat", type=int, default=3, help="repetitions below 200^3 (default 3)")
    ap.add_argument("--pyscf", action="store_true", help="RHF/6-31G* densities (slow to build)")
    args = ap.parse_args(argv)
    kind = "pyscf" if args.pyscf else "promolecule"
    rows = []
    with tempfile.TemporaryDirectory() as tmp:
        if args.cubes:
            paths = [Path(c) for c in args.cubes]
        else:
            paths = []
            for n in args.sizes:
                t0 = time.perf_counter()
                paths.append(make_cube(Path(tmp) / f"cyclopropanol_{n}.cube", n, kind=kind))
                print(f"built {paths[-1].name} ({kind}) in {time.perf_counter() - t0:.1f} s",
                      flush=True)
        for path in paths:
            shape = read_cube(path).shape
            npts = shape[0] * shape[1] * shape[2]
            repeat = args.repeat if npts < 150 ** 3 else max(1, min(args.repeat, 2))
            t_parse, t_full, topo = measure(path, repeat)
            rows.append((shape, npts, t_parse, t_full, topo))
            c = {k: v for k, v in topo.counts.items() if v}
            print(f"{'x'.join(map(str, shape))}: found {c}, Poincare-Hopf "
                  f"{'holds' if topo.poincare_hopf['holds'] else 'FAILS'}; stages (s) "
                  + ", ".join(f"{k} {v:.3f}" for k, v in topo.timings.items()), flush=True)
    print()
    print(f"{'grid':>12} {'parse s':>8} {'full s':>8} {'full/parse':>10} {'target':>7} "
          f"{'full us/pt':>10} {'analysis us/pt':>14}")
    for shape, npts, tp, tf, _ in rows:
        ok = "ok" if tf / tp <= 3 else "MISSED"
        print(f"{'x'.join(map(str, shape)):>12} {tp:8.3f} {tf:8.3f} {tf / tp:10.2f} "
              f"{'<= 3 ' + ok:>7} {1e6 * tf / npts:10.3f} {1e6 * (tf - tp) / npts:14.3f}")
    if len(rows) > 1:
        (_, n0, p0, f0, _), (_, n1, p1, f1, _) = rows[0], rows[-1]
        print(f"per-point time, largest / smallest grid: full {(f1 / n1) / (f0 / n0):.2f}, "
              f"analysis {((f1 - p1) / n1) / ((f0 - p0) / n0):.2f} (target <= 1)")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
