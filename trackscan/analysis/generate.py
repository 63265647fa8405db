"""Make generated frames: the one path used by ``analyze`` and ``refine``.

:func:`generate_frames` turns coordinate values into cube files in a scan's
frames folder and enters each in the folder's ``record.json``
(:func:`trackscan.io.manifest.update_frame_record`), so that no finished
calculation is ever made twice, whatever stops the run:

1. The frames folder is locked for the call
   (:func:`trackscan.io.ownership.guard_folder`): a second run that needs
   to generate into it stops with one line (exit code 2).  Under the lock,
   temporary files of an interrupted run are deleted
   (:func:`tidy_frames_folder`).
2. Each frame is entered in the record as ``"pending": true`` (and its
   cube, geometry and log names in the folder's marker) *before* the
   generator starts.  A pending entry is not a frame of the scan.
3. The generator writes the cube atomically; the parent then rewrites the
   entry as finished (with the energy).
4. On the next start, a pending entry whose cube is there and reads cleanly
   (complete value block, the generator's atoms) is adopted as finished: a
   run killed between the cube's rename and the record write (even by
   SIGKILL) loses nothing.  Other pending entries are dropped.  A complete,
   valid cube already sitting at a value to compute is adopted too, never
   recomputed or replaced; a cube trackscan did not write and cannot use is
   refused (:class:`~trackscan.io.ownership.ForeignFileError`).

With ``jobs > 1`` the generator calls run in worker processes from
:func:`trackscan.analysis.runner.worker_context` (fork server).  Every call
that finishes is recorded as it finishes; a failed call does not stop the
others, and the first failure is raised once all are recorded.  On
SIGINT/SIGTERM of this process (``KeyboardInterrupt``) the finished calls
are recorded, the workers are told to stop (SIGTERM: each kills the program
it runs, with its process group, and exits), and the interrupt goes on.
Each worker watches this process and stops the same way within
:data:`PARENT_POLL` seconds when it dies (SIGKILL included).
"""

from __future__ import annotations

import contextlib
import logging
import os
import signal
import threading
import time
from concurrent.futures import ProcessPoolExecutor
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from trackscan.analysis.interruptible import wait_first
from trackscan.errors import InputError
from trackscan.io.atomic import remove_stale_temporaries
from trackscan.io.folderlock import try_folder_lock
from trackscan.io.manifest import RECORD_NAME, read_frame_record, update_frame_record
from trackscan.io.ownership import MARKER, ForeignFileError, guard_folder, load_or_new
from trackscan.progress import report

__all__ = ["FrameTask", "generate_frames", "tidy_frames_folder", "run_local", "watch_parent",
           "PARENT_POLL", "STOP_GRACE", "ADOPT_POSITION_TOLERANCE", "PARTIAL_PREFIX"]

logger = logging.getLogger(__name__)

#: Seconds between a worker's checks that the trackscan process is alive.
PARENT_POLL = 0.5
#: Seconds a stopping worker gets to kill its program and clean up before it
#: is killed outright.
STOP_GRACE = 10.0
#: A cube found at a value to compute, that trackscan did not write, is used
#: only when its nuclei sit within this distance (bohr) of the generator's
#: geometry: cubes print positions to 1e-6 bohr, and a neighbouring value
#: moves the driven atoms by far more.
ADOPT_POSITION_TOLERANCE = 1e-4
#: Prefix of partial files generators write before renaming (with the pid).
PARTIAL_PREFIX = ".partial-"

_SIDECARS = (".xyz", ".log")


@dataclass(frozen=True)
class FrameTask:
    """One frame to make.

    Attributes
    ----------
    value : float
        Coordinate value.
    path : Path
        The cube file, in the manifest's frames folder.
    record : dict
        Further keys of its record entry (e.g. ``{"refine": {...}}``).
    """

    value: float
    path: Path
    record: dict = field(default_factory=dict)


# -- worker side ---------------------------------------------------------------

_task_running = False


class _Stop(BaseException):
    """This worker was told to stop (SIGTERM), or its parent died."""


def _on_sigterm(signum, frame):
    if _task_running:
        raise _Stop()           # unwinds through the generator: it kills its program
    os._exit(128 + signum)


