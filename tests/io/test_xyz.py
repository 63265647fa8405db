"""Tests of the XYZ reader and writer (trackscan.io.xyz)."""

import numpy as np
import pytest

from trackscan.errors import ParseError
from trackscan.io.xyz import XYZFrame, read_xyz, write_xyz
from trackscan.units import ANGSTROM_IN_BOHR

TWO_FRAMES = """3
value=1.0 water-like
O 0.0 0.0 0.0
H 0.0 0.0 1.0
1 0.0 1.0 0.0
3
value=1.1
O 0.0 0.0 0.0
H 0.0 0.0 1.1
H 0.0 1.0 0.0
"""


def test_read_two_frames_converts_to_bohr(tmp_path):
    p = tmp_path / "t.xyz"
    p.write_text(TWO_FRAMES)
    frames = read_xyz(p)
    assert len(frames) == 2
    assert frames[0].comment == "value=1.0 water-like"
    np.testing.assert_array_equal(frames[0].numbers, [8, 1, 1])
    # 1 angstrom = 1/0.529177210903 bohr (CODATA 2018)
    assert frames[1].positions[1, 2] == pytest.approx(1.1 / 0.529177210903, rel=1e-12)


def test_round_trip(tmp_path):
    rng = np.random.default_rng(3)
    frames = [XYZFrame([6, 1, 17], rng.normal(size=(3, 3)) * 3, f"frame {k}") for k in range(3)]
    p = tmp_path / "out.xyz"
    write_xyz(p, frames)
    back = read_xyz(p)
    assert [f.comment for f in back] == ["frame 0", "frame 1", "frame 2"]
    for a, b in zip(frames, back):
        np.testing.assert_array_equal(a.numbers, b.numbers)
        # 10 decimals in angstrom
        np.testing.assert_allclose(a.positions, b.positions, atol=1e-10 * ANGSTROM_IN_BOHR)


@pytest.mark.parametrize("text, lineno, match", [
    ("", None, "no frames"),
    ("two\nc\nH 0 0 0\n", 1, "atom count"),
    ("2\nc\nH 0 0 0\n", 3, "claims 2 atoms"),
    ("1000000000\nc\nH 0 0 0\n", 3, "claims"),
    ("1\nc\nQq 0 0 0\n", 3, "unknown element"),
    ("1\nc\nH 0 0\n", 3, "x, y, z"),
    ("1\nc\nH 0 x 0\n", 3, "not numbers"),
    ("1\nc\nH 0 nan 0\n", 3, "finite"),
])
def test_bad_files(tmp_path, text, lineno, match):
    p = tmp_path / "bad.xyz"
    p.write_text(text)
    with pytest.raises(ParseError, match=match) as info:
        read_xyz(p)
    assert info.value.lineno == lineno
    assert "bad.xyz" in str(info.value)


def test_missing_file_and_directory(tmp_path):
    with pytest.raises(ParseError, match="no such file"):
        read_xyz(tmp_path / "nope.xyz")
    with pytest.raises(ParseError, match="directory"):
        read_xyz(tmp_path)
