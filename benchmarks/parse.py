"""Benchmark: cube reader vs ``numpy.fromstring`` on the same values.

Writes a 120^3 cube (about 24 MB of text) of a smooth model density, then
times ``trackscan.io.cube.read_cube`` and ``numpy.fromstring(text, sep=" ")``
on its value block, alternating, and prints the ratio of the medians.
Target: ratio <= 2.

Run: ``python benchmarks/parse.py [--n 120] [--repeat 5]``
"""

from __future__ import annotations

import argparse
import statistics
import tempfile
import time
import warnings
from pathlib import Path

import numpy as np

from trackscan.grid import DensityGrid
from trackscan.io.cube import read_cube, write_cube


def make_cube(path: Path, n: int) -> None:
    """Write an n^3 cube of two overlapping exponentials (demo values)."""
    h = 0.15
    x = (np.arange(n) - n / 2) * h
    X, Y, Z = np.meshgrid(x, x, x, indexing="ij")
    rho = np.exp(-2 * np.sqrt((X - 0.7) ** 2 + Y ** 2 + Z ** 2)) + \
        np.exp(-2 * np.sqrt((X + 0.7) ** 2 + Y ** 2 + Z ** 2))
    grid = DensityGrid(rho, [x[0]] * 3, np.eye(3) * h, [1, 1], [1.0, 1.0],
                       [[0.7, 0, 0], [-0.7, 0, 0]])
    write_cube(path, grid)


def main(argv=None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--n", type=int, default=120)
    parser.add_argument("--repeat", type=int, default=5)
    args = parser.parse_args(argv)
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "bench.cube"
        make_cube(path, args.n)
        raw = path.read_bytes()
        # value block: everything after the 6 + natoms header lines
        offset = 0
        for _ in range(8):
            offset = raw.index(b"\n", offset) + 1
        text = raw[offset:].decode("ascii")
        ours, ref = [], []
        for _ in range(args.repeat):
            t0 = time.perf_counter()
            read_cube(path)
            ours.append(time.perf_counter() - t0)
            t0 = time.perf_counter()
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                np.fromstring(text, sep=" ")
            ref.append(time.perf_counter() - t0)
        size_mb = len(raw) / 1e6
    r = statistics.median(ours) / statistics.median(ref)
    print(f"grid {args.n}^3, {size_mb:.1f} MB of text")
    print(f"read_cube / numpy.fromstring = {r:.2f}  (target <= 2)")


if __name__ == "__main__":
    main()