def _process_alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    try:
        with open(f"/proc/{pid}/stat", encoding="ascii", errors="replace") as fh:
            state = fh.read().rsplit(")", 1)[1].split()[0]
    except (OSError, IndexError):
        return True
    return state not in ("Z", "X")


def _watch_parent(parent_pid: int, ppid: int) -> None:
    while True:
        time.sleep(PARENT_POLL)
        if os.getppid() != ppid or not _process_alive(parent_pid):
            logger.warning("trackscan (pid %d) is gone: stopping this worker", parent_pid)
            os.kill(os.getpid(), signal.SIGTERM)
            time.sleep(STOP_GRACE)
            os._exit(1)


def watch_parent(parent_pid: int) -> None:
    """Worker initializer: SIGTERM this process when `parent_pid` (or the fork server) dies.

    Also used by the analysis workers (:mod:`trackscan.analysis.runner`),
    which simply end on SIGTERM.
    """
    threading.Thread(target=_watch_parent, args=(parent_pid, os.getppid()), daemon=True,
                     name="trackscan-parent-watch").start()


def _init_worker(parent_pid: int) -> None:
    """Worker start: the parent decides about SIGINT; SIGTERM stops the call; watch the parent."""
    signal.signal(signal.SIGINT, lambda signum, frame: None)
    signal.signal(signal.SIGTERM, _on_sigterm)
    watch_parent(parent_pid)


def _generate_in_worker(generator, value: float, path: str, workdir: str):
    """Worker: one generator call (module level, so it pickles)."""
    global _task_running
    _task_running = True
    try:
        return generator.generate(value, path, workdir=workdir)
    except _Stop:
        os._exit(128 + signal.SIGTERM)
    finally:
        _task_running = False


# -- running the calls ---------------------------------------------------------

def _stop_workers(pool) -> None:
    procs = list((getattr(pool, "_processes", None) or {}).values())
    for p in procs:
        with contextlib.suppress(Exception):
            p.terminate()
    deadline = time.monotonic() + STOP_GRACE
    for p in procs:
        with contextlib.suppress(Exception):
            p.join(max(0.0, deadline - time.monotonic()))
    for p in procs:
        with contextlib.suppress(Exception):
            if p.is_alive():
                p.kill()
                p.join(1.0)


def run_local(generator, calls, on_done, *, jobs: int = 1) -> None:
    """Run generator calls here (one job) or in worker processes; report each as it ends.

    Parameters
    ----------
    generator : Generator
    calls : list of (value, cube path, workdir)
    on_done : callable(index, GeneratedFrame or None, exception or None)
        Called in this process as each call finishes.  With one job the
        calls stop at the first failure.
    jobs : int
    """
    if jobs <= 1 or len(calls) <= 1:
        for i, (value, path, workdir) in enumerate(calls):
            try:
                out = generator.generate(value, path, workdir=workdir)
            except Exception as exc:          # recorded by the caller, then raised
                on_done(i, None, exc)
                return
            on_done(i, out, None)
        return
    from trackscan.analysis.runner import worker_context

    pool = ProcessPoolExecutor(max_workers=min(jobs, len(calls)), mp_context=worker_context(),
                               initializer=_init_worker, initargs=(os.getpid(),))
    futures = {}
    reported = set()
    try:
        for i, (value, path, workdir) in enumerate(calls):
            futures[pool.submit(_generate_in_worker, generator, value, path, workdir)] = i
        waiting = set(futures)
        while waiting:
            for fut in sorted(wait_first(waiting), key=futures.get):
                waiting.discard(fut)
                reported.add(fut)
                exc = fut.exception()
                on_done(futures[fut], None if exc else fut.result(), exc)
    except BaseException:
        # interrupted: keep what finished, then stop the workers (and their programs)
        for fut, i in futures.items():
            if fut not in reported and fut.done() and not fut.cancelled() \
                    and fut.exception() is None:
                reported.add(fut)
                on_done(i, fut.result(), None)
        for fut in futures:
            fut.cancel()
        _stop_workers(pool)
        raise
    finally:
        pool.shutdown(wait=True, cancel_futures=True)


# -- the frames folder ---------------------------------------------------------

