"""The manifest's generator section: validation and error key paths."""

from pathlib import Path

import numpy as np
import pytest

from trackscan.errors import ConfigError, GeneratorError
from trackscan.io.xyz import read_xyz
from trackscan.generators import make_generator
from trackscan.io.generator_config import (
    CommandConfig, PromoleculeConfig, PySCFConfig, parse_generator_config,
)

XYZ = "3\nvalue=1.0\nO 0 0 0\nH 0 0 0.96\nH 0.93 0 -0.24\n"


@pytest.fixture
def scan_dir(tmp_path):
    (tmp_path / "start.xyz").write_text(XYZ)
    (tmp_path / "traj.xyz").write_text(XYZ + XYZ.replace("value=1.0", "value=1.1")
                                       .replace("0.96", "1.06"))
    return tmp_path


def parse(mapping, d):
    return parse_generator_config(mapping, path=d / "scan.yaml")


def test_promolecule_source(scan_dir):
    cfg = parse({"geometry": {"xyz": "start.xyz", "drive": {"distance": [1, 2]}},
                 "promolecule": None}, scan_dir)
    assert cfg.source == "promolecule"
    assert cfg.options == PromoleculeConfig()
    assert cfg.geometry.xyz == scan_dir / "start.xyz"
    assert cfg.geometry.drive.atoms == (1, 2)
    gen = make_generator(cfg)
    assert "model" in gen.describe()


def test_geometry_only_writes_geometry_and_refuses_densities(scan_dir):
    cfg = parse({"geometry": {"xyz": "start.xyz", "drive": {"distance": [1, 2]}}}, scan_dir)
    assert cfg.source == "none" and cfg.options is None
    gen = make_generator(cfg)
    assert "geometry only" in gen.describe()
    with pytest.raises(GeneratorError, match="no density source"):
        gen.generate(1.1, scan_dir / "frames" / "f.cube")
    assert not (scan_dir / "frames" / "f.cube").exists()
    geom = read_xyz(scan_dir / "frames" / "f.xyz")[0]
    assert np.linalg.norm(geom.positions[1] - geom.positions[0]) * 0.529177210903 == \
        pytest.approx(1.1, abs=1e-9)


def test_pyscf_section(scan_dir):
    cfg = parse({"geometry": {"xyz": "start.xyz", "drive": {"angle": [2, 1, 3]}},
                 "pyscf": {"method": "B3LYP", "basis": "sto-3g", "conv_tol": "1e-8",
                           "cache": "cache"}}, scan_dir)
    assert cfg.options == PySCFConfig(method="B3LYP", basis="sto-3g", conv_tol=1e-8,
                                      cache=scan_dir / "cache")


def test_command_section(scan_dir):
    cfg = parse({"geometry": {"trajectory": "traj.xyz"},
                 "command": ["run-qc", "--at", "{value}", "-n", 4, "--geom", "{xyz}",
                             "--out", "{cube}"], "timeout": 30}, scan_dir)
    assert cfg.options == CommandConfig(("run-qc", "--at", "{value}", "-n", "4", "--geom",
                                         "{xyz}", "--out", "{cube}"), 30.0)
    assert cfg.options.uses == {"value", "xyz", "cube"}
    # a command that does not use {xyz} needs no geometry
    cfg = parse({"command": ["run-qc", "{value}", "{cube}"]}, scan_dir)
    assert cfg.geometry is None


