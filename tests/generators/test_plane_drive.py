"""Plane scans' generators: two drives at once, and {value1}/{value2} for commands.

Geometries are checked with numpy's own distance and angle formulas.
"""

import math
import sys

import numpy as np
import pytest

from trackscan.errors import GeneratorError
from trackscan.generators import make_generator
from trackscan.io.generator_config import parse_generator_config
from trackscan.io.manifest import load_manifest

XYZ = """4
a bent chain
O 0.0 0.0 0.0
H 0.96 0.0 0.0
H -0.24 0.93 0.0
He 0.0 0.0 3.0
"""


def _angle(p, i, j, k):
    a, b = p[i] - p[j], p[k] - p[j]
    return math.degrees(math.acos(np.dot(a, b) / np.linalg.norm(a) / np.linalg.norm(b)))


def _gen(tmp_path, drives, source=None):
    (tmp_path / "base.xyz").write_text(XYZ)
    raw = {"geometry": {"xyz": "base.xyz", "drive": drives}}
    raw.update(source or {"promolecule": {"spacing": 0.4, "margin": 2.0}})
    return parse_generator_config(raw, path=tmp_path / "scan.yaml")


def test_two_drives_set_both_coordinates(tmp_path):
    cfg = _gen(tmp_path, [{"distance": [1, 2], "move": [2]},
                          {"angle": [2, 1, 3], "move": [3]}])
    gen = make_generator(cfg)
    bohr = 0.529177210903
    for d, theta in [(0.8, 60.0), (1.3, 150.0), (1.0, 95.5)]:
        p = gen.geometry((d, theta)).positions * bohr
        assert np.linalg.norm(p[1] - p[0]) == pytest.approx(d, abs=1e-9)
        assert _angle(p, 1, 0, 2) == pytest.approx(theta, abs=1e-7)
        assert np.linalg.norm(p[2] - p[0]) == pytest.approx(math.hypot(0.24, 0.93), abs=1e-9)
        assert np.allclose(p[3], [0.0, 0.0, 3.0])       # the helium atom never moves


def test_coupled_drives_are_refused(tmp_path):
    # rotating H3 about O changes the H2-H3 distance the first drive set
    cfg = _gen(tmp_path, [{"distance": [2, 3], "move": [3]},
                          {"angle": [2, 1, 3], "move": [3]}])
    with pytest.raises(GeneratorError, match="coupled"):
        make_generator(cfg).geometry((1.6, 120.0))


def test_a_list_of_drives_needs_two(tmp_path):
    from trackscan.errors import ConfigError

    with pytest.raises(ConfigError, match="holds two"):
        _gen(tmp_path, [{"distance": [1, 2]}])


PROGRAM = r'''
import sys
v1, v2, cube = float(sys.argv[1]), float(sys.argv[2]), sys.argv[3]
lines = ["plane frame", "v1=%r v2=%r" % (v1, v2), "    1 0.0 0.0 0.0"]
lines += ["    2 0.5 0.0 0.0", "    2 0.0 0.5 0.0", "    2 0.0 0.0 0.5"]
lines += ["    1 1.0 0.0 0.0 0.0", " 1.0 0.5 0.5 0.25 0.5 0.25 0.25 0.125"]
open(cube, "w").write("\n".join(lines) + "\n")
'''


def test_command_gets_value1_and_value2(tmp_path):
    (tmp_path / "qc.py").write_text(PROGRAM)
    cfg = parse_generator_config(
        {"command": [sys.executable, "qc.py", "{value1}", "{value2}", "{cube}"]},
        path=tmp_path / "scan.yaml")
    gen = make_generator(cfg)
    out = gen.generate((1.25, 47.5), tmp_path / "f.cube")
    assert out.value == (1.25, 47.5)
    assert (tmp_path / "f.cube").read_text().splitlines()[1] == "v1=1.25 v2=47.5"
    with pytest.raises(GeneratorError, match="value1"):
        gen.generate(1.25, tmp_path / "g.cube")      # a 1-D value has no {value1}
    assert not (tmp_path / "g.cube").exists()


def test_plane_manifest_grid_and_record(tmp_path):
    from trackscan.io.manifest_2d import record_generated_frame_2d

    (tmp_path / "base.xyz").write_text(XYZ)
    (tmp_path / "scan.yaml").write_text("""
name: p
coordinates:
  - {distance: [1, 2]}
  - {angle: [2, 1, 3]}
frames: {grid: [[0.9, 1.0, 1.1], [100, 110]], directory: out}
generator:
  geometry: {xyz: base.xyz, drive: [{distance: [1, 2], move: [2]}, {angle: [2, 1, 3], move: [3]}]}
  promolecule: {}
""")
    m = load_manifest(tmp_path / "scan.yaml")
    assert m.dimensions == 2
    assert [e.values for e in m.frames] == [(0.9, 100.0), (0.9, 110.0), (1.0, 100.0),
                                            (1.0, 110.0), (1.1, 100.0), (1.1, 110.0)]
    assert [c.unit for c in m.coordinates] == ["angstrom", "degree"]
    assert [c.label for c in m.coordinates] == ["distance 1-2", "angle 2-1-3"]
    (tmp_path / "out").mkdir()
    record_generated_frame_2d(m, {"file": "x.cube", "values": [0.95, 100.0],
                                  "refine": {"round": 1}})
    m2 = load_manifest(tmp_path / "scan.yaml")
    assert len(m2.frames) == 7 and m2.frames[2].values == (0.95, 100.0)