def _sidecar(cube: Path, suffix: str) -> Path:
    from trackscan.generators.base import sibling

    return sibling(cube, suffix)


def _usable_cube(path: Path, value: float, generator, *, strict: bool) -> bool:
    """True when `path` is a complete cube with the generator's atoms at `value`."""
    from trackscan.io.cube import read_cube

    try:
        grid = read_cube(path)
    except (InputError, OSError, ValueError):
        return False
    if generator is None or not getattr(generator, "has_geometry", False):
        return True
    try:
        geom = generator.geometry(value)
    except Exception:                          # noqa: BLE001 - no geometry, no check
        return not strict
    if grid.n_atoms != geom.n_atoms or np.any(grid.numbers != geom.numbers):
        return False
    if strict:
        dev = float(np.max(np.linalg.norm(grid.positions - geom.positions, axis=1)))
        return dev <= ADOPT_POSITION_TOLERANCE
    return True


def _remove_partials(folder: Path) -> list:
    removed = []
    with contextlib.suppress(FileNotFoundError, NotADirectoryError):
        for entry in os.scandir(folder):
            if entry.name.startswith(PARTIAL_PREFIX) and entry.is_file(follow_symlinks=False):
                with contextlib.suppress(FileNotFoundError):
                    os.unlink(entry.path)
                    removed.append(entry.name)
    return removed


def _tidy_locked(folder: Path, generator) -> bool:
    """Under the lock: delete stale temporary files, settle pending entries.

    Returns True when a pending frame was adopted (the record gained a frame).
    """
    removed = remove_stale_temporaries(folder) + _remove_partials(folder)
    for sub in getattr(generator, "scratch_folders", ()):
        if (folder / sub).is_dir():
            removed += remove_stale_temporaries(folder / sub) + _remove_partials(folder / sub)
    if removed:
        logger.info("removed %d temporary file(s) of an interrupted run from %s",
                    len(removed), folder)
    pending = [r for r in read_frame_record(folder, pending=True) if r.get("pending")]
    if not pending:
        return False
    adopt, drop = [], []
    for rec in pending:
        cube = folder / rec["file"]
        if cube.is_file() and _usable_cube(cube, float(rec["value"]), generator, strict=False):
            adopt.append({k: v for k, v in rec.items() if k != "pending"})
            logger.warning("adopting %s: its calculation finished but was not recorded "
                           "(the run was stopped)", cube.name)
        else:
            drop.append(rec["file"])
    update_frame_record(folder, put=adopt, remove=drop)
    return bool(adopt)


def tidy_frames_folder(manifest, generator=None) -> bool:
    """Clean up after an interrupted run, if no other run is writing the frames folder.

    Deletes temporary and partial files, adopts finished pending frames and
    drops the others (see the module notes).  Does nothing when the folder
    is missing or locked by another run.

    Returns
    -------
    bool
        True when the record gained a frame (reload the manifest to see it).
    """
    folder = Path(manifest.frames_directory)
    if not ((folder / RECORD_NAME).is_file() or (folder / MARKER).is_file()):
        return False                # trackscan never wrote here: nothing to tidy
    with try_folder_lock(folder) as locked:
        if not locked:
            return False
        return _tidy_locked(folder, generator)


