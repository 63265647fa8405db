"""Kill points: a refine stopped at any stage repeats no finished calculation.

``killpoint_generator.py`` runs ``trackscan refine`` (through
``trackscan.cli.main``) with a generator that logs every call and holds at a
chosen stage; the test kills the real process there (SIGKILL, SIGTERM or
SIGINT), checks what is left (record, worker processes, temporary files),
reruns the same command and counts the generator's calls: no value whose
cube was finished before the kill is computed again.
"""

import importlib.util
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

from trackscan.cli import main
from trackscan.io.manifest import read_frame_record

HERE = Path(__file__).parent
REPO = HERE.parent.parent
_spec = importlib.util.spec_from_file_location("fold_model", HERE / "fold_model.py")
fm = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(fm)

VALUES = [2.7, 2.8, 2.9, 3.0]


@pytest.fixture
def scan(tmp_path):
    """A fold-model scan whose own frames are made and analysed (cached) already."""
    folder = tmp_path / "scan"
    manifest = fm.write_scan(folder, VALUES, spacing=0.25, margin=1.5)
    assert main(["-q", "analyze", str(manifest), "--out", str(tmp_path / "out"),
                 "--no-report"]) == 0
    return folder


def _refine(folder, jobs, budget):
    env = dict(os.environ, PYTHONPATH=os.pathsep.join([str(HERE), str(REPO)]),
               OMP_NUM_THREADS="1", MPLBACKEND="Agg")
    cmd = [sys.executable, str(HERE / "killpoint_generator.py"), str(folder), "-q", "refine",
           str(folder / "scan.yaml"), "--tolerance", "1e-3", "--jobs", str(jobs),
           "--max-evaluations", str(budget), "--out", str(folder.parent / "out"), "--no-report"]
    return subprocess.Popen(cmd, env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                            text=True, start_new_session=True)


def _session(sid):
    """Live processes of session `sid` (the refine run and all it started)."""
    found = []
    for entry in os.listdir("/proc"):
        if not entry.isdigit():
            continue
        try:
            with open(f"/proc/{entry}/stat") as fh:
                fields = fh.read().rsplit(")", 1)[1].split()
        except OSError:
            continue
        if fields[0] != "Z" and int(fields[3]) == sid:
            found.append(int(entry))
    return found


def _wait(predicate, proc, what, timeout=90.0):
    t0 = time.monotonic()
    while not predicate():
        if proc.poll() is not None:
            raise AssertionError(f"refine ended (code {proc.returncode}) before {what}: "
                                 f"{proc.stderr.read()}")
        if time.monotonic() - t0 > timeout:
            proc.kill()
            raise AssertionError(f"timed out waiting for {what}")
        time.sleep(0.05)


def _events(folder):
    path = folder / "events.txt"
    if not path.is_file():
        return []
    return [(w, float(v), int(p)) for w, v, p in
            (line.split() for line in path.read_text().splitlines())]


def _recorded(folder, *, pending=False):
    return {r["value"] for r in read_frame_record(folder / "frames", pending=True)
            if "refine" in r and bool(r.get("pending")) == pending}


def _gone(pids, timeout=8.0):
    t0 = time.monotonic()
    alive = set(pids)
    while alive and time.monotonic() - t0 < timeout:
        for pid in list(alive):
            try:
                os.kill(pid, 0)
                with open(f"/proc/{pid}/stat") as fh:
                    if fh.read().rsplit(")", 1)[1].split()[0] == "Z":
                        alive.discard(pid)
            except (ProcessLookupError, FileNotFoundError):
                alive.discard(pid)
        time.sleep(0.1)
    return not alive


def _temporaries(folder):
    found = []
    for d in (folder / "frames", folder.parent / "out", folder.parent / "out" / ".cache"):
        found += [p.name for p in d.iterdir() if p.name.startswith(".partial-")
                  or (p.name.startswith(".") and p.name.endswith(".tmp"))]
    return found


def _rerun_without_repeats(folder, finished, budget):
    n_before = len(_events(folder))
    proc = _refine(folder, 1, budget)
    out, err = proc.communicate(timeout=300)
    assert proc.returncode == 0, err
    again = {v for w, v, _ in _events(folder)[n_before:] if w == "start"}
    assert finished, "the killed run finished no frame: the test proves nothing"
    assert not again & finished                  # no finished frame is computed again
    assert _temporaries(folder) == []            # no temporary file survives the rerun
    assert not _recorded(folder, pending=True)
    return again


def test_jobs1_sigkill_between_rename_and_record(scan):
    (scan / "hold-renamed").write_text("")
    proc = _refine(scan, 1, 3)
    _wait(lambda: (scan / "at-renamed").exists(), proc, "the renamed stage")
    proc.kill()
    proc.wait()
    held = [v for w, v, _ in _events(scan) if w == "renamed"]
    assert len(held) == 1
    # the window: the cube is in place, its record entry still pending
    assert held[0] in _recorded(scan, pending=True) and held[0] not in _recorded(scan)
    _rerun_without_repeats(scan, set(held), 3)
    assert held[0] in _recorded(scan)            # adopted, not recomputed


@pytest.mark.slow
def test_jobs2_sigkill_workers_exit(scan):
    (scan / "hold-renamed").write_text("")
    proc = _refine(scan, 2, 4)
    _wait(lambda: (scan / "at-renamed").exists(), proc, "the renamed stage")
    proc.kill()
    proc.wait()
    workers = {p for _, _, p in _events(scan)} - {proc.pid}
    assert workers                                # the calls ran in worker processes
    assert _gone(workers)                         # they notice the parent is gone and exit
    # and nothing else of the run stays behind (fork server, resource tracker)
    t0 = time.monotonic()
    while _session(proc.pid) and time.monotonic() - t0 < 8:
        time.sleep(0.1)
    assert _session(proc.pid) == []
    finished = {v for w, v, _ in _events(scan) if w == "renamed"}
    _rerun_without_repeats(scan, finished, 4)


@pytest.mark.parametrize("sig", [signal.SIGTERM,
                                 pytest.param(signal.SIGINT, marks=pytest.mark.slow)])
def test_jobs2_signal_records_what_finished(scan, sig):
    (scan / "hold-before").write_text("")
    proc = _refine(scan, 2, 4)
    # one call holds before computing; the other finishes and is recorded at once
    _wait(lambda: (scan / "at-before").exists() and _recorded(scan), proc,
          "one finished and one held call")
    proc.send_signal(sig)
    try:
        out, err = proc.communicate(timeout=60)
    except subprocess.TimeoutExpired:
        proc.send_signal(signal.SIGUSR1)          # faulthandler: where it hangs
        time.sleep(1.0)
        os.killpg(proc.pid, signal.SIGKILL)
        out, err = proc.communicate()
        pytest.fail(f"refine did not stop within 60 s of {signal.Signals(sig).name}:\n{err}")
    assert proc.returncode == 128 + sig
    assert err.strip().splitlines()[-1].startswith(f"trackscan: interrupted by "
                                                   f"{signal.Signals(sig).name}")
    workers = {p for _, _, p in _events(scan)} - {proc.pid}
    assert workers and _gone(workers, timeout=2.0)
    finished = {v for w, v, _ in _events(scan) if w == "renamed"}
    assert finished and finished <= _recorded(scan)   # recorded by the stopped run itself
    _rerun_without_repeats(scan, finished, 4)
