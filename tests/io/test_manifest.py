"""Scan manifests: frames, measured coordinates, ordering, key-path errors."""

import json

import numpy as np
import pytest

from trackscan.errors import ConfigError
from trackscan.grid import DensityGrid
from trackscan.io.cube import write_cube
from trackscan.io.manifest import RECORD_NAME, load_manifest
from trackscan.units import ANGSTROM_IN_BOHR


def _frame(path, d_angstrom):
    """A tiny cube of H2 at bond length d (values are irrelevant here)."""
    d = d_angstrom * ANGSTROM_IN_BOHR
    g = DensityGrid(np.ones((2, 2, 2)), [-2, -2, -2], np.eye(3) * 2.0, [1, 1], [1.0, 1.0],
                    [[0, 0, -d / 2], [0, 0, d / 2]])
    write_cube(path, g)


@pytest.fixture
def scan_dir(tmp_path):
    (tmp_path / "frames").mkdir()
    for i, d in enumerate([0.9, 0.7, 0.8]):
        _frame(tmp_path / "frames" / f"h2_{i}.cube", d)
    return tmp_path


def test_glob_with_measured_distance_sorted(scan_dir):
    (scan_dir / "scan.yaml").write_text(
        "name: h2-stretch\ncoordinate: {label: H1-H2 distance, distance: [1, 2]}\n"
        "frames: {glob: 'frames/*.cube'}\n")
    m = load_manifest(scan_dir / "scan.yaml")
    assert m.coordinate.unit == "angstrom"
    assert [round(f.value, 6) for f in m.frames] == [0.7, 0.8, 0.9]
    assert [f.file.name for f in m.frames] == ["h2_1.cube", "h2_2.cube", "h2_0.cube"]


def test_explicit_list_relative_paths_and_energies(scan_dir, tmp_path):
    sub = scan_dir / "defs"
    sub.mkdir()
    (sub / "scan.yaml").write_text(
        "name: explicit\ncoordinate: {label: step, unit: index}\n"
        "analysis: {density_floor: 1.0e-3}\n"
        "frames:\n"
        "  - {file: ../frames/h2_0.cube, value: 2, energy: -1.1}\n"
        "  - {file: ../frames/h2_1.cube, value: 1}\n")
    m = load_manifest(sub / "scan.yaml")
    # listed with falling values: the scan runs downwards (tracking direction auto)
    assert [f.value for f in m.frames] == [2.0, 1.0]
    assert m.frames[0].energy == -1.1 and m.frames[1].energy is None
    assert m.frames[1].file == (sub / "../frames/h2_1.cube")
    assert m.analysis.density_floor == 1e-3


def test_value_required_without_definition(scan_dir):
    (scan_dir / "s.yaml").write_text(
        "name: x\ncoordinate: {label: step, unit: index}\nframes:\n  - frames/h2_0.cube\n")
    with pytest.raises(ConfigError, match=r"frames\[0\].value"):
        load_manifest(scan_dir / "s.yaml")


def test_atom_out_of_range(scan_dir):
    (scan_dir / "s.yaml").write_text(
        "name: x\ncoordinate: {distance: [1, 3]}\nframes: {glob: 'frames/*.cube'}\n")
    with pytest.raises(ConfigError, match="atom 3 does not exist"):
        load_manifest(scan_dir / "s.yaml")


def test_duplicate_values_rejected(scan_dir):
    (scan_dir / "s.yaml").write_text(
        "name: x\ncoordinate: {label: s, unit: u}\nframes:\n"
        "  - {file: frames/h2_0.cube, value: 1}\n  - {file: frames/h2_1.cube, value: 1}\n")
    with pytest.raises(ConfigError, match="share the coordinate value"):
        load_manifest(scan_dir / "s.yaml")