def generate_frames(manifest, tasks, *, generator, jobs: int = 1, run=None,
                    progress=None) -> list:
    """Make (or adopt) the cubes of `tasks` and record each in the frames folder.

    Parameters
    ----------
    manifest : ScanManifest
        Gives the frames folder (``manifest.frames_directory``).
    tasks : list of FrameTask
    generator : Generator
    jobs : int
        Local worker processes (ignored when `run` is given).
    run : callable(generator, calls, on_done), optional
        Where the calls run (default :func:`run_local` with `jobs`; a dask
        backend passes its own).
    progress : callable, optional

    Returns
    -------
    list of GeneratedFrame
        One per task, in task order (``cached`` is True for adopted cubes).

    Raises
    ------
    FolderBusyError
        Another trackscan run generates into the folder.
    ForeignFileError
        A file to write exists and trackscan did not write it.
    GeneratorError
        A call failed (the first failure, after every finished call is
        recorded).
    """
    from trackscan.generators.base import GeneratedFrame

    folder = Path(manifest.frames_directory)
    tasks = list(tasks)
    made = [None] * len(tasks)
    if not tasks:
        return made
    total = len(tasks)
    done = [0]
    errors = []
    _refuse_foreign_files(folder, tasks, generator)     # before anything is written
    with guard_folder(folder, purpose="the frames") as own:
        _tidy_locked(folder, generator)
        todo = []
        adopted = []
        for i, t in enumerate(tasks):
            cube = Path(t.path)
            if cube.is_file():
                # a cube at the value with the generator's very geometry is used as it is
                # (pending frames of a stopped run were adopted by the tidy-up above)
                if _usable_cube(cube, t.value, generator, strict=True):
                    xyz = _sidecar(cube, ".xyz")
                    made[i] = GeneratedFrame(cube, float(t.value), None, True,
                                             xyz if xyz.is_file() else None)
                    adopted.append(_entry(folder, t, None))
                    logger.info("using the existing cube %s for value %g", cube.name, t.value)
                    continue
            own.claim(cube)                     # refuses a cube trackscan did not write
            for suffix in _SIDECARS:
                own.claim(_sidecar(cube, suffix))
            todo.append(i)
        if todo:
            for sub in getattr(generator, "scratch_folders", ()):
                own.claim_subfolder(sub)
        pending = [dict(_entry(folder, tasks[i], None), pending=True) for i in todo]
        if adopted or pending:
            update_frame_record(folder, put=adopted + pending)
        done[0] = len(adopted)
        if adopted:
            report(progress, "generate frames", done[0], total, "existing cubes")

        def on_done(k, out, exc):
            i = todo[k]
            t = tasks[i]
            done[0] += 1
            if exc is not None:
                errors.append(exc)
                update_frame_record(folder, remove=[_name(folder, t)])
                logger.info("frame at %g failed: %s", t.value, exc)
                return
            made[i] = out
            update_frame_record(folder, put=[_entry(folder, t, getattr(out, "energy", None))])
            report(progress, "generate frames", done[0], total, f"value {t.value:g}")
            logger.info("new frame at %g: %s", t.value, t.path)

        calls = [(tasks[i].value, os.fspath(tasks[i].path), os.fspath(folder)) for i in todo]
        if calls:
            logger.info("generating %d frame(s) with %s", len(calls),
                        getattr(generator, "describe", lambda: "the generator")())
            runner = run if run is not None else (
                lambda gen, c, cb: run_local(gen, c, cb, jobs=jobs))
            runner(generator, calls, on_done)
            # calls never run (a serial run stops at its first failure) are not pending
            unrun = [_name(folder, tasks[i]) for i in todo if made[i] is None]
            if unrun:
                update_frame_record(folder, remove=unrun)
    if errors:
        # every finished frame is recorded: a rerun will not repeat it
        raise errors[0]
    return made


def _refuse_foreign_files(folder: Path, tasks, generator) -> None:
    """Raise ForeignFileError for a geometry or log file trackscan would replace.

    A first pass without the lock, so that a folder of someone else's
    files is refused before trackscan writes anything into it (the claims
    under the lock check again).
    """
    own = load_or_new(folder) if folder.is_dir() else None

    def ours(path):
        rel = None if own is None else own.relative(path)
        return rel is not None and own.owns(rel)

    for t in tasks:
        cube = Path(t.path)
        if cube.is_file() and _usable_cube(cube, t.value, generator, strict=True):
            continue                                     # adopted: nothing is written
        for path in [cube] + [_sidecar(cube, s) for s in _SIDECARS]:
            if not os.path.lexists(path) or ours(path):
                continue
            raise ForeignFileError("trackscan did not write this file and will not replace "
                                   "it (move it away or choose another frames directory; "
                                   "nothing was written)", path)


def _name(folder: Path, task: FrameTask) -> str:
    return Path(os.path.relpath(os.path.abspath(task.path), os.path.abspath(folder))).as_posix()


def _entry(folder: Path, task: FrameTask, energy) -> dict:
    entry = {"file": _name(folder, task), "value": float(task.value), "energy": energy}
    entry.update(task.record)
    return entry

