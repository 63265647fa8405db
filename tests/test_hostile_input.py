"""Hostile input ends fast, in bounded memory, with one line and exit code 2 (issue 16).

The aggregate test builds the inputs that once took gigabytes or hung (an
alias bomb, a link to /dev/zero, a FIFO, decompression bombs, constant and
noise grids, a distance typo for the model generator, ...) in ``tmp_path``
and runs each as a command line in its own process under a 1 GiB
address-space limit and a generous wall-time limit (``hostile_runner.py``).
This tests boundedness, not speed: the limits are far above what the cases
take.  The other tests check the smaller items one by one.
"""

from __future__ import annotations

import bz2
import gzip
import json
import lzma
import os
import pickle
import subprocess
import sys
import warnings
from pathlib import Path

import numpy as np
import pytest

from trackscan.cli import main
from trackscan.errors import DegenerateDensityError, InputError, ParseError
from trackscan.grid import DensityGrid
from trackscan.io.cube import read_cube, write_cube

HERE = Path(__file__).parent
BAD = HERE / "data" / "bad"
LIMIT_BYTES = 1 << 30          # 1 GiB of address space per case
WALL_SECONDS = 30.0            # per case; they take well under a few seconds

WATER = ([8, 1, 1], [[0.0, 0.0, 0.22], [1.43, 0.0, -0.89], [-1.43, 0.0, -0.89]])


def _grid(values, spacing=0.3, atoms=WATER):
    n = np.asarray(values.shape)
    origin = -0.5 * (n - 1) * spacing
    numbers, positions = atoms
    return DensityGrid(values, origin, np.eye(3) * spacing, numbers, [float(z) for z in numbers],
                       positions)


def _header_text(n: int) -> bytes:
    """The header of an n^3 water cube whose values follow."""
    g = _grid(np.zeros((n, n, n)))
    lines = ["bomb", "values follow", f"{3:5d} {g.origin[0]:12.6f} {g.origin[1]:12.6f} "
             f"{g.origin[2]:12.6f}"]
    lines += [f"{n:5d} {ax[0]:12.6f} {ax[1]:12.6f} {ax[2]:12.6f}" for ax in g.axes]
    lines += [f"{z:5d} {float(z):12.6f} {p[0]:12.6f} {p[1]:12.6f} {p[2]:12.6f}"
              for z, p in zip(g.numbers, g.positions)]
    return ("\n".join(lines) + "\n").encode()


