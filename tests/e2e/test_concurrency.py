"""Two trackscan processes at once never mix their files.

Each case starts two real ``python -m trackscan`` processes.  The first one
generates its frames with a deliberately slow external program (it waits
for a go file), so the second one starts while the first is writing; the
second must stop at once with one line and exit code 2, and everything the
first one wrote must be whole and consistent.
"""

import json
import os
import subprocess
import sys
import textwrap
import time
from pathlib import Path

from trackscan.io.cube import read_cube
from trackscan.io.manifest import read_frame_record

REPO = Path(__file__).resolve().parent.parent.parent

PROGRAM = textwrap.dedent(r'''
    import os, sys, time
    value, xyz, cube = sys.argv[1], sys.argv[2], sys.argv[3]
    open("started.txt", "a").write(value + "\n")
    while not os.path.exists("go"):
        time.sleep(0.05)
    from trackscan.io.cube import write_cube
    from trackscan.io.xyz import read_xyz
    from trackscan.promolecule import promolecule_grid
    frame = read_xyz(xyz)[0]
    write_cube(cube, promolecule_grid(frame.numbers, frame.positions, spacing=0.4, margin=1.5))
''')


def _scan(folder: Path, name: str, frames_dir: str, values):
    folder.mkdir(parents=True, exist_ok=True)
    (folder / "qc.py").write_text(PROGRAM)
    (folder / "start.xyz").write_text("2\nH2\nH 0 0 0\nH 0 0 0.74\n")
    vals = ", ".join(repr(v) for v in values)
    text = "\n".join([
        f"name: {name}", "coordinate: {label: H-H, unit: angstrom, distance: [1, 2]}",
        f"frames: {{values: [{vals}], directory: {frames_dir}}}", "generator:",
        "  geometry: {xyz: start.xyz, drive: {distance: [1, 2]}}",
        f"  command: [{json.dumps(sys.executable)}, qc.py, '{{value}}', '{{xyz}}', '{{cube}}']",
    ]) + "\n"
    (folder / "scan.yaml").write_text(text)
    return folder / "scan.yaml"


def _start(manifest, out):
    env = dict(os.environ, PYTHONPATH=str(REPO), OMP_NUM_THREADS="1", MPLBACKEND="Agg")
    return subprocess.Popen([sys.executable, "-m", "trackscan", "-q", "analyze", str(manifest),
                             "--out", str(out)], cwd=manifest.parent, env=env,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)


def _wait_started(folder, proc):
    t0 = time.monotonic()
    while not (folder / "started.txt").exists():
        assert proc.poll() is None, proc.stderr.read()
        assert time.monotonic() - t0 < 60
        time.sleep(0.05)


def test_two_analyze_runs_share_a_frames_folder(tmp_path):
    a = _scan(tmp_path / "a", "run-a", "../shared", [0.70, 0.80])
    b = _scan(tmp_path / "b", "run-b", "../shared", [0.70, 0.80])
    first = _start(a, tmp_path / "out-a")
    _wait_started(tmp_path / "a", first)
    second = _start(b, tmp_path / "out-b")
    out, err = second.communicate(timeout=60)
    assert second.returncode == 2
    lines = err.strip().splitlines()
    assert len(lines) == 1 and "another trackscan run is writing into this folder" in lines[0]
    assert "shared" in lines[0]
    (tmp_path / "a" / "go").write_text("")
    out, err = first.communicate(timeout=120)
    assert first.returncode == 0, err
    shared = tmp_path / "shared"
    rec = read_frame_record(shared, pending=True)
    assert sorted(r["value"] for r in rec) == [0.7, 0.8] and not any("pending" in r for r in rec)
    for r in rec:                                  # whole cubes, written by run a's program
        assert read_cube(shared / r["file"]).n_atoms == 2
    assert not (tmp_path / "b" / "started.txt").exists()   # b never ran its program
    # once a is done, b uses the frames a made (no generation, exit 0)
    second = _start(b, tmp_path / "out-b")
    out, err = second.communicate(timeout=120)
    assert second.returncode == 0, err
    assert not (tmp_path / "b" / "started.txt").exists()


def test_two_scans_into_one_output_folder(tmp_path):
    a = _scan(tmp_path / "a", "scan-a", "frames", [0.70, 0.80])
    b = _scan(tmp_path / "b", "scan-b", "frames", [0.75, 0.85])
    (tmp_path / "b" / "go").write_text("")
    out_dir = tmp_path / "out"
    first = _start(a, out_dir)
    _wait_started(tmp_path / "a", first)
    second = _start(b, out_dir)
    out, err = second.communicate(timeout=60)
    assert second.returncode == 2
    lines = err.strip().splitlines()
    assert len(lines) == 1 and "another trackscan run is writing into this folder" in lines[0]
    (tmp_path / "a" / "go").write_text("")
    out, err = first.communicate(timeout=120)
    assert first.returncode == 0, err
    scan = json.loads((out_dir / "scan.json").read_text())
    assert scan["scan"]["name"] == "scan-a"
    html = (out_dir / "report.html").read_text()
    assert "scan-a" in html and "scan-b" not in html
