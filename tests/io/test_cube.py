"""Cube reader/writer: round trips, layout variants, compression, datasets."""

import bz2
import gzip
import lzma

import numpy as np
import pytest

from trackscan.errors import InputError, ParseError
from trackscan.grid import DensityGrid
from trackscan.io.cube import read_cube, write_cube
from trackscan.units import ANGSTROM_IN_BOHR

# A tiny cube written by hand in the layout quantum-chemistry codes use:
# 2 atoms, a 2x2x3 grid, values with the last axis fastest.
TINY = """\
 tiny test cube
 density
    2   -1.000000   -1.000000   -1.500000
    2    2.000000    0.000000    0.000000
    2    0.000000    2.000000    0.000000
    3    0.000000    0.000000    1.500000
    1    1.000000    0.000000    0.000000    0.700000
    8    8.000000    0.000000    0.000000   -0.700000
  1.0E-01  2.0E-01  3.0E-01
  4.0E-01  5.0E-01  6.0E-01
  7.0E-01  8.0E-01  9.0E-01
  1.0E+00  1.1E+00  1.2E+00
"""


@pytest.fixture
def tiny(tmp_path):
    p = tmp_path / "tiny.cube"
    p.write_text(TINY)
    return p


def test_tiny_layout(tiny):
    g = read_cube(tiny)
    assert g.shape == (2, 2, 3)
    assert list(g.numbers) == [1, 8]
    np.testing.assert_allclose(g.origin, [-1, -1, -1.5])
    np.testing.assert_allclose(g.axes, np.diag([2.0, 2.0, 1.5]))
    # last axis fastest: value (i, j, k) is element 6i + 3j + k of the list
    assert g.values[0, 0, 2] == pytest.approx(0.3)
    assert g.values[0, 1, 0] == pytest.approx(0.4)
    assert g.values[1, 0, 0] == pytest.approx(0.7)
    assert g.values[1, 1, 2] == pytest.approx(1.2)
    np.testing.assert_allclose(g.position([1, 1, 2]), [1.0, 1.0, 1.5])
    np.testing.assert_allclose(g.fractional_index([1.0, 1.0, 1.5]), [1, 1, 2])
    assert g.voxel_volume == pytest.approx(6.0)
    assert g.integral() == pytest.approx(7.8 * 6.0)


def _random_grid(rng, skew=False):
    axes = np.diag([0.21, 0.19, 0.2])
    if skew:
        axes = axes + np.array([[0, 0.03, 0], [0.05, 0, 0.01], [0, -0.02, 0]])
    return DensityGrid(rng.random((5, 4, 7)) * 10.0 ** rng.integers(-6, 2, (5, 4, 7)),
                       rng.normal(size=3), axes, [6, 1, 1], [6.0, 1.0, 1.0],
                       rng.normal(size=(3, 3)), comments=("first line", "second line"))


@pytest.mark.parametrize("suffix", [".cube", ".cube.gz", ".cube.bz2", ".cube.xz"])
@pytest.mark.parametrize("skew", [False, True])
def test_round_trip_exact(tmp_path, suffix, skew):
    g = _random_grid(np.random.default_rng(1), skew)
    p = tmp_path / f"g{suffix}"
    write_cube(p, g, digits=16)
    r = read_cube(p)
    np.testing.assert_array_equal(r.values, g.values)
    np.testing.assert_allclose(r.axes, g.axes, atol=1e-8)
    np.testing.assert_allclose(r.origin, g.origin, atol=1e-6)
    np.testing.assert_allclose(r.positions, g.positions, atol=1e-8)
    assert list(r.numbers) == [6, 1, 1]
    assert r.comments == ("first line", "second line")


def test_compressed_files_are_really_compressed(tmp_path):
    g = _random_grid(np.random.default_rng(2))
    for suffix, mod in ((".gz", gzip), (".bz2", bz2), (".xz", lzma)):
        p = tmp_path / f"g.cube{suffix}"
        write_cube(p, g)
        text = mod.decompress(p.read_bytes()).decode()
        assert text.splitlines()[0] == "first line"


def test_default_precision_round_trip(tmp_path):
    g = _random_grid(np.random.default_rng(3))
    write_cube(tmp_path / "g.cube", g)
    r = read_cube(tmp_path / "g.cube")
    np.testing.assert_allclose(r.values, g.values, rtol=1e-5)
    # six values per line, and a break after each run of the last axis (7 values)
    lines = (tmp_path / "g.cube").read_text().splitlines()[9:]
    assert [len(l.split()) for l in lines[:4]] == [6, 1, 6, 1]


