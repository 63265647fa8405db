"""The external-command generator: placeholders, no shell, failures leave no frame."""

import sys
import time

import numpy as np
import pytest

from trackscan.errors import ConfigError, GeneratorError
from trackscan.generators import make_generator
from trackscan.io.generator_config import parse_generator_config
from trackscan.io.cube import read_cube
from trackscan.io.xyz import read_xyz

# A stand-in for a quantum-chemistry wrapper: reads the geometry, writes a
# cube of one Gaussian per atom in the plain cube layout.  MODE picks a
# failure.  It uses only the standard library, like a user's script would.
PROGRAM = r'''
import math, sys, time
mode, value, xyz, cube = sys.argv[1], float(sys.argv[2]), sys.argv[3], sys.argv[4]
print("argv:", sys.argv[1:])
if mode == "fail":
    print("basis set not found", file=sys.stderr)
    sys.exit(3)
if mode == "sleep":
    time.sleep(30)
if mode == "nothing":
    sys.exit(0)
lines = open(xyz).read().split("\n")
n = int(lines[0])
atoms = []
for line in lines[2:2 + n]:
    s, x, y, z = line.split()[:4]
    atoms.append(({"H": 1, "C": 6, "O": 8}[s], float(x) / 0.529177210903,
                  float(y) / 0.529177210903, float(z) / 0.529177210903))
nx = ny = nz = 6
h = 0.5
out = ["density", "value %r" % value, "%5d %12.6f %12.6f %12.6f" % (n, -1.25, -1.25, -1.25)]
for a in range(3):
    v = [0.0, 0.0, 0.0]; v[a] = h
    out.append("%5d %12.6f %12.6f %12.6f" % (nx, v[0], v[1], v[2]))
for z, x, y, w in atoms:
    out.append("%5d %12.6f %12.6f %12.6f %12.6f" % (z, z, x, y, w))
vals = []
for i in range(nx):
    for j in range(ny):
        for k in range(nz):
            p = (-1.25 + i * h, -1.25 + j * h, -1.25 + k * h)
            vals.append(sum(math.exp(-((p[0]-x)**2 + (p[1]-y)**2 + (p[2]-w)**2))
                            for _, x, y, w in atoms))
if mode == "broken":
    vals = vals[:10]
body = [" ".join("%13.5E" % v for v in vals[r:r + 6]) for r in range(0, len(vals), 6)]
open(cube, "w").write("\n".join(out + body) + "\n")
'''


@pytest.fixture
def scan(tmp_path):
    (tmp_path / "qc.py").write_text(PROGRAM)
    (tmp_path / "start.xyz").write_text("2\nCO\nC 0 0 0\nO 0 0 1.13\n")
    return tmp_path


def generator(scan, mode, timeout=None):
    mapping = {"geometry": {"xyz": "start.xyz", "drive": {"distance": [1, 2]}},
               "command": [sys.executable, "qc.py", mode, "{value}", "{xyz}", "{cube}"]}
    if timeout:
        mapping["timeout"] = timeout
    return make_generator(parse_generator_config(mapping, path=scan / "scan.yaml"))


def test_success_writes_cube_geometry_and_log(scan):
    gen = generator(scan, "ok")
    out = gen.generate(1.25, scan / "frames" / "f1.cube")
    grid = read_cube(out.path)
    np.testing.assert_array_equal(grid.numbers, [6, 8])
    # the program saw the driven geometry
    geom = read_xyz(out.geometry)[0]
    assert np.linalg.norm(geom.positions[1] - geom.positions[0]) * 0.529177210903 == \
        pytest.approx(1.25, abs=1e-9)
    np.testing.assert_allclose(grid.positions, geom.positions, atol=1e-5)
    log = out.log.read_text()
    assert "argv: ['ok', '1.25'" in log and "exit status: 0" in log
    assert grid.comments[1] == "value 1.25"
    assert not list((scan / "frames").glob(".partial-*"))


def test_arguments_are_not_interpreted_by_a_shell(scan, tmp_path):
    marker = tmp_path / "pwned"
    mapping = {"command": [sys.executable, "-c",
                           "import sys; open(sys.argv[2], 'w').write(''); print(sys.argv[1])",
                           f"x; touch {marker}", "{cube}"]}
    gen = make_generator(parse_generator_config(mapping, path=scan / "scan.yaml"))
    with pytest.raises(GeneratorError, match="broken cube"):
        gen.generate(1.0, scan / "f.cube")
    assert not marker.exists()
    assert f"x; touch {marker}" in (scan / "f.log").read_text()


@pytest.mark.parametrize("mode, match", [
    ("fail", "exit status 3 at coordinate value 1.3: basis set not found"),
    ("nothing", "wrote no cube"),
    ("broken", "broken cube"),
])
def test_failures_leave_the_previous_frame(scan, mode, match):
    frames = scan / "frames"
    frames.mkdir()
    target = frames / "f.cube"
    target.write_text("previous content")
    gen = generator(scan, mode)
    with pytest.raises(GeneratorError, match=match):
        gen.generate(1.3, target)
    assert target.read_text() == "previous content"
    assert not list(frames.glob(".partial-*"))
    assert (frames / "f.log").is_file()


def test_timeout(scan):
    gen = generator(scan, "sleep", timeout=0.5)
    t0 = time.monotonic()
    with pytest.raises(GeneratorError, match="timed out after 0.5 s"):
        gen.generate(1.3, scan / "f.cube")
    assert time.monotonic() - t0 < 10
    assert not (scan / "f.cube").exists()


def test_missing_program(scan):
    # a bad-input error (exit code 2) naming the manifest and the key, found by check() too
    mapping = {"command": ["no-such-program-xyz", "{cube}"]}
    gen = make_generator(parse_generator_config(mapping, path=scan / "scan.yaml"))
    with pytest.raises(ConfigError, match="generator.command: program 'no-such-program-xyz' "
                                          "not found on PATH"):
        gen.check()
    with pytest.raises(ConfigError, match="not found on PATH"):
        gen.generate(1.0, scan / "f.cube")
    mapping = {"command": ["./missing.sh", "{cube}"]}
    gen = make_generator(parse_generator_config(mapping, path=scan / "scan.yaml"))
    with pytest.raises(ConfigError, match="program not found"):
        gen.generate(1.0, scan / "f.cube")
    (scan / "plain.sh").write_text("#!/bin/sh\n")          # exists, not executable
    mapping = {"command": ["./plain.sh", "{cube}"]}
    gen = make_generator(parse_generator_config(mapping, path=scan / "scan.yaml"))
    with pytest.raises(ConfigError, match="not executable"):
        gen.check()
