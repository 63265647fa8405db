"""Running tasks on a dask.distributed scheduler (extra ``dask``).

One place for what ``trackscan analyze --dask`` and ``trackscan refine
--dask`` share: connecting to a scheduler (:func:`connect`), and running a
function over many argument tuples with a bounded number of tasks in flight,
yielding results as they finish (:func:`run_as_completed`).  The workers
must see the same file system as this process (cube files, the cache), as on
a cluster with a shared disk.
"""

from __future__ import annotations

import logging

from trackscan.errors import InputError

__all__ = ["connect", "worker_count", "run_as_completed"]

logger = logging.getLogger(__name__)


def connect(address):
    """A dask.distributed client for `address`, and whether this call made it.

    Parameters
    ----------
    address : str or dask.distributed.Client
        Scheduler address (``tcp://host:8786``) or an existing client (used
        as it is, and not closed by its user here).

    Returns
    -------
    (Client, bool)
        The client and True when it was created here (the caller closes it).

    Raises
    ------
    InputError
        dask.distributed is not installed, or the scheduler cannot be
        reached, or the address is malformed.
    """
    try:
        from dask.distributed import Client
    except ImportError:
        raise InputError("--dask needs dask.distributed: pip install 'trackscan[dask]'") \
            from None
    if isinstance(address, Client):
        return address, False
    try:
        return Client(address, timeout="20s"), True
    except (OSError, TimeoutError, ValueError, TypeError) as exc:
        raise InputError(f"cannot reach the dask scheduler at {address} ({exc})") from None


def worker_count(client) -> int:
    """Number of worker threads of the scheduler's workers (at least 1)."""
    try:
        return max(1, sum(client.nthreads().values()))
    except Exception:          # a scheduler that does not answer: assume one
        return 1


def run_as_completed(client, fn, calls, *, window: int | None = None):
    """Yield ``(index, result)`` of ``fn(*calls[index])`` as the tasks finish.

    At most `window` tasks are submitted at a time (default: twice the
    workers), so neither the scheduler nor this process ever holds more
    than that many results; each result is released on the cluster as soon
    as it is handed over.

    Parameters
    ----------
    client : dask.distributed.Client
    fn : callable
        Module-level (picklable) function.
    calls : sequence of tuple
        Positional arguments of each call.
    window : int, optional

    Raises
    ------
    Exception
        The first task that fails re-raises its exception here; the tasks
        not yet finished are cancelled.
    """
    from dask.distributed import as_completed

    window = max(1, window or 2 * worker_count(client))
    index = {}
    queue = iter(enumerate(calls))

    def submit_next():
        item = next(queue, None)
        if item is None:
            return None
        i, args = item
        fut = client.submit(fn, *args, pure=False)
        index[fut] = i
        return fut

    first = [f for f in (submit_next() for _ in range(window)) if f is not None]
    if not first:
        return
    done = as_completed(first)
    try:
        for fut in done:
            i = index.pop(fut)
            result = fut.result()
            fut.release()
            nxt = submit_next()
            if nxt is not None:
                done.add(nxt)
            yield i, result
    finally:
        if index:
            client.cancel(list(index))
