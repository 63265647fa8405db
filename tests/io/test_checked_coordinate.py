"""Listed coordinate values are checked against the geometry of each frame.

References are plain geometry: the cubes carry atoms placed at a known
distance, angle or dihedral, built here with trigonometry.
"""

import math

import numpy as np
import pytest

from trackscan.cli import main
from trackscan.coordinates import DEFAULT_TOLERANCES, difference
from trackscan.errors import ConfigError
from trackscan.grid import DensityGrid
from trackscan.io.cube import write_cube
from trackscan.io.manifest import load_manifest
from trackscan.units import ANGSTROM_IN_BOHR


def _cube(path, positions_bohr):
    g = DensityGrid(np.ones((2, 2, 2)), [-3, -3, -3], np.eye(3) * 6.0, [1] * len(positions_bohr),
                    [1.0] * len(positions_bohr), positions_bohr)
    write_cube(path, g, digits=16)


def _dihedral_frame(path, phi_deg):
    """H4 chain: 1-2-3-4 with the dihedral phi (bonds 1.8 bohr, angles 90 degrees)."""
    p = math.radians(phi_deg)
    pos = [[1.8, 0.0, 0.0], [0.0, 0.0, 0.0], [0.0, 0.0, 1.8],
           [1.8 * math.cos(p), 1.8 * math.sin(p), 1.8]]
    _cube(path, pos)


def _write(tmp_path, coord, frames):
    lines = ["name: checked", f"coordinate: {coord}", "frames:"]
    lines += [f"  - {{file: {f}, value: {v!r}}}" for f, v in frames]
    (tmp_path / "scan.yaml").write_text("\n".join(lines) + "\n")
    return tmp_path / "scan.yaml"


def test_listed_distance_within_tolerance_passes(tmp_path):
    _cube(tmp_path / "a.cube", [[0, 0, 0], [0, 0, 1.5 * ANGSTROM_IN_BOHR]])
    m = load_manifest(_write(tmp_path, "{distance: [1, 2]}", [("a.cube", 1.5004)]))
    assert m.frames[0].value == 1.5004          # the listed value is kept


def test_listed_angle_that_disagrees_is_an_error_naming_frame_and_values(tmp_path, capsys):
    # the case: listed 85 degrees, geometry 58
    a = math.radians(58.0)
    _cube(tmp_path / "f1.cube", [[2.0, 0, 0], [0, 0, 0], [2.0 * math.cos(a), 2.0 * math.sin(a), 0]])
    path = _write(tmp_path, "{angle: [1, 2, 3]}", [("f1.cube", 85)])
    with pytest.raises(ConfigError) as exc:
        load_manifest(path)
    msg = str(exc.value)
    assert "frames[0].value" in msg and "f1.cube" in msg
    assert "listed value 85 degree" in msg and "measured on f1.cube: 58 degree" in msg
    for command in ("check", "analyze"):
        code = main([command, str(path)] + (["--out", str(tmp_path / "out")]
                                            if command == "analyze" else []))
        err = capsys.readouterr().err.strip().splitlines()
        assert code == 2 and len(err) == 1 and "disagrees" in err[0]
    assert not (tmp_path / "out" / "scan.json").exists()


def test_tolerance_is_configurable(tmp_path):
    _cube(tmp_path / "a.cube", [[0, 0, 0], [0, 0, 1.5 * ANGSTROM_IN_BOHR]])
    with pytest.raises(ConfigError, match="tolerance 0.001"):
        load_manifest(_write(tmp_path, "{distance: [1, 2]}", [("a.cube", 1.51)]))
    m = load_manifest(_write(tmp_path, "{distance: [1, 2], tolerance: 0.02}", [("a.cube", 1.51)]))
    assert m.coordinate.check_tolerance == 0.02
    with pytest.raises(ConfigError, match="coordinate.tolerance"):
        load_manifest(_write(tmp_path, "{label: s, unit: index, tolerance: 1}", [("a.cube", 1)]))


def test_bohr_and_radian_units_are_measured_in_their_unit(tmp_path):
    _cube(tmp_path / "a.cube", [[0, 0, 0], [0, 0, 2.0]])
    m = load_manifest(_write(tmp_path, "{distance: [1, 2], unit: bohr}", [("a.cube", 2.0)]))
    assert m.frames[0].value == 2.0
    _dihedral_frame(tmp_path / "d.cube", 60.0)
    m = load_manifest(_write(tmp_path, "{dihedral: [1, 2, 3, 4], unit: radian}",
                             [("d.cube", math.pi / 3)]))
    assert m.frames[0].value == pytest.approx(math.pi / 3)
    with pytest.raises(ConfigError, match="disagrees"):
        load_manifest(_write(tmp_path, "{dihedral: [1, 2, 3, 4], unit: radian}",
                             [("d.cube", 60.0)]))


def test_dihedral_plus_and_minus_180_agree(tmp_path):
    _dihedral_frame(tmp_path / "d.cube", 180.0)
    m = load_manifest(_write(tmp_path, "{dihedral: [1, 2, 3, 4]}", [("d.cube", -180.0)]))
    assert m.frames[0].value == -180.0
    assert difference("dihedral", 179.95, -179.99, "degree") == pytest.approx(0.06)
    assert DEFAULT_TOLERANCES["degree"] == 0.1 and DEFAULT_TOLERANCES["angstrom"] == 1e-3


def test_no_listed_value_uses_the_measured_one(tmp_path):
    _dihedral_frame(tmp_path / "d.cube", -35.0)
    (tmp_path / "scan.yaml").write_text(
        "name: m\ncoordinate: {dihedral: [1, 2, 3, 4]}\nframes:\n  - d.cube\n")
    assert load_manifest(tmp_path / "scan.yaml").frames[0].value == pytest.approx(-35.0)
