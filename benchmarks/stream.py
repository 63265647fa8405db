"""Memory of a long scan: 200 frames at 80^3 never hold more than a few grids.

Writes a scan of `--frames` cyclopropanol cubes (n^3 points, built-in
promolecular density; 8 distinct cubes hard-linked in turn, so building is
cheap, but every frame is read and analysed), then runs the whole-scan
analysis (``analyze_scan``, `--jobs` processes, no cache) twice: on the
first 4 frames and on all of them.  A sampling thread adds up the resident
memory of this process and all its descendants (workers, fork server)
every 50 ms.  Prints, side by side, for the short and the long scan: the
peak of that sum, this process's own peak, and the growth from the short to
the long scan in units of one grid's bytes.  Target: the long scan's peak
exceeds the short scan's by at most a few grids (<= 4), whatever the
number of frames; the parent holds frame dicts only (about 0.03 grid each
here), never grids.  Linux only (/proc).

Usage::

    python benchmarks/stream.py [--frames 200] [--n 80] [--jobs 2]
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile
import threading
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

from molecules import scan_folder  # noqa: E402

from trackscan.analysis import analyze_scan, dumps_scan  # noqa: E402
from trackscan.io.manifest import load_manifest  # noqa: E402

MB = 1024 * 1024


def rss(pid: int) -> int:
    """Resident bytes of one process (0 if it is gone)."""
    try:
        with open(f"/proc/{pid}/status") as fh:
            for line in fh:
                if line.startswith("VmRSS:"):
                    return int(line.split()[1]) * 1024
    except OSError:
        pass
    return 0


def descendants(pid: int) -> list:
    """Process ids below `pid` (children of all its threads, recursively)."""
    out, todo = [], [pid]
    while todo:
        p = todo.pop()
        try:
            tasks = os.listdir(f"/proc/{p}/task")
        except OSError:
            continue
        for t in tasks:
            try:
                with open(f"/proc/{p}/task/{t}/children") as fh:
                    kids = [int(k) for k in fh.read().split()]
            except OSError:
                continue
            out += kids
            todo += kids
    return out


class Sampler(threading.Thread):
    """Peaks of own RSS, of the descendants' summed RSS, and of both, every 50 ms."""

    def __init__(self):
        super().__init__(daemon=True)
        self.stop = threading.Event()
        self.tree = self.own = self.workers = 0

    def run(self):
        me = os.getpid()
        while not self.stop.is_set():
            own = rss(me)
            kids = sum(rss(p) for p in descendants(me))
            self.own = max(self.own, own)
            self.workers = max(self.workers, kids)
            self.tree = max(self.tree, own + kids)
            self.stop.wait(0.05)


def measured(manifest, jobs):
    s = Sampler()
    s.start()
    t0 = time.perf_counter()
    scan = analyze_scan(load_manifest(manifest), jobs=jobs)
    dt = time.perf_counter() - t0
    s.stop.set()
    s.join()
    return s, dt, scan


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--frames", type=int, default=200)
    ap.add_argument("--n", type=int, default=80)
    ap.add_argument("--jobs", type=int, default=2)
    args = ap.parse_args(argv)
    grid = 8 * args.n ** 3
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        t0 = time.perf_counter()
        long_scan = scan_folder(tmp / "long", args.frames, args.n, distinct=8)
        short_scan = scan_folder(tmp / "short", 4, args.n, distinct=8)
        print(f"built {args.frames} frames of {args.n}^3 in {time.perf_counter() - t0:.1f} s",
              flush=True)
        short, dt_s, _ = measured(short_scan, args.jobs)
        long, dt_l, scan = measured(long_scan, args.jobs)
    size = len(dumps_scan(scan))
    extra = args.frames - 4
    print(f"one grid: {grid / MB:.1f} MB; scan.json of the long scan {size / MB:.1f} MB "
          f"({size / args.frames / 1024:.0f} kB per frame)")
    print(f"{'frames':>7} {'time s':>7} {'all processes MB':>17} {'workers MB':>11} "
          f"{'parent MB':>10}")
    for k, r, dt in ((4, short, dt_s), (args.frames, long, dt_l)):
        print(f"{k:7d} {dt:7.1f} {r.tree / MB:17.1f} {r.workers / MB:11.1f} {r.own / MB:10.1f}")
    grow_w = (long.workers - short.workers) / grid
    grow_p = (long.own - short.own) / grid
    print(f"growth from 4 to {args.frames} frames, in grids: workers {grow_w:.2f} "
          f"(target <= 4: {'ok' if grow_w <= 4 else 'MISSED'}), parent {grow_p:.2f} = "
          f"{(long.own - short.own) / max(extra, 1) / 1024:.0f} kB per extra frame, "
          f"{grow_p / max(extra, 1):.3f} grid per frame (frame dicts, not grids: target < 0.1 "
          f"{'ok' if grow_p / max(extra, 1) < 0.1 else 'MISSED'})")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
