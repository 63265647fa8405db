"""Parallel speed-up of a scan: ``--jobs 2`` vs ``--jobs 1`` on the same frames.

Writes a scan of 16 cyclopropanol frames (C1-O stretched by 0.02 Å per
frame, built-in promolecular density, n^3 points each) in a temporary
folder, then runs the whole-scan analysis (``analyze_scan``: every frame
read and analysed, then tracked; no cache) with one job and with two,
alternating, and prints time(1 job) / time(2 jobs).  Target: >= 1.7 on two
cores.  It also checks that both give the same scan.json bytes.  Beside it,
it measures what two processes gain on the machine at that moment (two
pure-Python loops, serial vs parallel, before and after the scans): on
shared machines that is often well below 2, and the scan's speed-up is
best read against it.

Usage::

    python benchmarks/scan.py [--frames 16] [--n 120] [--jobs 2] [--rounds 1]
"""

from __future__ import annotations

import argparse
import difflib
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

from molecules import scan_folder  # noqa: E402

from trackscan.analysis import analyze_scan, dumps_scan  # noqa: E402
from trackscan.io.manifest import load_manifest  # noqa: E402


def _burn(n: int) -> float:
    """A pure-Python loop (no memory traffic); its duration."""
    t0 = time.perf_counter()
    s = 0
    for i in range(n):
        s += i * i
    return time.perf_counter() - t0


def machine_speedup(jobs: int, n: int = 4_000_000) -> float:
    """What `jobs` processes gain on this machine right now: `jobs` loops, serial / parallel."""
    from concurrent.futures import ProcessPoolExecutor

    from trackscan.analysis.runner import worker_context

    t0 = time.perf_counter()
    for _ in range(jobs):
        _burn(n)
    serial = time.perf_counter() - t0
    with ProcessPoolExecutor(jobs, mp_context=worker_context()) as pool:
        list(pool.map(_burn, [1000] * jobs))          # start the workers first
        t0 = time.perf_counter()
        list(pool.map(_burn, [n] * jobs))
        parallel = time.perf_counter() - t0
    return serial / parallel


def timed(manifest, jobs):
    t0 = time.perf_counter()
    scan = analyze_scan(load_manifest(manifest), jobs=jobs)
    return time.perf_counter() - t0, dumps_scan(scan)


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--frames", type=int, default=16)
    ap.add_argument("--n", type=int, default=120, help="points per axis (default 120)")
    ap.add_argument("--jobs", type=int, default=2, help="parallel jobs to compare (default 2)")
    ap.add_argument("--rounds", type=int, default=1, help="alternations; best taken")
    args = ap.parse_args(argv)
    with tempfile.TemporaryDirectory() as tmp:
        t0 = time.perf_counter()
        manifest = scan_folder(Path(tmp), args.frames, args.n)
        print(f"built {args.frames} frames of {args.n}^3 in {time.perf_counter() - t0:.1f} s",
              flush=True)
        serial, parallel, machine = [], [], []
        for _ in range(args.rounds):
            machine.append(machine_speedup(args.jobs))
            t, one = timed(manifest, 1)
            serial.append(t)
            t, many = timed(manifest, args.jobs)
            parallel.append(t)
            machine.append(machine_speedup(args.jobs))
            if one != many:
                print("scan.json differs between --jobs 1 and --jobs", args.jobs)
                for line in list(difflib.unified_diff(one.splitlines(), many.splitlines(),
                                                      lineterm="", n=2))[:40]:
                    print(line)
                return 1
    t1, tp = min(serial), min(parallel)
    speedup = t1 / tp
    print(f"--jobs 1: {t1:.2f} s, --jobs {args.jobs}: {tp:.2f} s "
          f"({t1 / args.frames:.3f} vs {tp / args.frames:.3f} s per frame); same scan.json bytes")
    print(f"speed-up --jobs {args.jobs} / --jobs 1 = {speedup:.2f}  (target >= 1.7: "
          f"{'ok' if speedup >= 1.7 else 'MISSED'})")
    print(f"the machine's own speed-up for {args.jobs} pure-Python loops, measured around "
          f"the scans: " + ", ".join(f"{m:.2f}" for m in machine)
          + f"; the scan reaches {speedup / (sum(machine) / len(machine)):.0%} of it "
          "(below 2 means other work shares the cores)")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