def _bomb(path: Path, compress, members: int = 300, chunk: int = 4 << 20) -> None:
    """A cube of a few MB that inflates to members * chunk bytes (1.2 GB) of valid "0 " values.

    Concatenated members/streams (which gzip, bzip2 and xz readers all
    follow) of one compressed chunk: cheap to build, expensive to inflate.
    """
    body = compress(b"0 " * (chunk // 2))
    with open(path, "wb") as fh:
        fh.write(compress(_header_text(8)))
        for _ in range(members):
            fh.write(body)


def _manifest(path: Path, frames: str, extra: str = "") -> Path:
    path.write_text(f"name: {path.stem}\ncoordinate: {{label: d, unit: bohr}}\n{extra}"
                    f"frames: {frames}\n", encoding="utf-8")
    return path


def _hostile_cases(tmp: Path) -> list:
    """(name, argv, text the one stderr line must hold) for every hostile input."""
    cases = []
    rng = np.random.default_rng(16)
    # --- frames that are no regular files
    fifo = tmp / "fifo.cube"
    os.mkfifo(fifo)
    cases.append(("fifo", ["inspect", str(fifo)], "is a FIFO (named pipe)"))
    zero = tmp / "zero.cube"
    zero.symlink_to("/dev/zero")
    cases.append(("dev-zero link", ["inspect", str(zero)], "is a character device"))
    cases.append(("fifo in a scan", ["check", str(_manifest(tmp / "fifo.yaml",
                                                             f"[{{file: {fifo}, value: 1}}]"))],
                  "is a FIFO"))
    # --- decompression bombs (1.2 GB of values for a 512-point grid)
    for suffix, compress in ((".gz", gzip.compress), (".bz2", bz2.compress),
                             (".xz", lzma.compress)):
        bomb = tmp / f"bomb.cube{suffix}"
        _bomb(bomb, compress)
        cases.append((f"{suffix} bomb", ["inspect", str(bomb)], "the values take more than"))
    # --- grids with nothing to trace, and noise
    for name, values in (("constant", np.full((20, 20, 20), 0.1)),
                         ("all-zero", np.zeros((20, 20, 20))),
                         ("noise", rng.random((40, 40, 40)))):
        cube = tmp / f"{name}.cube"
        write_cube(cube, _grid(values))
        want = "every grid value is" if name != "noise" else "degenerate or noisy density"
        cases.append((f"{name} grid", ["frame", str(cube)], want))
    cases.append(("2x2x3 grid", ["frame", str(BAD / "good_frame.cube")], "the grid has 2x2x3"))
    # --- manifests
    for name in ("alias_bomb", "deep_nesting", "recursive_alias", "list_as_key", "nul_in_name",
                 "huge_value", "huge_integer_value", "max_float_value", "colliding_values",
                 "nan_density_floor", "maxiter_zero", "max_points_negative", "long_frame_path"):
        cases.append((name, ["check", str(BAD / f"{name}.yaml")], f"{name}.yaml:"))
    cases.append(("lone surrogate, analyze",
                  ["analyze", str(BAD / "lone_surrogate.yaml"), "--out", str(tmp / "out-sur")],
                  "a lone surrogate U+D800"))
    big = tmp / "long_description.yaml"
    with open(big, "w", encoding="utf-8") as fh:
        fh.write("name: big\ndescription: ")
        fh.write("x" * (50 << 20))
        fh.write("\ncoordinate: {label: d, unit: bohr}\nframes: [good_frame.cube]\n")
    cases.append(("50 MB description", ["check", str(big)], "more than the 8388608"))
    desc = _manifest(tmp / "description.yaml", f"[{{file: {BAD / 'good_frame.cube'}, value: 1}}]",
                     "description: " + "y" * 100_000 + "\n")
    cases.append(("100 kB description", ["check", str(desc)], "description: 100000 characters"))
    # --- the model generator with a distance typo of 1.0e6 angstrom
    typo = tmp / "typo.yaml"
    typo.write_text("name: typo\ncoordinate: {label: O-H, unit: angstrom, distance: [1, 2]}\n"
                    "frames: {values: [1.0e6], directory: frames}\n"
                    f"generator:\n  geometry: {{xyz: {BAD / 'hydroxyl.xyz'}, "
                    "drive: {distance: [1, 2]}}\n  promolecule: {spacing: 0.2}\n",
                    encoding="utf-8")
    cases.append(("distance typo", ["analyze", str(typo), "--out", str(tmp / "out-typo")],
                  "is the value a typo"))
    # --- cube headers
    for name in ("axis_count_1e20", "wrapping_axis_counts", "huge_coordinate"):
        cases.append((name, ["inspect", str(BAD / f"{name}.cube")], f"{name}.cube:"))
    # --- errors in worker processes keep their file and line
    bad = _manifest(tmp / "workers.yaml",
                    f"[{{file: {BAD / 'truncated_values.cube'}, value: 1}}, "
                    f"{{file: {BAD / 'letters_in_data.cube'}, value: 2}}]")
    cases.append(("worker error", ["analyze", str(bad), "--jobs", "2", "--out",
                                   str(tmp / "out-workers")], "_values.cube:11: truncated"))
    if os.geteuid() != 0:           # root reads files whatever their mode
        unreadable = tmp / "unreadable.cube"
        unreadable.write_bytes((BAD / "good_frame.cube").read_bytes())
        unreadable.chmod(0)
        m = _manifest(tmp / "unreadable.yaml", f"[{{file: {unreadable}, value: 1}}]")
        cases.append(("unreadable frame", ["analyze", str(m), "--out", str(tmp / "out-unr")],
                      "permission denied"))
    return cases


def test_every_hostile_input_ends_fast_with_one_line(tmp_path):
    cases = _hostile_cases(tmp_path)
    assert len(cases) >= 30
    spec = [{"name": name, "args": args, "cwd": str(tmp_path),
             "stderr": str(tmp_path / f"stderr-{k}.txt")}
            for k, (name, args, _) in enumerate(cases)]
    (tmp_path / "cases.json").write_text(json.dumps(spec), encoding="utf-8")
    env = dict(os.environ, OMP_NUM_THREADS="1", MPLBACKEND="Agg",
               PYTHONPATH=os.pathsep.join([str(HERE.parent)] + sys.path))
    run = subprocess.run([sys.executable, str(HERE / "hostile_runner.py"),
                          str(tmp_path / "cases.json"), str(LIMIT_BYTES), str(WALL_SECONDS)],
                         capture_output=True, text=True, env=env,
                         timeout=WALL_SECONDS * len(cases) + 60)
    assert run.returncode == 0, run.stderr
    results = json.loads(run.stdout)
    assert [r["name"] for r in results] == [c[0] for c in cases]
    problems = []
    for (name, _, want), result, s in zip(cases, results, spec):
        err = Path(s["stderr"]).read_text(encoding="utf-8", errors="replace")
        lines = err.strip().splitlines()
        ok = (not result["timed_out"] and result["code"] == 2 and len(lines) == 1
              and "Traceback" not in err and want in lines[0])
        if not ok:
            problems.append(f"{name}: {result} {err[-600:]!r}")
    assert problems == []
    # nothing is left behind by bad input: no output folder, no frame
    assert not any((tmp_path / d).exists() for d in ("out-sur", "out-typo", "out-workers"))
    assert not (tmp_path / "frames").exists() or not list((tmp_path / "frames").glob("*.cube"))


# -- the smaller items, one by one -----------------------------------------

def test_worker_errors_pickle_with_file_and_line():
    exc = ParseError("truncated", "frame.cube", 11)
    back = pickle.loads(pickle.dumps(exc))
    assert str(back) == "frame.cube:11: truncated" and back.lineno == 11
    deg = pickle.loads(pickle.dumps(DegenerateDensityError("plateau", "f.cube")))
    assert isinstance(deg, InputError) and str(deg) == "f.cube: plateau"


def _good_text() -> str:
    return (BAD / "good_frame.cube").read_text(encoding="ascii")


def test_fortran_d_exponents_in_values_read_as_e(tmp_path):
    text = _good_text()
    head, body = text.split("\n")[:8], text.split("\n")[8:]
    fortran = tmp_path / "d.cube"
    fortran.write_text("\n".join(head + [ln.replace("E", "D") for ln in body]), encoding="ascii")
    assert "D-01" in fortran.read_text()
    np.testing.assert_array_equal(read_cube(fortran).values,
                                  read_cube(BAD / "good_frame.cube").values)


def test_cr_only_line_endings_read_and_report_the_right_line(tmp_path):
    cr = tmp_path / "cr.cube"
    cr.write_bytes(_good_text().replace("\n", "\r").encode())
    np.testing.assert_array_equal(read_cube(cr).values, read_cube(BAD / "good_frame.cube").values)
    bad = tmp_path / "cr_bad.cube"
    bad.write_bytes((BAD / "letters_in_data.cube").read_bytes().replace(b"\n", b"\r"))
    with pytest.raises(ParseError) as info:
        read_cube(bad)
    assert info.value.lineno == 11        # as in the LF file (tests/test_bad_input.py)


def _water_grid(scale=1.0, offset=0.0, far=None):
    from trackscan.promolecule import promolecule_grid

    numbers, positions = WATER
    g = promolecule_grid(numbers, positions, spacing=0.25, margin=3.0)
    values = g.values * scale + offset
    pos = np.array(g.positions)
    if far is not None:
        pos[2] = far
    return DensityGrid(values, g.origin, g.axes, g.numbers, g.charges, pos, source="water.cube")


@pytest.fixture(scope="module")
def water_frames():
    from trackscan.topology import analyze_frame

    return {
        "plain": analyze_frame(_water_grid()),
        "negative": analyze_frame(_water_grid(offset=-0.01)),
        "weak": analyze_frame(_water_grid(scale=0.3)),   # 30 % of the density: not all-electron
    }


def test_negative_values_are_reported_in_the_frame(water_frames):
    assert not any("negative" in w for w in water_frames["plain"].warnings)
    warned = [w for w in water_frames["negative"].to_dict()["warnings"] if "negative" in w]
    assert len(warned) == 1 and "difference or spin density" in warned[0]


def test_data_far_below_the_subtracted_model_is_reported(water_frames):
    assert not any("subtracted core model" in w for w in water_frames["plain"].warnings)
    warned = [w for w in water_frames["weak"].to_dict()["warnings"] if "subtracted core model" in w]
    assert len(warned) == 1 and warned[0].startswith("at atom(s) [1]")


def test_far_away_atom_raises_no_numpy_warning():
    from trackscan.topology import analyze_frame

    with warnings.catch_warnings():
        warnings.simplefilter("error")
        topo = analyze_frame(_water_grid(far=[9e5, -9e5, 9e5]))
    assert any("outside the grid" in w for w in topo.warnings)


def test_settings_are_finite_and_in_range():
    from trackscan.settings import AnalysisSettings
    from trackscan.tracking import TrackingSettings

    for bad in ({"maxiter": 0}, {"max_points": -1}, {"density_floor": float("nan")},
                {"max_step": float("inf")}, {"seed_retries": 3}, {"gtol": 0.0},
                {"maxiter": 1.5}):
        with pytest.raises(ValueError):
            AnalysisSettings(**bad)
    with pytest.raises(ValueError):
        TrackingSettings(match_gate=float("nan"))
    assert AnalysisSettings().to_dict()["maxiter"] == 60


def test_cli_flag_nan_is_refused(capsys):
    code = main(["frame", str(BAD / "good_frame.cube"), "--density-floor", "nan"])
    err = capsys.readouterr().err
    assert code == 2 and "option.density_floor: expected a finite number" in err


def test_markdown_report_shows_html_from_the_manifest_as_text():
    from trackscan.report.document import Document, Paragraph, Section
    from trackscan.report.markdown import render_markdown

    doc = Document(title="<b>scan</b>", sections=[
        Section(key="s", title="About", blocks=[Paragraph(text='<script>alert("x")</script> a < b')])])
    md = render_markdown(doc)
    assert "<script>" not in md and "<b>" not in md
    assert "&lt;script>" in md and "a < b" in md


def test_file_system_refusal_is_one_line_exit_2(monkeypatch, capsys):
    import trackscan.cli.inspect as inspect_cmd

    def refuse(args):
        raise PermissionError(13, "Permission denied", "/results/scan.json")

    monkeypatch.setattr(inspect_cmd, "run", refuse)
    code = main(["inspect", "x.cube"])
    err = capsys.readouterr().err
    assert code == 2 and err == "trackscan: error: /results/scan.json: Permission denied\n"
