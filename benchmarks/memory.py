"""Peak memory of a single-frame analysis, against the grid's own bytes.

Writes a 200^3 cube of cyclopropanol (built-in promolecular density) in a
temporary folder, then runs, each in a fresh child process:

- baseline: the interpreter with trackscan and its dependencies imported;
- parse: ``read_cube`` alone;
- analysis: ``read_cube`` + ``analyze_frame`` (and, where Linux allows
  resetting the peak through ``/proc/self/clear_refs``, the peak of the
  analysis stage alone, with the grid already in memory).

Each child reports its peak resident memory (``VmHWM`` of
``/proc/self/status``; ``ru_maxrss`` where there is no /proc), and the
parent prints beside it the child's ``ru_maxrss`` from ``os.wait4`` (the
per-child figure behind ``RUSAGE_CHILDREN``).  Prints the
peaks, the grid's bytes (8 per point), the analysis peak as a multiple of
them, and the target: peak <= 4 x grid bytes + 300 MB (the 300 MB cover the
interpreter, numpy, scipy and the cube's text while it is parsed).

Usage::

    python benchmarks/memory.py [CUBE] [--n 200]
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

MB = 1024 * 1024

CHILD = r"""
import json, resource, sys
import trackscan.topology, trackscan.io.cube
from trackscan.io.cube import read_cube
from trackscan.topology import analyze_frame

def peak():
    try:
        with open("/proc/self/status") as fh:
            for line in fh:
                if line.startswith("VmHWM:"):
                    return int(line.split()[1]) * 1024
    except OSError:
        pass
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024

def reset_peak():
    # restart VmHWM from the current RSS (Linux >= 4.0); False if not possible
    try:
        with open("/proc/self/clear_refs", "w") as fh:
            fh.write("5")
        return True
    except OSError:
        return False

mode, path = sys.argv[1], sys.argv[2]
nbytes = 0
stage = None
if mode in ("parse", "analysis"):
    grid = read_cube(path)
    nbytes = grid.values.nbytes
    if mode == "analysis":
        whole = peak()
        if reset_peak():
            stage = "reset"
        topo = analyze_frame(grid)
        assert topo.poincare_hopf["holds"], topo.poincare_hopf
        if stage:
            stage = peak()
print(json.dumps({"peak": max(peak(), whole) if mode == "analysis" else peak(),
                  "grid_bytes": nbytes, "analysis_stage": stage}))
"""


def child(mode: str, path: Path) -> dict:
    """Run one measurement in a fresh interpreter; its report plus its ru_maxrss.

    ``os.wait4`` gives the resource usage of that one child (what
    ``RUSAGE_CHILDREN`` sums up over all of them).  This process stays small
    (the cube is built in another child), so the figure is the child's own.
    """
    proc = subprocess.Popen([sys.executable, "-c", CHILD, mode, str(path)],
                            stdout=subprocess.PIPE, text=True)
    out = proc.stdout.read()
    proc.stdout.close()
    _, status, usage = os.wait4(proc.pid, 0)
    proc.returncode = os.waitstatus_to_exitcode(status)
    if proc.returncode:
        raise SystemExit(f"{mode} child failed with exit code {proc.returncode}")
    rep = json.loads(out.strip().splitlines()[-1])
    rep["maxrss"] = usage.ru_maxrss * 1024
    return rep


def build(path: Path, n: int) -> None:
    """Write the benchmark cube in a child process (keeps this one small)."""
    code = ("import sys; sys.path.insert(0, sys.argv[1]); from molecules import make_cube; "
            "make_cube(sys.argv[2], int(sys.argv[3]))")
    subprocess.run([sys.executable, "-c", code, str(Path(__file__).resolve().parent),
                    str(path), str(n)], check=True)


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("cube", nargs="?", help="cube file (default: build one)")
    ap.add_argument("--n", type=int, default=200, help="points per axis (default 200)")
    args = ap.parse_args(argv)
    with tempfile.TemporaryDirectory() as tmp:
        if args.cube:
            path = Path(args.cube)
        else:
            t0 = time.perf_counter()
            path = Path(tmp) / f"cyclopropanol_{args.n}.cube"
            build(path, args.n)
            print(f"built {path.name} in {time.perf_counter() - t0:.1f} s", flush=True)
        size = path.stat().st_size
        rows = {mode: child(mode, path) for mode in ("baseline", "parse", "analysis")}
    grid = rows["analysis"]["grid_bytes"]
    base = rows["baseline"]["peak"]
    for mode, r in rows.items():
        note = ", counted from the reset" if r.get("analysis_stage") else ""
        print(f"{mode:>9}: peak {r['peak'] / MB:7.1f} MB (ru_maxrss of the child "
              f"{r['maxrss'] / MB:7.1f} MB{note})")
    peak = rows["analysis"]["peak"]
    limit = 4 * grid + 300 * MB
    print(f"grid {grid / MB:.1f} MB of values ({size / MB:.1f} MB of cube text)")
    print(f"analysis peak / grid bytes = {peak / grid:.2f} (above the baseline: "
          f"{(peak - base) / grid:.2f}); parse alone {rows['parse']['peak'] / grid:.2f}")
    st = rows["analysis"].get("analysis_stage")
    if st:
        print(f"peak while analyse_frame runs (the grid already read): {st / MB:.1f} MB = "
              f"baseline + {(st - base) / grid:.2f} x grid")
    print(f"peak {peak / MB:.1f} MB vs 4 x grid + 300 MB = {limit / MB:.1f} MB: "
          f"{'ok' if peak <= limit else 'MISSED'}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
