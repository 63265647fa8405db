"""The command generator stops the user's program with trackscan, and waits for nothing else.

The program below is a stand-in for a quantum-chemistry wrapper: it writes
its pid, then (by MODE) sleeps, leaves a daemonised grandchild holding its
output, or prints a lot, and writes a promolecule cube for the geometry it
is given.  The checks use the operating system itself (process ids that
exist or not, the peak resident size of a child process).
"""

import json
import os
import resource
import signal
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import pytest

from trackscan.cli import main
from trackscan.generators import make_generator
from trackscan.io.generator_config import DEFAULT_TIMEOUT, parse_generator_config
from trackscan.io.cube import read_cube

REPO = Path(__file__).resolve().parent.parent.parent

PROGRAM = textwrap.dedent(r'''
    import os, sys, time
    mode, value, xyz, cube = sys.argv[1], sys.argv[2], sys.argv[3], sys.argv[4]
    open("pids.txt", "a").write(f"{os.getpid()}\n")
    if mode == "sleep":
        time.sleep(120)
    if mode == "daemon":
        if os.fork() == 0:            # a grandchild that leaves the group, keeping stdout
            os.setsid()
            open("grandchild.txt", "w").write(str(os.getpid()))
            time.sleep(120)
            os._exit(0)
    if mode == "loud":
        block = "x" * 1023 + "\n"
        for _ in range(100 * 1024):   # 100 MB of output
            sys.stdout.write(block)
    from trackscan.io.cube import write_cube
    from trackscan.io.xyz import read_xyz
    from trackscan.promolecule import promolecule_grid
    frame = read_xyz(xyz)[0]
    write_cube(cube, promolecule_grid(frame.numbers, frame.positions, spacing=0.4, margin=1.5))
''')


@pytest.fixture
def scan(tmp_path):
    (tmp_path / "qc.py").write_text(PROGRAM)
    (tmp_path / "start.xyz").write_text("2\nH2\nH 0 0 0\nH 0 0 0.74\n")
    return tmp_path


def _manifest(scan, mode, timeout=None):
    lines = ["name: hygiene", "coordinate: {label: H-H, unit: angstrom, distance: [1, 2]}",
             "frames: {values: [0.74, 0.80], directory: frames}", "generator:",
             "  geometry: {xyz: start.xyz, drive: {distance: [1, 2]}}",
             f"  command: [{json.dumps(sys.executable)}, qc.py, {mode}, '{{value}}', '{{xyz}}', "
             "'{cube}']"]
    if timeout:
        lines.append(f"  timeout: {timeout}")
    path = scan / "scan.yaml"
    path.write_text("\n".join(lines) + "\n")
    return path


def _env():
    return dict(os.environ, PYTHONPATH=str(REPO), OMP_NUM_THREADS="1", MPLBACKEND="Agg")


def _pids(scan):
    path = scan / "pids.txt"
    return [int(x) for x in path.read_text().split()] if path.is_file() else []


def _alive(pid):
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    try:
        with open(f"/proc/{pid}/stat") as fh:
            return fh.read().rsplit(")", 1)[1].split()[0] != "Z"
    except FileNotFoundError:
        return False


def _wait_gone(pid, timeout):
    t0 = time.monotonic()
    while _alive(pid) and time.monotonic() - t0 < timeout:
        time.sleep(0.05)
    return not _alive(pid)


def test_default_timeout():
    gen = {"command": ["prog", "{cube}"]}
    assert parse_generator_config(gen).options.timeout == DEFAULT_TIMEOUT == 24 * 3600
    assert parse_generator_config(dict(gen, timeout=90)).options.timeout == 90


@pytest.mark.parametrize("sig", [signal.SIGTERM, signal.SIGKILL])
def test_killing_trackscan_stops_the_program(scan, sig):
    manifest = _manifest(scan, "sleep")
    proc = subprocess.Popen([sys.executable, "-m", "trackscan", "analyze", str(manifest),
                             "--out", str(scan / "out")], env=_env(), cwd=scan,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    t0 = time.monotonic()
    while not _pids(scan):
        assert proc.poll() is None, proc.stderr.read()
        assert time.monotonic() - t0 < 60
        time.sleep(0.05)
    program = _pids(scan)[0]
    assert _alive(program)
    proc.send_signal(sig)
    proc.communicate(timeout=30)
    assert proc.returncode == (128 + sig if sig == signal.SIGTERM else -sig)
    # SIGTERM: trackscan stops the group itself; SIGKILL: the watchdog notices
    assert _wait_gone(program, timeout=8.0)
    assert not (scan / "frames" / "frame_p0.740000.cube").exists()


def test_daemonised_grandchild_is_not_waited_for(scan):
    manifest = _manifest(scan, "daemon", timeout=60)
    gen = make_generator(parse_generator_config(
        {"geometry": {"xyz": "start.xyz", "drive": {"distance": [1, 2]}},
         "command": [sys.executable, "qc.py", "daemon", "{value}", "{xyz}", "{cube}"],
         "timeout": 60}, path=manifest))
    t0 = time.monotonic()
    try:
        out = gen.generate(0.74, scan / "frames" / "f.cube")
        elapsed = time.monotonic() - t0
    finally:
        grandchild = scan / "grandchild.txt"
        for _ in range(100):
            if grandchild.is_file() and grandchild.read_text():
                break
            time.sleep(0.05)
        pid = int(grandchild.read_text())
        still_there = _alive(pid)
        if still_there:
            os.kill(pid, signal.SIGKILL)
    assert still_there                       # it really outlived the program, holding stdout
    assert elapsed < 20                      # was: waited for the grandchild (63 s)
    assert read_cube(out.path).n_atoms == 2  # and the good cube is kept


_MEASURE = textwrap.dedent('''
    import resource, sys
    from trackscan.generators import make_generator
    from trackscan.io.generator_config import parse_generator_config
    cfg = {"geometry": {"xyz": "start.xyz", "drive": {"distance": [1, 2]}},
           "command": [sys.executable, "qc.py", "MODE", "{value}", "{xyz}", "{cube}"]}
    ok = make_generator(parse_generator_config(dict(cfg, command=[
        a.replace("MODE", "ok") for a in cfg["command"]]), path="scan.yaml"))
    loud = make_generator(parse_generator_config(dict(cfg, command=[
        a.replace("MODE", "loud") for a in cfg["command"]]), path="scan.yaml"))
    ok.generate(0.74, "frames/a.cube")
    before = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    loud.generate(0.80, "frames/b.cube")
    after = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    print(before, after)
''')


def test_program_output_streams_to_the_log(scan):
    (scan / "measure.py").write_text(_MEASURE)
    res = subprocess.run([sys.executable, "measure.py"], cwd=scan, env=_env(),
                         capture_output=True, text=True, timeout=120)
    assert res.returncode == 0, res.stderr
    before, after = (int(x) for x in res.stdout.split())
    log = scan / "frames" / "b.log"
    assert log.stat().st_size > 100 * 2**20          # all of the output is in the log
    assert (after - before) * 1024 < 30 * 2**20      # and none of it was held in memory


def test_missing_program_exit_2(scan, capsys):
    path = scan / "scan.yaml"
    path.write_text(_manifest(scan, "ok").read_text().replace(json.dumps(sys.executable),
                                                               "no-such-qc-program"))
    assert main(["check", str(path)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "generator.command: program 'no-such-qc-program' not found" in err[0]
    assert main(["analyze", str(path), "--out", str(scan / "out")]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "not found on PATH" in err[0]
    assert not (scan / "frames").exists()            # nothing was made