@pytest.mark.parametrize("mapping, key, match", [
    ({"geometry": {"xyz": "start.xyz", "drive": {"distance": [1, 2]}}, "pyscf": {},
      "promolecule": {}}, "generator", "one density source"),
    ({"geometri": {}}, "generator.geometri", "did you mean 'geometry'"),
    ({"promolecule": {}}, "generator.geometry", "missing"),
    ({}, "generator", "give a density source"),
    ({"geometry": {"xyz": "start.xyz"}}, "generator.geometry.drive", "missing"),
    ({"geometry": {"xyz": "nope.xyz", "drive": {"distance": [1, 2]}}},
     "generator.geometry.xyz", "not found"),
    ({"geometry": {"xyz": "start.xyz", "trajectory": "traj.xyz"}}, "generator.geometry",
     "either"),
    ({"geometry": {"xyz": "start.xyz", "drive": {"distance": [1]}}},
     "generator.geometry.drive.distance", "2 atom numbers"),
    ({"geometry": {"xyz": "start.xyz", "drive": {"distance": [1, 2], "angle": [1, 2, 3]}}},
     "generator.geometry.drive", "exactly one"),
    ({"geometry": {"xyz": "start.xyz", "drive": {"distance": [0, 2]}}},
     "generator.geometry.drive.distance", "1-based"),
    ({"geometry": {"xyz": "start.xyz", "drive": {"distance": [1, 2], "unit": "degree"}}},
     "generator.geometry.drive.unit", "angstrom or bohr"),
    ({"geometry": {"xyz": "start.xyz", "drive": {"distance": [1, 2], "move": [1, 2]}}},
     "generator.geometry.drive.move", "not atom 1"),
    ({"geometry": {"trajectory": "traj.xyz", "values": [1]}}, "generator.geometry.values",
     "one per frame"),
    ({"geometry": {"xyz": "start.xyz", "drive": {"distance": [1, 2]}},
      "promolecule": {"spacing": 0}}, "generator.promolecule.spacing", "> 0"),
    ({"geometry": {"xyz": "start.xyz", "drive": {"distance": [1, 2]}},
      "promolecule": {"spasing": 0.1}}, "generator.promolecule.spasing", "spacing"),
    ({"geometry": {"xyz": "start.xyz", "drive": {"distance": [1, 2]}},
      "pyscf": {"charge": 0.5}}, "generator.pyscf.charge", "integer"),
    ({"geometry": {"xyz": "start.xyz", "drive": {"distance": [1, 2]}},
      "pyscf": {"spin": -1}}, "generator.pyscf.spin", ">= 0"),
    ({"geometry": {"xyz": "start.xyz", "drive": {"distance": [1, 2]}},
      "promolecule": {}, "timeout": 5}, "generator.timeout", "command only"),
    ({"command": "run-qc {cube}"}, "generator.command", "list of arguments"),
    ({"command": []}, "generator.command", "non-empty"),
    ({"command": ["run-qc", "{value}"]}, "generator.command", "{cube}"),
    ({"command": ["run-qc", "{cube}", "{xyz}"]}, "generator.command", "needs a geometry"),
    ({"command": ["run-qc", "{cube}", "{valeu}"]}, "generator.command[2]", "did you mean {value}"),
    ({"command": ["run-qc", "{cube}", {"a": 1}]}, "generator.command[2]", "string"),
    ({"command": ["run-qc", "{cube}"], "timeout": -1}, "generator.timeout", "> 0"),
])
def test_errors_name_the_key(scan_dir, mapping, key, match):
    with pytest.raises(ConfigError, match=match.replace("{", r"\{").replace("}", r"\}")
                       .replace("(", r"\(")) as info:
        parse(mapping, scan_dir)
    assert info.value.key == key
    assert Path(info.value.path) == scan_dir / "scan.yaml"


def test_trajectory_values_from_comments(scan_dir):
    cfg = parse({"geometry": {"trajectory": "traj.xyz"}}, scan_dir)
    gen = make_generator(cfg)
    assert list(gen.drive.values) == [1.0, 1.1]


def test_trajectory_values_measured_when_comments_lack_them(scan_dir):
    (scan_dir / "plain.xyz").write_text(XYZ.replace("value=1.0", "a") +
                                        XYZ.replace("value=1.0", "b").replace("0.96", "1.06"))
    cfg = parse({"geometry": {"trajectory": "plain.xyz", "drive": {"distance": [1, 2]}}},
                scan_dir)
    gen = make_generator(cfg)
    assert gen.drive.values == pytest.approx([0.96, 1.06], abs=1e-12)
    cfg = parse({"geometry": {"trajectory": "plain.xyz"}}, scan_dir)
    with pytest.raises(ConfigError, match="no 'value=...'"):
        make_generator(cfg)


def test_drive_atoms_beyond_geometry_rejected_when_built(scan_dir):
    cfg = parse({"geometry": {"xyz": "start.xyz", "drive": {"distance": [1, 7]}},
                 "promolecule": {}}, scan_dir)
    with pytest.raises(ConfigError) as info:
        make_generator(cfg)
    assert info.value.key == "generator.geometry.drive.distance"


def test_promolecule_rejects_heavy_elements(scan_dir):
    (scan_dir / "kbr.xyz").write_text("2\nc\nK 0 0 0\nBr 0 0 3\n")
    cfg = parse({"geometry": {"xyz": "kbr.xyz", "drive": {"distance": [1, 2]}},
                 "promolecule": {}}, scan_dir)
    with pytest.raises(ConfigError, match="H-Ar"):
        make_generator(cfg)


def test_coordinate_unit_applies_to_the_drive(scan_dir):
    from trackscan.io.manifest import Coordinate

    cfg = parse({"geometry": {"xyz": "start.xyz", "drive": {"distance": [1, 2]}},
                 "promolecule": {}}, scan_dir)
    gen = make_generator(cfg, coordinate=Coordinate("O-H", "bohr", "distance", (1, 2)))
    p = gen.geometry(2.0).positions
    assert np.linalg.norm(p[1] - p[0]) == pytest.approx(2.0, abs=1e-12)
    gen = make_generator(cfg, coordinate=Coordinate("O-H", "angstrom", "distance", (1, 2)))
    p = gen.geometry(2.0).positions
    assert np.linalg.norm(p[1] - p[0]) * 0.529177210903 == pytest.approx(2.0, abs=1e-12)
