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
    """Peak of (own RSS) and of (own + descendants' RSS), sampled every 50 ms."""

    def __init__(self):
        super().__init__(daemon=True)
        self.stop = threading.Event()
        self.tree = self.own = 0

    def run(self):
        me = os.getpid()
        while not self.stop.is_set():
            own = rss(me)
            self.own = max(self.own, own)
            self.tree = max(self.tree, own + sum(rss(p) for p in descendants(me)))
            self.stop.wait(0.05)


def measured(manifest, jobs):
    s = Sampler()
    s.start()
    t0 = time.perf_counter()
    scan = analyze_scan(load_manifest(manifest), jobs=jobs)
    dt = time.perf_counter() - t0
    s.stop.set()
    s.join()
    return s.tree, s.own, dt, scan


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
        tree_s, own_s, dt_s, _ = measured(short_scan, args.jobs)
        tree_l, own_l, dt_l, scan = measured(long_scan, args.jobs)
    size = len(dumps_scan(scan))
    print(f"one grid: {grid / MB:.1f} MB; scan.json of the long scan {size / MB:.1f} MB")
    print(f"{'frames':>7} {'time s':>7} {'peak, all processes MB':>23} {'peak, parent MB':>16}")
    print(f"{4:7d} {dt_s:7.1f} {tree_s / MB:23.1f} {own_s / MB:16.1f}")
    print(f"{args.frames:7d} {dt_l:7.1f} {tree_l / MB:23.1f} {own_l / MB:16.1f}")
    growth = (tree_l - tree_s) / grid
    print(f"growth from 4 to {args.frames} frames: all processes {growth:.2f} grids, "
          f"parent {(own_l - own_s) / grid:.2f} grids (target <= 4: "
          f"{'ok' if growth <= 4 else 'MISSED'})")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
