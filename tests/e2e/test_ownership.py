"""trackscan never replaces a file it did not write, and never an input.

Each case is a finding of issue 16 reproduced on the command line: the
user's files (a geometry in a folder named as the frames directory, the
input cube named as --json, a report.md beside a copied scan.json) must
come out byte for byte as they went in, with exit code 2 and one line.
"""

import importlib.util
import json
import shutil
from pathlib import Path

import pytest

from trackscan.cli import main
from trackscan.io.manifest import generated_frame_name, read_frame_record
from trackscan.io.output import MARKER

HERE = Path(__file__).parent
_spec = importlib.util.spec_from_file_location("fold_model",
                                               HERE.parent / "refine" / "fold_model.py")
fm = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(fm)

VALUES = [2.7, 3.0]


@pytest.fixture(scope="module")
def analysed(tmp_path_factory):
    """A small scan analysed once by the CLI (scan/ with its frames, out/ with the report)."""
    root = tmp_path_factory.mktemp("analysed")
    manifest = fm.write_scan(root / "scan", VALUES, spacing=0.3, margin=1.5)
    assert main(["-q", "analyze", str(manifest), "--out", str(root / "out")]) == 0
    return root


def _copy(analysed, tmp_path):
    for name in ("scan", "out"):
        shutil.copytree(analysed / name, tmp_path / name)
    return tmp_path / "scan" / "scan.yaml", tmp_path / "out"


def _one_line(capsys, *words):
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1, err
    for w in words:
        assert w in err[0], err[0]
    return err[0]


def test_frames_directory_of_someone_else(tmp_path, capsys):
    manifest = fm.write_scan(tmp_path / "scan", VALUES, spacing=0.3, margin=1.5)
    text = manifest.read_text().replace("directory: frames", "directory: ../victim")
    manifest.write_text(text)
    victim = tmp_path / "victim"
    victim.mkdir()
    mine = victim / generated_frame_name(2.7).replace(".cube", ".xyz")
    mine.write_text("my own geometry\n")
    assert main(["analyze", str(manifest), "--out", str(tmp_path / "out")]) == 2
    _one_line(capsys, mine.name, "did not write this file")
    assert mine.read_text() == "my own geometry\n"
    assert sorted(p.name for p in victim.iterdir()) == [mine.name]     # nothing written


def _small_cube(analysed, tmp_path):
    cube = tmp_path / "in.cube"
    shutil.copy(analysed / "scan" / "frames" / generated_frame_name(2.7), cube)
    return cube


def test_frame_json_refuses_the_input_and_foreign_files(analysed, tmp_path, capsys):
    cube = _small_cube(analysed, tmp_path)
    before = cube.read_bytes()
    capsys.readouterr()
    assert main(["frame", str(cube), "--json", str(cube)]) == 2
    _one_line(capsys, "--json names the input cube")
    assert cube.read_bytes() == before
    theirs = tmp_path / "theirs.json"
    theirs.write_text("{}\n")
    assert main(["frame", str(cube), "--json", str(theirs)]) == 2
    _one_line(capsys, "did not write this file")
    assert theirs.read_text() == "{}\n"
    ours = tmp_path / "frame.json"
    assert main(["frame", str(cube), "--json", str(ours)]) == 0
    assert json.loads(ours.read_text())["poincare_hopf"]["holds"]
    assert main(["frame", str(cube), "--json", str(ours)]) == 0           # its own file again
    listed = json.loads((tmp_path / MARKER).read_text())
    assert listed["files"] == ["frame.json"] and listed["output_folder"] is False


