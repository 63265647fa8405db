"""The broken-input corpus: one clear line naming the file, exit code 2, no traceback."""

import subprocess
import sys
from pathlib import Path

import pytest
from hypothesis import given, settings, strategies as st

from trackscan.cli import main
from trackscan.errors import ParseError
from trackscan.io.cube import parse_cube_header

BAD = Path(__file__).parent / "data" / "bad"

# file -> (subcommand, text the message must contain, line number or None)
CUBES = {
    "truncated_values.cube": ("truncated", 11),
    "too_many_values.cube": ("too many values", None),
    "nan_value.cube": ("non-finite value 'NaN'", 11),
    "inf_value.cube": ("non-finite value 'inf'", 10),
    "letters_in_data.cube": ("not a number", 11),
    "absurd_grid.cube": ("ceiling", 4),
    "zero_atoms.cube": ("zero atoms", 3),
    "missing_axis_line.cube": ("point count and step vector", 6),
    "empty.cube": ("empty file", None),
    "a_directory.cube": ("is a directory", None),
    "bad_atom_line.cube": ("atom: Z charge x y z", 8),
    "mixed_unit_signs.cube": ("mix positive", 4),
    "binary_garbage.cube": ("not a valid number", 3),
    "zero_volume_axes.cube": ("linearly dependent", 4),
    "broken_gzip.cube.gz": ("cannot read", None),
    "good_frame.cube/inner.cube": ("no such file", None),  # a path through a file
    "no_such_file.cube": ("no such file", None),
    "axis_count_1e20.cube": ("axis 1 claims 100000000000000000000 points", 4),
    "wrapping_axis_counts.cube": ("= 18446744073709551616 values, more than the ceiling", 4),
    "huge_coordinate.cube": ("number 1.7e308 out of range", 7),
}
MANIFESTS = {
    "bad_yaml.yaml": ("bad YAML", 3),
    "missing_frame.yaml": ("frames[1].file: frame file not found", 5),
    "unknown_key.yaml": ("framez: unknown key (did you mean 'frames'?)", 3),
    "wrong_type.yaml": ("frames[0].value: expected a finite number", 4),
    "not_a_mapping.yaml": ("expected a mapping at the top level", 1),
    "atoms_differ.yaml": ("atom 2 is N but it is O", None),
    "frame_with_nan.yaml": ("nan_value.cube:11: non-finite", None),
    "bad_setting.yaml": ("did you mean 'density_floor'", 3),
    "listed_value_disagrees.yaml": ("frames[0].value: listed value 0.9 angstrom disagrees with "
                                    "the distance 1-2 measured on good_frame.cube: 0.740848", 4),
    "no_such_manifest.yaml": ("no such manifest file", None),
    "plane_coordinates_one.yaml": ("coordinates: expected a list of two coordinates", 3),
    "plane_value_not_pair.yaml": ("frames[0].value: expected two numbers [value1, value2]", 6),
    "plane_grid_bad_value.yaml": ("frames.grid[1][1]: expected a finite number", 8),
    "plane_one_drive.yaml": ("generator.geometry.drive: a plane scan drives two coordinates", 10),
    "plane_coordinate_unit.yaml": ("coordinates[1].unit: required", 4),
    # issue 16: bounded YAML, validated numbers (checked before any key)
    "alias_bomb.yaml": ("f: YAML aliases expand to more than 200000 nodes", 6),
    "deep_nesting.yaml": ("YAML nested deeper than 64 levels", 2),
    "recursive_alias.yaml": ("coordinate.again: recursive YAML alias", 2),
    "list_as_key.yaml": ("frames[0]: a key must be a plain value, not a list", 4),
    "lone_surrogate.yaml": ("description: a lone surrogate U+D800", 2),
    "nul_in_name.yaml": ("name: a NUL byte at character 4", 1),
    "huge_value.yaml": ("frames[0].value: 1e+300 is out of range", 3),
    "huge_integer_value.yaml": ("frames[0].value: 1000", 3),
    "max_float_value.yaml": ("frames.values[0]: 1.7e+308 is out of range", 3),
    "colliding_values.yaml": ("give the same frame file frame_p60.000000.cube", 3),
    "nan_density_floor.yaml": ("analysis.density_floor: expected a finite number, got nan", 3),
    "inf_density_floor.yaml": ("analysis.density_floor: expected a finite number, got inf", 3),
    "nan_max_step.yaml": ("analysis.max_step: expected a finite number, got nan", 3),
    "maxiter_zero.yaml": ("analysis.maxiter: must be >= 1", 3),
    "max_points_negative.yaml": ("analysis.max_points: must be >= 64", 3),
    "long_frame_path.yaml": ("frames[0].file: file name too long", 3),
}


