"""A signal taken by another thread still interrupts the wait for worker results.

Found by the kill-point test: ``refine --jobs 2`` ignored a SIGINT now and
then, because the signal was delivered to one of the process pool's threads
while the main thread waited on a lock without a timeout (CPython runs
signal handlers only in the main thread).  Here the signal is sent to a
helper thread on purpose (``signal.pthread_kill``).
"""

import signal
import threading
from concurrent.futures import ThreadPoolExecutor

import pytest

from trackscan.analysis.interruptible import wait_first


def test_sigint_delivered_to_another_thread_interrupts_the_wait():
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