def test_report_beside_a_copied_scan_json(analysed, tmp_path, capsys):
    mine = tmp_path / "mine"
    mine.mkdir()
    shutil.copy(analysed / "out" / "scan.json", mine / "scan.json")
    (mine / "report.md").write_text("my notes\n")
    (mine / "changes.csv").write_text("my,table\n")
    capsys.readouterr()
    assert main(["report", str(mine / "scan.json")]) == 2
    _one_line(capsys, "holds files trackscan did not write")
    assert (mine / "report.md").read_text() == "my notes\n"
    assert (mine / "changes.csv").read_text() == "my,table\n"
    assert not (mine / MARKER).exists()
    # the folder trackscan wrote lists what it wrote
    listed = set(json.loads((analysed / "out" / MARKER).read_text())["files"])
    assert {"scan.json", ".cache", "report.md", "report.html", "changes.csv",
            "critical_points.csv"} <= listed


def test_unlisted_file_in_an_output_folder_is_not_replaced(analysed, tmp_path, capsys):
    manifest, out = _copy(analysed, tmp_path)
    marker = json.loads((out / MARKER).read_text())
    assert marker["output_folder"] is True and "scan.json" in marker["files"]
    # the user puts a file of their own under a name trackscan has not listed
    marker["files"].remove("scan.json")
    (out / MARKER).write_text(json.dumps(marker))
    (out / "scan.json").write_text("mine\n")
    capsys.readouterr()
    assert main(["-q", "analyze", str(manifest), "--out", str(out)]) == 2
    _one_line(capsys, "scan.json", "did not write this file")
    assert (out / "scan.json").read_text() == "mine\n"


def test_finished_cube_at_a_value_is_adopted_not_recomputed(tmp_path):
    from trackscan.analysis.generate import FrameTask, generate_frames
    from trackscan.generators import make_generator
    from trackscan.io.manifest import load_manifest

    manifest = load_manifest(fm.write_scan(tmp_path / "scan", VALUES, spacing=0.3, margin=1.5))
    gen = make_generator(manifest.generator, coordinate=manifest.coordinate)
    calls = []

    class Counting:
        has_geometry = True
        geometry = staticmethod(gen.geometry)

        def generate(self, value, path, workdir=None):
            calls.append(value)
            return gen.generate(value, path, workdir=workdir)

    folder = Path(manifest.frames_directory)
    # a complete cube at the value, made elsewhere and not recorded (e.g. by
    # a run killed before its record existed, or copied by the user)
    gen.generate(2.8, tmp_path / "elsewhere" / "c.cube")
    folder.mkdir()
    shutil.copy(tmp_path / "elsewhere" / "c.cube", folder / generated_frame_name(2.8))
    task = FrameTask(2.8, folder / generated_frame_name(2.8), {"refine": {"round": 1}})
    made = generate_frames(manifest, [task], generator=Counting())
    assert calls == [] and made[0].cached
    assert [r["value"] for r in read_frame_record(folder)] == [2.8]
    # a broken cube there that trackscan did not write is refused, never replaced
    broken = folder / generated_frame_name(2.9)
    broken.write_text("not a cube\n")
    from trackscan.io.ownership import ForeignFileError

    with pytest.raises(ForeignFileError, match="did not write"):
        generate_frames(manifest, [FrameTask(2.9, broken)], generator=Counting())
    assert broken.read_text() == "not a cube\n" and calls == []


def test_stale_temporary_files_are_removed_on_the_next_run(analysed, tmp_path):
    from trackscan.analysis import analyze_scan
    from trackscan.io.manifest import load_manifest
    from trackscan.io.output import open_output_dir

    manifest, out = _copy(analysed, tmp_path)
    frames = tmp_path / "scan" / "frames"
    stale = [frames / ".record.json.k2j3h4.tmp", frames / ".partial-4242-frame_p2.750000.cube",
             out / ".scan.json.a1b2c3.tmp", out / ".cache" / ".abc.json.x1y2.tmp"]
    for p in stale:
        p.write_text("left by a killed run")
    with open_output_dir(out):                       # what analyze does before it writes
        analyze_scan(load_manifest(manifest), out_dir=out)
    assert [p for p in stale if p.exists()] == []
