"""Analyse the frames of a scan, in parallel processes, with a result cache.

Each worker loads one cube, analyses it (``trackscan.topology.analyze_frame``)
and returns the compact frame dict; the grids never travel between
processes, and the parent never reads one (with one job the single frame
being analysed is the only grid alive).  :func:`iter_frames` yields the frame
dicts as they finish, keeping only a few tasks in flight, so a scan of any
length holds at most about ``2 * jobs`` grids (one per busy worker) at a
time.  :func:`analyse_frames` returns them in frame order whatever order
the workers finish in, so the output does not depend on the number of
processes.  With ``dask=`` the analyses run on a dask.distributed scheduler
(:mod:`trackscan.analysis.distributed`) instead.
"""

from __future__ import annotations

import dataclasses
import logging
import multiprocessing
import os
from concurrent.futures import ProcessPoolExecutor

import numpy as np

from trackscan.analysis.cache import cache_key, file_digest, load_entry, store_entry
from trackscan.analysis.interruptible import wait_first
from trackscan.errors import InputError
from trackscan.model import Frame, ScanFormatError
from trackscan.io.filecheck import regular_file_problem
from trackscan.progress import report

__all__ = ["analyse_frames", "iter_frames", "analyse_cube", "printed_digits",
           "worker_context", "check_jobs"]

logger = logging.getLogger(__name__)

#: Modules the fork server imports before forking workers (see worker_context).
WORKER_MODULES = ("trackscan.io.cube", "trackscan.settings", "trackscan.topology",
                  "trackscan.analysis.runner")


def check_jobs(jobs) -> None:
    """Raise InputError unless `jobs` is a positive integer (``--jobs``)."""
    if isinstance(jobs, bool) or not isinstance(jobs, int) or jobs < 1:
        raise InputError(f"--jobs must be at least 1, got {jobs}")


def worker_context():
    """Start method of worker processes: ``forkserver`` where available, else ``spawn``.

    Plain ``fork`` copies the parent's threads' locks (BLAS, OpenMP, logging)
    in whatever state they are, and a worker can hang on one for ever; the
    fork server forks from a clean single-threaded process instead.

    The fork server imports the analysis modules once (``WORKER_MODULES``)
    before it forks any worker, so a worker starts without importing numpy,
    scipy and trackscan again (about half a second per worker).  (numpy's
    BLAS threads in the fork server are safe to fork: the BLAS library
    stops and restarts them around ``fork``.)  The preload list belongs to
    this process's fork server, which starts with the first worker.
    """
    methods = multiprocessing.get_all_start_methods()
    if "forkserver" not in methods:
        return multiprocessing.get_context("spawn")
    ctx = multiprocessing.get_context("forkserver")
    ctx.set_forkserver_preload(list(WORKER_MODULES))
    return ctx


