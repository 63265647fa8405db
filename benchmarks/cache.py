"""Cost of rerunning an unchanged scan, as a fraction of the first run.

Writes a scan of 16 cyclopropanol frames (built-in promolecular density,
n^3 points each) in a temporary folder, analyses it once with an output
folder (which fills the per-frame cache ``<out>/.cache``), then again
unchanged: the rerun hashes each cube, finds its frame in the cache and
only tracks.  Prints rerun / first run.  Target: <= 5 %.  Also checks that
the rerun gives the same scan.json bytes.

Usage::

    python benchmarks/cache.py [--frames 16] [--n 100] [--jobs 1]
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

from molecules import scan_folder  # noqa: E402

from trackscan.analysis import analyze_scan, dumps_scan  # noqa: E402
from trackscan.io.manifest import load_manifest  # noqa: E402


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--frames", type=int, default=16)
    ap.add_argument("--n", type=int, default=100, help="points per axis (default 100)")
    ap.add_argument("--jobs", type=int, default=1)
    args = ap.parse_args(argv)
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        t0 = time.perf_counter()
        manifest = scan_folder(tmp / "scan", args.frames, args.n)
        print(f"built {args.frames} frames of {args.n}^3 in {time.perf_counter() - t0:.1f} s",
              flush=True)
        out = tmp / "out"
        times, texts = [], []
        for _ in range(2):
            t0 = time.perf_counter()
            scan = analyze_scan(load_manifest(manifest), out_dir=out, jobs=args.jobs)
            times.append(time.perf_counter() - t0)
            texts.append(dumps_scan(scan))
        cached = len(list((out / ".cache").glob("*.json")))
    first, rerun = times
    ratio = rerun / first
    print(f"first run {first:.2f} s ({cached} frames cached), unchanged rerun {rerun:.3f} s; "
          f"{'same' if texts[0] == texts[1] else 'DIFFERENT'} scan.json bytes")
    print(f"rerun / first run = {100 * ratio:.1f} %  (target <= 5 %: "
          f"{'ok' if ratio <= 0.05 else 'MISSED'})")
    return 0 if texts[0] == texts[1] else 1


if __name__ == "__main__":
    raise SystemExit(main())