@pytest.mark.parametrize("text, key", [
    ("name: x\ncoordinate: {label: s, unit: u, angle: [1, 2]}\nframes: []\n", "coordinate.angle"),
    ("name: x\ncoordinate: [1]\nframes: []\n", "coordinate"),
    ("name: x\ncoordinate: {label: s, unit: u}\nperiodic: yes please\nframes: []\n", "periodic"),
    ("coordinate: {label: s, unit: u}\nframes: []\n", "name"),
    ("name: x\ncoordinate: {label: s, unit: u}\nframes:\n  - {value: 1}\n", "frames[0].file"),
    ("name: x\ncoordinate: {label: s, unit: u}\nframes:\n  - {file: frames/h2_0.cube, valeu: 1}\n",
     "frames[0].valeu"),
    ("name: x\ncoordinate: {label: s, unit: u}\nframes: {values: [1, 2]}\n", "frames.values"),
    ("name: x\nname: y\ncoordinate: {label: s, unit: u}\nframes: []\n", "name"),
])
def test_key_path_errors(scan_dir, text, key):
    (scan_dir / "s.yaml").write_text(text)
    with pytest.raises(ConfigError) as info:
        load_manifest(scan_dir / "s.yaml")
    assert info.value.key == key
    assert info.value.lineno is not None


def test_unsafe_yaml_refused(scan_dir):
    (scan_dir / "s.yaml").write_text("name: !!python/object/apply:os.system ['true']\n"
                                     "coordinate: {label: s, unit: u}\nframes: []\n")
    with pytest.raises(ConfigError, match="unsupported YAML tag"):
        load_manifest(scan_dir / "s.yaml")


def test_generated_frames_record_merged(scan_dir):
    rec = {"frames": [{"file": "h2_1.cube", "value": 0.7, "energy": -1.0}]}
    (scan_dir / "frames" / RECORD_NAME).write_text(json.dumps(rec))
    (scan_dir / "s.yaml").write_text(
        "name: x\ncoordinate: {label: s, unit: u}\nframes:\n  - {file: frames/h2_0.cube, value: 0.9}\n")
    m = load_manifest(scan_dir / "s.yaml")
    assert [f.value for f in m.frames] == [0.7, 0.9]
    assert m.frames[0].generated and m.frames[0].energy == -1.0


def test_yaml11_exponent_numbers_accepted(scan_dir):
    # PyYAML (YAML 1.1) reads 1e-9 without a decimal point as a string
    (scan_dir / "s.yaml").write_text(
        "name: x\ncoordinate: {label: s, unit: u}\nanalysis: {gtol: 1e-9}\n"
        "frames:\n  - {file: frames/h2_0.cube, value: 1e-1}\n")
    m = load_manifest(scan_dir / "s.yaml")
    assert m.analysis.gtol == 1e-9
    assert m.frames[0].value == 0.1


def test_tracking_section_and_scan_direction(scan_dir):
    base = ("name: x\ncoordinate: {label: H1-H2 distance, distance: [1, 2]}\n"
            "frames: {glob: 'frames/*.cube'}\n")
    (scan_dir / "a.yaml").write_text(base + "tracking: {direction: descending, match_gate: 0.5}\n")
    m = load_manifest(scan_dir / "a.yaml")
    assert m.tracking.direction == "descending" and m.tracking.match_gate == 0.5
    assert [round(f.value, 6) for f in m.frames] == [0.9, 0.8, 0.7]
    (scan_dir / "b.yaml").write_text(base)
    assert load_manifest(scan_dir / "b.yaml").tracking.direction == "auto"


@pytest.mark.parametrize("section, key", [
    ("tracking: {match_gat: 1}", "tracking.match_gat"),
    ("tracking: {direction: sideways}", "tracking"),
    ("tracking: {printed_digits: 0}", "tracking"),
    ("tracking: {significance: .nan}", "tracking"),
    ("tracking: [1]", "tracking"),
])
def test_tracking_section_is_validated(scan_dir, section, key):
    (scan_dir / "c.yaml").write_text(
        "name: x\ncoordinate: {label: H1-H2 distance, distance: [1, 2]}\n"
        "frames: {glob: 'frames/*.cube'}\n" + section + "\n")
    with pytest.raises(ConfigError) as info:
        load_manifest(scan_dir / "c.yaml")
    assert info.value.key == key
