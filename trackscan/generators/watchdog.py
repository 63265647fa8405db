"""Run one program as the leader of its own process group, and stop it with trackscan.

Started by :mod:`trackscan.generators.command` as::

    python -I watchdog.py WATCHED_PID -- PROGRAM ARG ...

in a new session (so the program and everything it starts share one
process group, led by this watchdog).  It runs the program, with this
process's standard streams (the frame's log file), and waits.  It ends the
whole group

* when the program exits (helpers it left behind in the group are stopped:
  nothing trackscan started outlives the frame);
* on SIGTERM, SIGINT or SIGHUP (trackscan stopping, a timeout);
* when the process that started it (``WATCHED_PID``, trackscan or its
  worker) is gone, even killed with SIGKILL: checked every
  :data:`POLL` seconds.

Ending the group is SIGTERM to every member, then SIGKILL after
:data:`GRACE` seconds.  The exit status is the program's (128 + N when a
signal N ended it; 127 when it cannot be started).

This file uses the standard library only and is run as a script (``-I``:
nothing from the environment or the user's site-packages is imported).
"""

import os
import signal
import subprocess
import sys
import time

#: Seconds between checks of the program and of the watched process.
POLL = 0.2
#: Seconds the group gets between SIGTERM and SIGKILL.
GRACE = 5.0


def _alive(pid):
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    try:
        with open(f"/proc/{pid}/stat", encoding="ascii", errors="replace") as fh:
            return fh.read().rsplit(")", 1)[1].split()[0] not in ("Z", "X")
    except (OSError, IndexError):
        return True


def _end_group(child):
    """SIGTERM the group (not this process), wait for the program, then SIGKILL all."""
    signal.signal(signal.SIGTERM, signal.SIG_IGN)
    try:
        os.killpg(0, signal.SIGTERM)
    except OSError:
        pass
    deadline = time.monotonic() + GRACE
    while child is not None and child.poll() is None and time.monotonic() < deadline:
        time.sleep(0.05)
    sys.stdout.flush()
    sys.stderr.flush()
    os.killpg(0, signal.SIGKILL)       # the rest of the group, and this process


def main(argv):
    if len(argv) < 3 or argv[1] != "--":
        print("usage: watchdog.py PID -- PROGRAM [ARG ...]", file=sys.stderr)
        return 2
    watched, args = int(argv[0]), argv[2:]
    ppid = os.getppid()
    stop = []
    for sig in (signal.SIGTERM, signal.SIGINT, signal.SIGHUP):
        signal.signal(sig, lambda signum, frame: stop.append(signum))
    try:
        child = subprocess.Popen(args)
    except OSError as exc:
        print(f"trackscan: cannot run {args[0]}: {exc}", file=sys.stderr)
        return 127
    while True:
        try:
            code = child.wait(timeout=POLL)
            break
        except subprocess.TimeoutExpired:
            pass
        if stop or os.getppid() != ppid or not _alive(watched):
            why = f"signal {stop[0]}" if stop else "trackscan is gone"
            print(f"trackscan: stopping the program ({why})", file=sys.stderr, flush=True)
            _end_group(child)
            return 128 + signal.SIGTERM
    if code < 0:
        print(f"trackscan: the program was killed by signal {-code}", file=sys.stderr)
        code = 128 - code
    # stop what the program left running in its group
    signal.signal(signal.SIGTERM, signal.SIG_IGN)
    try:
        os.killpg(0, signal.SIGTERM)
    except OSError:
        pass
    return code


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