def _run(capsys, args):
    code = main(args)
    out = capsys.readouterr()
    return code, out.err


@pytest.mark.parametrize("name", sorted(CUBES))
def test_bad_cube(capsys, name):
    text, lineno = CUBES[name]
    code, err = _run(capsys, ["inspect", str(BAD / name)])
    assert code == 2
    lines = err.strip().splitlines()
    assert len(lines) == 1, err
    assert name.split("/")[0] in lines[0]
    assert text in lines[0]
    if lineno is not None:
        assert f"{name}:{lineno}:" in lines[0]
    assert "Traceback" not in err


@pytest.mark.parametrize("name", sorted(MANIFESTS))
def test_bad_manifest(capsys, name):
    text, lineno = MANIFESTS[name]
    code, err = _run(capsys, ["check", str(BAD / name)])
    assert code == 2
    lines = err.strip().splitlines()
    assert len(lines) == 1, err
    assert text in lines[0]
    if lineno is not None:
        assert f"{name}:{lineno}:" in lines[0]


def test_corpus_is_large_enough():
    assert len([p for p in BAD.iterdir() if p.name not in ("good_frame.cube", "other_atoms_frame.cube")]) >= 12


def test_every_corpus_file_is_mapped():
    helpers = {"good_frame.cube", "other_atoms_frame.cube", "hydroxyl.xyz", "plane_base.xyz"}
    mapped = {k.split("/")[0] for k in CUBES} | set(MANIFESTS)
    unmapped = sorted(p.name for p in BAD.iterdir() if p.name not in helpers | mapped)
    assert unmapped == []


def test_too_small_grid_is_refused_by_the_analysis(capsys):
    # good_frame.cube is 2x2x3: readable (inspect, check) but no tricubic spline fits it
    code, err = _run(capsys, ["frame", str(BAD / "good_frame.cube")])
    assert code == 2
    assert err.count("\n") == 1 and "good_frame.cube: the grid has 2x2x3 points" in err


def test_real_process_prints_no_traceback():
    r = subprocess.run([sys.executable, "-m", "trackscan", "inspect", str(BAD / "letters_in_data.cube")],
                       capture_output=True, text=True)
    assert r.returncode == 2
    assert r.stderr.count("\n") == 1 and "Traceback" not in r.stderr
    assert r.stdout == ""


_line = st.text(alphabet=st.sampled_from(list("0123456789-+.eE naNinf\t x")), max_size=60)


@settings(max_examples=300, deadline=None)
@given(st.lists(_line, min_size=0, max_size=12))
def test_fuzz_header_raises_only_our_error(lines):
    try:
        parse_cube_header(lines, path="fuzz.cube", max_points=10 ** 6)
    except ParseError:
        pass


@settings(max_examples=200, deadline=None)
@given(n=st.integers(-10 ** 7, 10 ** 7), natoms=st.integers(-3, 3),
       step=st.floats(allow_nan=True, allow_infinity=True))
def test_fuzz_structured_header(n, natoms, step):
    lines = ["c1", "c2", f"{natoms} 0 0 0", f"{n} {step} 0 0", f"{n} 0 {step} 0", f"{n} 0 0 {step}"]
    lines += ["1 1.0 0 0 0"] * abs(natoms) + ["1 5"]
    try:
        h = parse_cube_header(lines, path="fuzz.cube", max_points=10 ** 6)
    except ParseError:
        return
    assert h.n_points <= 10 ** 6
