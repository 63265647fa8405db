"""Streaming scans: the frame analyses never pile up grids in memory.

A scan of many frames must hold at most a few grids at a time: each frame is
read, analysed and reduced to its compact frame dict before the next one is
read (one job), and with worker processes the parent never reads a grid at
all.  Memory is measured with :mod:`tracemalloc`, which counts numpy's array
buffers as well as Python objects.  The grids here are small; the benchmark
``benchmarks/stream.py`` runs a long scan at 80^3.
"""

import math
import tracemalloc

import numpy as np
import pytest

from trackscan.analysis import analyse_frames
from trackscan.analysis.runner import iter_frames
from trackscan.io.cube import write_cube
from trackscan.promolecule import promolecule_grid
from trackscan.settings import AnalysisSettings

SPACING = 0.17


def _water(r_oh_bohr):
    """Water at 104.5 degrees with both O-H at `r_oh_bohr`."""
    half = math.radians(104.5) / 2
    return [8, 1, 1], [[0.0, 0.0, 0.0],
                       [r_oh_bohr * math.sin(half), 0.0, r_oh_bohr * math.cos(half)],
                       [-r_oh_bohr * math.sin(half), 0.0, r_oh_bohr * math.cos(half)]]


@pytest.fixture(scope="module")
def frames(tmp_path_factory):
    """Ten water cubes along an O-H stretch, and the bytes of one grid."""
    root = tmp_path_factory.mktemp("stream")
    files = []
    for k, r in enumerate(np.linspace(1.75, 1.95, 10)):
        numbers, pos = _water(r)
        grid = promolecule_grid(numbers, pos, spacing=SPACING, margin=3.0)
        files.append(root / f"w{k:02d}.cube")
        write_cube(files[-1], grid)
    return files, grid.values.nbytes


def _traced(fn):
    """(result, peak bytes, bytes still held after fn) under tracemalloc."""
    tracemalloc.start()
    try:
        base = tracemalloc.get_traced_memory()[0]
        out = fn()
        current, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    return out, peak - base, current - base


def test_peak_memory_does_not_grow_with_the_number_of_frames(frames):
    files, grid_bytes = frames
    settings = AnalysisSettings()
    few, peak_few, _ = _traced(lambda: analyse_frames(files[:3], settings))
    many, peak_many, held = _traced(lambda: analyse_frames(files, settings))
    assert len(many) == 10 and all(f.poincare_hopf.holds for f in many)
    assert many[:3] == few
    # seven more frames cost less than one more grid at the peak ...
    assert peak_many < peak_few + grid_bytes, (peak_few, peak_many, grid_bytes)
    # ... and the ten results together are far smaller than ten grids
    assert held < 2 * grid_bytes, (held, grid_bytes)


def test_parent_never_reads_a_grid_with_worker_processes(frames):
    files, grid_bytes = frames
    settings = AnalysisSettings()
    local = analyse_frames(files[:4], settings)
    out, peak, _ = _traced(lambda: analyse_frames(files[:4], settings, jobs=2))
    assert out == local
    # reading one cube would take more than its grid bytes (text + values)
    assert peak < grid_bytes, (peak, grid_bytes)


def test_frames_are_yielded_as_they_finish(frames, tmp_path):
    """The last cube is read only after the first frame was handed over."""
    files, _ = frames
    last = tmp_path / "last.cube"
    last.write_bytes(files[0].read_bytes())
    stream = iter_frames([files[1], last], AnalysisSettings())
    i, first = next(stream)
    assert i == 0 and len(first.atoms) == 3
    # swap the not yet analysed frame for another molecule: H2 at 1.4 bohr
    write_cube(last, promolecule_grid([1, 1], [[0, 0, 0], [0, 0, 1.4]], spacing=0.3,
                                      margin=3.0))
    (j, second), = list(stream)
    assert j == 1 and [a.element for a in second.atoms] == ["H", "H"]