def test_angstrom_header_converted(tmp_path):
    text = TINY.replace("    2    2.000000", "   -2    2.000000") \
        .replace("    2    0.000000    2.0", "   -2    0.000000    2.0") \
        .replace("    3    0.000000", "   -3    0.000000")
    p = tmp_path / "a.cube"
    p.write_text(text)
    g = read_cube(p)
    np.testing.assert_allclose(g.axes[0], [2.0 * ANGSTROM_IN_BOHR, 0, 0])
    np.testing.assert_allclose(g.positions[0], np.array([0, 0, 0.7]) * ANGSTROM_IN_BOHR)


def test_multiple_datasets(tmp_path):
    # negative atom count: a dataset id line follows the atoms;
    # the dataset index varies fastest.
    head = TINY.splitlines()[:8]
    head[2] = head[2].replace("    2   -1.0", "   -2   -1.0")
    vals = np.arange(24, dtype=float)
    body = "\n".join(" ".join(f"{v:.5E}" for v in vals[i:i + 6]) for i in range(0, 24, 6))
    p = tmp_path / "mo.cube"
    p.write_text("\n".join(head) + "\n    2   11   12\n" + body + "\n")
    g0 = read_cube(p, dataset=0)
    g1 = read_cube(p, dataset=1)
    np.testing.assert_array_equal(g0.values.ravel(), vals[0::2])
    np.testing.assert_array_equal(g1.values.ravel(), vals[1::2])
    with pytest.raises(InputError, match="dataset index 2 out of range"):
        read_cube(p, dataset=2)


def test_dataset_index_on_single_dataset(tiny):
    with pytest.raises(InputError, match="holds one dataset"):
        read_cube(tiny, dataset=1)


def test_ceiling_refuses_before_reading(tiny):
    with pytest.raises(ParseError, match="ceiling"):
        read_cube(tiny, max_points=5)


def test_failed_write_leaves_old_file(tmp_path):
    from trackscan.io.atomic import atomic_open
    p = tmp_path / "keep.cube"
    p.write_text("old")
    with pytest.raises(RuntimeError):
        with atomic_open(p, "w") as fh:
            fh.write("half of a new file")
            raise RuntimeError("interrupted")
    assert p.read_text() == "old"
    assert [f.name for f in tmp_path.iterdir()] == ["keep.cube"]


def test_atomic_output_has_ordinary_permissions(tmp_path):
    import os
    from trackscan.io.atomic import write_text_atomic
    mask = os.umask(0o022)
    try:
        write_text_atomic(tmp_path / "a.txt", "x")
    finally:
        os.umask(mask)
    assert (tmp_path / "a.txt").stat().st_mode & 0o777 == 0o644


def test_grid_adopts_only_arrays_nobody_can_write(tiny):
    g = read_cube(tiny)
    assert not g.values.flags.writeable
    base = np.zeros((2, 2, 2))
    view = base.view()
    view.setflags(write=False)
    g2 = DensityGrid(view, [0, 0, 0], np.eye(3), [1], [1.0], [[0, 0, 0]])
    base[0, 0, 0] = 5.0  # the caller still holds a writable array: the grid copied
    assert g2.values[0, 0, 0] == 0.0


def test_header_read_without_values(tmp_path):
    from trackscan.io.cube import read_cube_header
    g = _random_grid(np.random.default_rng(5))
    write_cube(tmp_path / "g.cube.gz", g)
    h = read_cube_header(tmp_path / "g.cube.gz")
    assert list(h.counts) == [5, 4, 7] and list(h.numbers) == [6, 1, 1]


def test_long_header_beyond_first_chunk(tmp_path):
    # 3000 atoms: the header is longer than the first chunk the reader takes
    n = 3000
    g = DensityGrid(np.ones((2, 2, 2)), [0, 0, 0], np.eye(3), [1] * n, [1.0] * n,
                    np.arange(3 * n, dtype=float).reshape(n, 3) * 0.01)
    write_cube(tmp_path / "big.cube", g)
    r = read_cube(tmp_path / "big.cube")
    assert r.n_atoms == n and r.values.sum() == 8.0
