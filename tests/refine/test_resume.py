"""Resume: a refine stopped by a failing generator continues without repeats.

The generator below wraps the manifest's promolecule generator, logs every
value it is asked for and fails on its third call (as a crashed or killed
quantum-chemistry job would).  The rerun must ask only for values not
finished before, and the two runs together must make exactly the frames an
uninterrupted refine makes.
"""

import importlib.util
import json
import sys
from pathlib import Path

from trackscan.cli import main

from trackscan.errors import GeneratorError
from trackscan.generators import make_generator
from trackscan.io.manifest import load_manifest, read_frame_record
from trackscan.refine.scan import refine_manifest

_spec = importlib.util.spec_from_file_location(
    "fold_model", Path(__file__).with_name("fold_model.py"))
fm = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(fm)

TOL = 1e-3
VALUES = [2.6, 2.7, 2.8, 2.9, 3.0]


class LoggingGenerator:
    """Delegates to a real generator; records refine calls; may fail on call `fail_at`.

    (The scan's own frames, listed by value, are made by it too; they are
    not counted.)
    """

    def __init__(self, inner, fail_at=None):
        self.inner, self.fail_at, self.calls = inner, fail_at, []
        self.has_geometry = inner.has_geometry
        self.geometry = inner.geometry

    def generate(self, value, cube_path, workdir=None):
        if value in VALUES:
            return self.inner.generate(value, cube_path, workdir=workdir)
        self.calls.append(value)
        if self.fail_at is not None and len(self.calls) == self.fail_at:
            raise GeneratorError(f"simulated crash of the calculation at {value}")
        return self.inner.generate(value, cube_path, workdir=workdir)


def _run(folder, fail_at=None):
    manifest = load_manifest(folder / "scan.yaml")
    gen = LoggingGenerator(make_generator(manifest.generator, coordinate=manifest.coordinate),
                           fail_at)
    try:
        scan, result = refine_manifest(manifest, tolerance=TOL, out_dir=folder / "out",
                                       generator=gen)
    except GeneratorError:
        return gen.calls, None
    return gen.calls, scan.to_dict()


def test_interrupted_refine_resumes_without_repeating(tmp_path):
    ref_dir, cut_dir = tmp_path / "whole", tmp_path / "cut"
    fm.write_scan(ref_dir, VALUES, spacing=0.2, margin=1.6)
    fm.write_scan(cut_dir, VALUES, spacing=0.2, margin=1.6)
    whole, scan = _run(ref_dir)
    assert len(whole) >= 3 and scan is not None

    first, none = _run(cut_dir, fail_at=3)
    assert none is None and len(first) == 3
    recorded = [r["value"] for r in read_frame_record(cut_dir / "frames") if "refine" in r]
    assert sorted(recorded) == sorted(first[:2])          # the two finished frames, recorded

    second, scan2 = _run(cut_dir)
    assert not set(second) & set(first[:2])               # nothing finished is computed again
    assert second[0] == first[2]                          # the failed one is tried again
    assert first[:2] + second == whole                    # same frames as without the crash
    assert [c["bracket"] for c in scan2["changes"]] == [c["bracket"] for c in scan["changes"]]
    assert scan2["scan"]["refine"]["evaluations"] == len(whole)


_SCRIPT = """
import os, sys
from trackscan.io.cube import write_cube
from trackscan.io.xyz import read_xyz
from trackscan.promolecule import promolecule_grid
value, xyz, cube = sys.argv[1], sys.argv[2], sys.argv[3]
with open("calls.txt", "a") as fh:
    fh.write(value + "\\n")
if float(value) not in (2.7, 2.8, 2.9, 3.0):     # a refinement frame
    try:
        os.rename("fail-once", "failed")          # atomic: only one call fails
        sys.exit("simulated crash")
    except FileNotFoundError:
        pass
frame = read_xyz(xyz)[0]
write_cube(cube, promolecule_grid(frame.numbers, frame.positions, spacing=0.25, margin=1.5))
"""


def test_parallel_round_with_a_failed_call(tmp_path):
    # two values per round in worker processes; one external calculation of
    # the first round crashes: the other is recorded, and the rerun does not
    # compute it again
    folder = tmp_path / "scan"
    manifest = fm.write_scan(folder, [2.7, 2.8, 2.9, 3.0], density=False)
    (folder / "gen.py").write_text(_SCRIPT)
    with open(manifest, "a") as fh:
        fh.write(f"  command: [{json.dumps(sys.executable)}, gen.py, '{{value}}', '{{xyz}}', "
                 "'{cube}']\n")
    (folder / "fail-once").write_text("")
    args = ["refine", str(manifest), "--no-report", "--tolerance", "1e-3", "--jobs", "2",
            "--out", str(tmp_path / "out")]
    assert main(args) == 1                                   # the crash is reported
    first = (folder / "calls.txt").read_text().split()[4:]     # after the scan's own frames
    assert len(first) == 2
    # the scan's own frames (listed by value) are recorded as made; refine's carry 'refine'
    recorded = [r["value"] for r in read_frame_record(folder / "frames") if "refine" in r]
    assert len(recorded) == 1 and f"{recorded[0]!r}" in first
    assert main(args) == 0
    calls = (folder / "calls.txt").read_text().split()[6:]
    assert f"{recorded[0]!r}" not in calls                   # the finished one is not redone
    assert len(calls) == len(set(calls))
