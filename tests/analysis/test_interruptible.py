"""A signal taken by another thread still interrupts the wait for worker results.

CPython runs signal handlers only in the main thread; when the signal is
delivered to another thread (POSIX allows any thread that does not block
it) while the main thread waits on a lock without a timeout, the handler
never runs.  Here the signal is sent to a helper thread on purpose
(``signal.pthread_kill``); the plain ``concurrent.futures.wait`` fails this
test.
"""

import signal
import threading
from concurrent.futures import ThreadPoolExecutor

import pytest

from trackscan.analysis.interruptible import wait_first


@pytest.fixture
def default_sigint():
    """Python's own SIGINT handler (an earlier test's library may have replaced it)."""
    previous = signal.signal(signal.SIGINT, signal.default_int_handler)
    yield
    signal.signal(signal.SIGINT, previous)


def test_sigint_delivered_to_another_thread_interrupts_the_wait(default_sigint):
    release = threading.Event()
    with ThreadPoolExecutor(max_workers=1) as pool:
        fut = pool.submit(release.wait, 30.0)          # not done until released

        def hit_me():
            release.wait(0.3)
            signal.pthread_kill(threading.get_ident(), signal.SIGINT)

        helper = threading.Thread(target=hit_me)
        helper.start()
        try:
            with pytest.raises(KeyboardInterrupt):
                wait_first([fut])
            assert not fut.done()         # interrupted while the result was still pending
        finally:
            release.set()
            helper.join()


def test_wait_first_returns_what_is_done():
    with ThreadPoolExecutor(max_workers=2) as pool:
        quick = pool.submit(lambda: 1)
        slow = pool.submit(threading.Event().wait, 0.5)
        done = wait_first([quick, slow])
        assert quick in done and quick.result() == 1
    assert wait_first([]) == set()