def printed_digits(values, *, sample: int = 4096) -> int:
    """Significant digits with which the values of a grid were printed.

    A cube written with ``%.5E`` holds numbers with 6 significant digits;
    values computed in memory have all 17.  The grid is sampled at a fixed
    stride (deterministic) and the smallest digit count that reproduces every
    sampled nonzero value is returned.

    Parameters
    ----------
    values : ndarray
    sample : int
        Number of values to test.

    Returns
    -------
    int in 1..17

    Examples
    --------
    >>> import numpy as np
    >>> printed_digits(np.array([1.2345e-2, 3.1e-5, 0.5]))
    5
    """
    v = np.asarray(values, dtype=np.float64).ravel()
    v = v[v != 0]
    if v.size == 0:
        return 17
    stride = max(1, v.size // sample)
    v = np.abs(v[::stride][:sample])
    expo = np.floor(np.log10(v))
    mant = v / 10.0 ** expo
    for k in range(1, 15):
        scaled = mant * 10.0 ** (k - 1)
        # |error| of the scaled mantissa is ~1e-16 * scaled, far below 1e-3
        if np.all(np.abs(scaled - np.round(scaled)) <= 1e-3):
            return k
    return 17


def analyse_cube(path: str, settings_dict: dict, periodic: bool) -> dict:
    """Read one cube and analyse it; the worker function (picklable).

    Returns the frame dict of ``FrameTopology.to_dict()`` with
    ``grid.significant_digits`` added (see :func:`printed_digits`).
    """
    from trackscan.io.cube import read_cube
    from trackscan.settings import AnalysisSettings
    from trackscan.topology import analyze_frame

    settings = AnalysisSettings(**settings_dict)
    grid = read_cube(path, max_points=settings.max_points)
    if periodic and not grid.periodic:
        grid = dataclasses.replace(grid, periodic=True)
    frame = analyze_frame(grid, settings).to_dict()
    frame.setdefault("grid", {})["significant_digits"] = printed_digits(grid.values)
    return frame


def analyse_frames(files, settings, *, periodic=False, jobs=1, cache_dir=None,
                   progress=None, dask=None) -> list:
    """Frame dicts of cube files, analysed in `jobs` processes, cached.

    Parameters
    ----------
    files : sequence of path-like
        Cube files, in frame order.
    settings : AnalysisSettings
    periodic : bool
        Treat every grid as one periodic cell.
    jobs : int
        Number of worker processes (1: analyse in this process).
    cache_dir : path-like, optional
        Per-frame result cache (:mod:`trackscan.analysis.cache`); None: no
        cache.
    progress : callable, optional
        Receives :class:`trackscan.progress.ProgressEvent` as frames finish.
    dask : str or dask.distributed.Client, optional
        Run the analyses on this dask.distributed scheduler instead of local
        processes (`jobs` is then ignored).  The workers must see the files.

    Returns
    -------
    list of trackscan.model.Frame
        One frame per file, in the order of `files` (not yet placed in the
        scan: no value or source).

    Raises
    ------
    InputError
        A file is missing or unreadable (from the cube reader), or the
        scheduler cannot be reached.
    """
    files = list(files)
    results = [None] * len(files)
    for i, frame in iter_frames(files, settings, periodic=periodic, jobs=jobs,
                                cache_dir=cache_dir, progress=progress, dask=dask):
        results[i] = frame
    return results


def iter_frames(files, settings, *, periodic=False, jobs=1, cache_dir=None, progress=None,
                dask=None):
    """Yield ``(index, frame dict)`` for each cube file as its analysis finishes.

    Cached frames come first, then the others in the order they finish.
    Only a bounded number of analyses is in flight (two per worker), and
    nothing is kept here once a frame is yielded, so the memory of a scan
    does not grow with its length.  Parameters as :func:`analyse_frames`.

    Yields
    ------
    (int, trackscan.model.Frame)
        Position of the file in `files`, and its frame.
    """
    check_jobs(jobs)
    files = [os.fspath(f) for f in files]
    for f in files:
        problem = regular_file_problem(f)
        if problem is not None:
            raise InputError("frame file does not exist" if problem == "no such file" else problem,
                             f)
    sdict = settings.to_dict()
    keys = [None] * len(files)
    todo = []
    total = len(files)
    done = 0
    for i, f in enumerate(files):
        if cache_dir is not None:
            keys[i] = cache_key(file_digest(f), sdict, periodic=periodic)
            hit = load_entry(cache_dir, keys[i])
            if hit is not None:
                try:
                    frame = Frame.from_dict(hit, "cached frame")
                except ScanFormatError:
                    logger.warning("ignoring a malformed cache entry for %s", files[i])
                else:
                    done += 1
                    yield i, frame
                    continue
        todo.append(i)
    where = "a dask scheduler" if dask is not None else f"{jobs} process(es)"
    logger.info("%d of %d frames cached, %d to analyse on %s", done, total, len(todo), where)
    report(progress, "analyse frames", done, total, "cached" if done else "")
    calls = [(files[i], sdict, periodic) for i in todo]
    for k, frame in _run(calls, jobs=jobs, dask=dask):
        i = todo[k]
        if cache_dir is not None:
            store_entry(cache_dir, keys[i], frame)
        done += 1
        report(progress, "analyse frames", done, total, os.path.basename(files[i]))
        yield i, Frame.from_dict(frame, os.path.basename(files[i]))


def _run(calls, *, jobs, dask):
    """Yield ``(k, analyse_cube(*calls[k]))`` as the analyses finish."""
    if not calls:
        return
    if dask is not None:
        from trackscan.analysis.distributed import connect, run_as_completed

        client, own = connect(dask)
        try:
            yield from run_as_completed(client, analyse_cube, calls)
        finally:
            if own:
                client.close()
        return
    if jobs == 1 or len(calls) <= 1:
        for k, args in enumerate(calls):
            yield k, analyse_cube(*args)
        return
    from trackscan.analysis.generate import watch_parent

    workers = min(jobs, len(calls))
    # workers end when this process dies, even by SIGKILL (they watch it)
    with ProcessPoolExecutor(max_workers=workers, mp_context=worker_context(),
                             initializer=watch_parent, initargs=(os.getpid(),)) as pool:
        queue = iter(enumerate(calls))
        pending = {}

        def top_up():
            while len(pending) < 2 * workers:
                item = next(queue, None)
                if item is None:
                    return
                pending[pool.submit(analyse_cube, *item[1])] = item[0]

        try:
            top_up()
            while pending:
                finished = wait_first(pending)
                for fut in sorted(finished, key=pending.get):
                    k = pending.pop(fut)
                    frame = fut.result()
                    top_up()
                    yield k, frame
        except BaseException:
            # a bad frame (or ^C, or the caller stopping) ends the run: do not
            # start the others
            pool.shutdown(wait=True, cancel_futures=True)
            raise
