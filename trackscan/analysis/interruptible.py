"""Waiting for worker results in a way that SIGINT and SIGTERM always interrupt.

CPython runs Python signal handlers only in the main thread, and only when
that thread executes bytecode.  A process-directed signal may be delivered
to any thread: while a process pool runs, the pool's own threads (the queue
feeder and the result manager) are candidates.  When one of them takes the
signal, the main thread, blocked without a timeout on a lock inside
:func:`concurrent.futures.as_completed` or :func:`concurrent.futures.wait`,
is not woken, and the ``KeyboardInterrupt`` that should stop the run is
never raised.  POSIX lets the kernel pick any thread that does not block the
signal; Linux prefers the main thread, other systems need not.  Waiting in
short slices makes the main thread return to bytecode often, so a pending
handler runs within one slice wherever the signal landed.
"""

from __future__ import annotations

from concurrent.futures import FIRST_COMPLETED, wait

__all__ = ["SIGNAL_POLL_SECONDS", "wait_first"]

#: Longest time the main thread waits before it looks at pending signals.
SIGNAL_POLL_SECONDS = 0.2


def wait_first(futures) -> set:
    """The futures among `futures` that are done, waiting until at least one is.

    Like ``wait(futures, return_when=FIRST_COMPLETED)[0]``, but in slices of
    :data:`SIGNAL_POLL_SECONDS`, so that a signal is acted on at once.
    """
    futures = list(futures)
    while True:
        done, _ = wait(futures, timeout=SIGNAL_POLL_SECONDS, return_when=FIRST_COMPLETED)
        if done or not futures:
            return done
