"""Where refinement runs its generator calls and frame analyses.

* :class:`LocalBackend` -- this machine: generator calls in this process
  (one job) or in worker processes (``--jobs P``); analyses through
  :func:`trackscan.analysis.analyse_frames` with its per-frame cache.
* :class:`DaskBackend` -- a dask.distributed scheduler (extra ``dask``):
  generator calls and frame analyses become tasks on its workers.  The
  workers must see the same file system as this process (the frames folder
  and the cache), as on a cluster with a shared disk.

Both yield generated frames as they finish, so the caller records each one
at once.
"""

from __future__ import annotations

import logging
from concurrent.futures import ProcessPoolExecutor, as_completed

from trackscan.analysis.runner import check_jobs
from trackscan.errors import InputError

__all__ = ["LocalBackend", "DaskBackend", "make_backend", "generate_one"]

logger = logging.getLogger(__name__)


def generate_one(generator, value: float, path: str, workdir: str):
    """Run one generator call (picklable; used by workers)."""
    return generator.generate(value, path, workdir=workdir)


def _build_and_generate(config, coordinate, value: float, path: str, workdir: str):
    """Build the generator from its config in a worker, then generate."""
    from trackscan.generators import make_generator

    gen = make_generator(config, coordinate=coordinate)
    return gen.generate(value, path, workdir=workdir)


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

    def generate(self, tasks, *, generator, config=None, coordinate=None):
        """Yield ``(index, GeneratedFrame or None, exception or None)`` as calls finish.

        A failed call does not stop the others: every call that succeeds is
        yielded (so the caller can record it) and the failures come with
        their exception.

        Parameters
        ----------
        tasks : list of (value, path, workdir)
        generator : Generator
            Used in this process (jobs 1, or no `config`).
        config, coordinate : optional
            Rebuild the generator in worker processes from these.
        """
        if self.jobs == 1 or len(tasks) <= 1 or config is None:
            for i, (v, p, w) in enumerate(tasks):
                try:
                    yield i, generate_one(generator, v, p, w), None
                except Exception as exc:          # recorded by the caller, then re-raised
                    yield i, None, exc
                    return
            return
        with ProcessPoolExecutor(max_workers=min(self.jobs, len(tasks))) as pool:
            futures = {pool.submit(_build_and_generate, config, coordinate, v, p, w): i
                       for i, (v, p, w) in enumerate(tasks)}
            for fut in as_completed(futures):
                exc = fut.exception()
                yield futures[fut], (None if exc else fut.result()), exc

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

    def generate(self, tasks, *, generator, config=None, coordinate=None):
        """Yield ``(index, GeneratedFrame or None, exception or None)`` as tasks finish."""
        from dask.distributed import as_completed as dask_completed

        futures = {}
        for i, (v, p, w) in enumerate(tasks):
            if config is not None:
                fut = self.client.submit(_build_and_generate, config, coordinate, v, p, w,
                                         pure=False)
            else:
                fut = self.client.submit(generate_one, generator, v, p, w, pure=False)
            futures[fut] = i
        for fut in dask_completed(list(futures)):
            exc = fut.exception()
            yield futures[fut], (None if exc else fut.result()), exc

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
