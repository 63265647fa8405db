"""Run trackscan command lines, each in its own forked process, under limits.

Used by ``tests/test_hostile_input.py`` (not collected by pytest)::

    python tests/hostile_runner.py CASES.json LIMIT_BYTES WALL_SECONDS

CASES.json is a list of ``{"name", "args", "cwd", "stderr"}``.  This
process imports trackscan once; every case is a child forked from it that
lowers its address-space limit (``resource.setrlimit(RLIMIT_AS)``), sends
its stderr to the case's file and runs ``trackscan.cli.main(args)`` as the
command line would.  A child still running after WALL_SECONDS is killed
with its whole process group.  Prints one JSON list of
``{"name", "code", "seconds", "timed_out"}``.  Forking saves the second of
imports per case that a fresh interpreter would cost.
"""

from __future__ import annotations

import json
import os
import resource
import signal
import sys
import time
import traceback


def _child(case, limit: int) -> None:
    code = 99
    try:
        os.setpgid(0, 0)
        resource.setrlimit(resource.RLIMIT_AS, (limit, limit))
        os.chdir(case["cwd"])
        err = os.open(case["stderr"], os.O_WRONLY | os.O_CREAT | os.O_TRUNC, 0o644)
        os.dup2(err, 2)
        os.dup2(os.open(os.devnull, os.O_WRONLY), 1)
        from trackscan.cli import main

        try:
            code = main(case["args"])
        except SystemExit as exc:
            code = exc.code if isinstance(exc.code, int) else 1
        except BaseException:
            traceback.print_exc()
            code = 98
    finally:
        try:
            sys.stdout.flush()
            sys.stderr.flush()
        finally:
            os._exit(code)


def run_cases(cases, limit: int, wall: float) -> list:
    """Run each case in a forked child; return their exit codes and times."""
    import trackscan.cli

    trackscan.cli._build_parser()    # imports every subcommand's modules once, before forking

    results = []
    for case in cases:
        t0 = time.monotonic()
        pid = os.fork()
        if pid == 0:
            _child(case, limit)
        timed_out = False
        status = None
        while True:
            done, status = os.waitpid(pid, os.WNOHANG)
            if done:
                break
            if time.monotonic() - t0 > wall:
                timed_out = True
                try:
                    os.killpg(pid, signal.SIGKILL)
                except ProcessLookupError:
                    pass
                _, status = os.waitpid(pid, 0)
                break
            time.sleep(0.02)
        code = os.waitstatus_to_exitcode(status)
        results.append({"name": case["name"], "code": code,
                        "seconds": round(time.monotonic() - t0, 2), "timed_out": timed_out})
    return results


if __name__ == "__main__":
    with open(sys.argv[1], encoding="utf-8") as fh:
        todo = json.load(fh)
    print(json.dumps(run_cases(todo, int(sys.argv[2]), float(sys.argv[3]))))
