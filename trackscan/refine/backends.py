"""Where refinement runs its generator calls and frame analyses.

* :class:`LocalBackend` -- this machine: generator calls in this process
  (one job) or in worker processes (``--jobs P``); analyses through
  :func:`trackscan.analysis.analyse_frames` with its per-frame cache.
* :class:`DaskBackend` -- a dask.distributed scheduler (extra ``dask``):
  generator calls and frame analyses become tasks on its workers.  The
  workers must see the same file system as this process (the frames folder
  and the cache), as on a cluster with a shared disk.

Both report generated frames as they finish (``generate(generator, calls,
on_done)``, the runner interface of
:func:`trackscan.analysis.generate.generate_frames`), so each is recorded at
once; the local one is :func:`trackscan.analysis.generate.run_local` (fork
server workers that stop with trackscan).
"""

from __future__ import annotations

import logging

from trackscan.analysis.runner import check_jobs
from trackscan.errors import InputError

__all__ = ["LocalBackend", "DaskBackend", "make_backend", "generate_one"]

logger = logging.getLogger(__name__)


def generate_one(generator, value: float, path: str, workdir: str):
    """Run one generator call (picklable; used by dask workers)."""
    return generator.generate(value, path, workdir=workdir)


class LocalBackend:
    """Generator calls and analyses on this machine.

    Parameters
    ----------
    jobs : int
        Worker processes (1: everything in this process).
    """

    def __init__(self, jobs: int = 1):
        check_jobs(jobs)
        self.jobs = jobs

    def describe(self) -> str:
        return f"{self.jobs} local process(es)"

    def generate(self, generator, calls, on_done) -> None:
        """Run generator calls; ``on_done(index, GeneratedFrame or None, exception or None)``.

        :func:`trackscan.analysis.generate.run_local` with this backend's jobs:
        a failed call does not stop the others (with one job, it stops the
        rest); every call that succeeds is reported, so the caller can
        record it.

        Parameters
        ----------
        generator : Generator
        calls : list of (value, path, workdir)
        on_done : callable
        """
        from trackscan.analysis.generate import run_local

        run_local(generator, calls, on_done, jobs=self.jobs)

    def analyse(self, files, settings, *, periodic: bool, cache_dir, progress=None) -> list:
        """Frame dicts of cube files (:func:`trackscan.analysis.analyse_frames`)."""
        from trackscan.analysis import analyse_frames

        return analyse_frames(files, settings, periodic=periodic, jobs=self.jobs,
                              cache_dir=cache_dir, progress=progress)

    def close(self) -> None:
        pass


class DaskBackend:
    """Generator calls and analyses as tasks of a dask.distributed scheduler.

    Parameters
    ----------
    address : str or dask.distributed.Client
        Scheduler address (``tcp://host:8786``) or an existing client.

    Raises
    ------
    InputError
        dask.distributed is not installed, or the scheduler cannot be
        reached.
    """

    def __init__(self, address):
        from trackscan.analysis.distributed import connect

        self.client, self._own = connect(address)
        self.jobs = max(1, len(self.client.scheduler_info().get("workers", {})))

    def describe(self) -> str:
        return f"dask scheduler {self.client.scheduler.address} ({self.jobs} workers)"

    def generate(self, generator, calls, on_done) -> None:
        """Run generator calls as tasks; ``on_done(index, frame or None, exception or None)``."""
        from dask.distributed import as_completed as dask_completed

        futures = {}
        for i, (v, p, w) in enumerate(calls):
            futures[self.client.submit(generate_one, generator, v, p, w, pure=False)] = i
        try:
            for fut in dask_completed(list(futures)):
                exc = fut.exception()
                on_done(futures[fut], None if exc else fut.result(), exc)
        except BaseException:
            for fut in futures:
                fut.cancel()
            raise

    def analyse(self, files, settings, *, periodic: bool, cache_dir, progress=None) -> list:
        """Frame dicts of cube files, analysed on the workers, cached here."""
        from trackscan.analysis import analyse_frames

        return analyse_frames(files, settings, periodic=periodic, cache_dir=cache_dir,
                              progress=progress, dask=self.client)

    def close(self) -> None:
        if self._own:
            self.client.close()


def make_backend(*, jobs: int = 1, dask=None):
    """A :class:`DaskBackend` when `dask` (an address) is given, else local."""
    if dask:
        return DaskBackend(dask)
    return LocalBackend(jobs)
