"""Command-line interface: ``trackscan SUBCOMMAND ...``.

Each subcommand is a module in this package with a docstring (its help), an
``add_arguments(parser)`` function and a ``run(args) -> int`` function.  The
registry below lists them; modules are imported only when used.

Exit codes: 0 success, 1 a computation failed, 2 bad input (one line on
stderr naming the file and the problem; ``--traceback`` shows the trace),
130 after SIGINT, 143 after SIGTERM.  SIGTERM (a scheduler ending the job)
is handled like SIGINT: what finished is recorded, worker processes and
external programs are stopped, temporary files are removed.
"""

from __future__ import annotations

import argparse
import errno
import importlib
import logging
import os
import signal
import sys
import threading

from trackscan import __version__
from trackscan.errors import InputError, TrackscanError

__all__ = ["main", "COMMANDS"]

#: (name, module, one-line summary).  Add a line when a subcommand does real work.
COMMANDS = [
    ("init", "trackscan.cli.init", "write a commented scan manifest for your cube files (coordinate measured, frames sorted)"),
    ("inspect", "trackscan.cli.inspect", "read a cube file and print its grid, atoms and electron count"),
    ("frame", "trackscan.cli.frame", "find the critical points, bond paths and molecular graph of one cube file"),
    ("check", "trackscan.cli.check", "validate a scan manifest and the consistency of its frames"),
    ("analyze", "trackscan.cli.analyze", "analyse all frames of a scan, track critical points and report structural changes"),
    ("report", "trackscan.cli.report", "write the change-point report (HTML, Markdown, CSV) of an analysed scan"),
    ("demo", "trackscan.cli.demo", "run a demo scan end to end (built-in model; no QC code needed) into reports/"),
    ("refine", "trackscan.cli.refine", "narrow each structural change with new frames (fold extrapolation, bisection) or suggest where to compute them"),
]

#: File-system refusals that the user can fix (permissions, read-only file systems).
_BAD_INPUT_ERRNOS = (errno.EACCES, errno.EPERM, errno.EROFS)

EXIT_OK = 0
EXIT_FAILURE = 1
EXIT_BAD_INPUT = 2


def _build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="trackscan",
        description="Follow the topology of the electron density along a scan and "
                    "locate where the molecular structure changes.",
    )
    parser.add_argument("--version", action="version", version=f"trackscan {__version__}")
    parser.add_argument("-v", "--verbose", action="count", default=0,
                        help="more messages on stderr (repeat for debug)")
    parser.add_argument("-q", "--quiet", action="store_true", help="only errors on stderr")
    parser.add_argument("--traceback", action="store_true",
                        help="show the Python traceback of an error")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name, module_name, summary in COMMANDS:
        module = importlib.import_module(module_name)
        p = sub.add_parser(name, help=summary, description=module.__doc__,
                           formatter_class=argparse.RawDescriptionHelpFormatter)
        module.add_arguments(p)
        p.set_defaults(_run=module.run)
    return parser


class _StderrHandler(logging.StreamHandler):
    """Log to whatever ``sys.stderr`` is at the time of each message."""

    def __init__(self):
        super().__init__(sys.stderr)

    @property
    def stream(self):
        return sys.stderr

    @stream.setter
    def stream(self, value):  # StreamHandler assigns it in __init__
        pass


def _setup_logging(verbose: int, quiet: bool) -> None:
    level = logging.ERROR if quiet else (logging.DEBUG if verbose > 1 else
                                         logging.INFO if verbose == 1 else logging.WARNING)
    root = logging.getLogger("trackscan")
    for h in list(root.handlers):
        if isinstance(h, _StderrHandler):
            root.removeHandler(h)
    handler = _StderrHandler()
    handler.setFormatter(logging.Formatter("%(levelname)s: %(message)s"))
    root.addHandler(handler)
    root.setLevel(level)


class Terminated(KeyboardInterrupt):
    """SIGTERM arrived: unwinds like Ctrl-C (cleanup runs), exit code 128 + signal."""

    def __init__(self, signum: int):
        super().__init__(signum)
        self.signum = signum


def _on_sigterm(signum, frame):
    raise Terminated(signum)


def main(argv=None) -> int:
    """Run the command line; returns the exit code."""
    parser = _build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "command", None):
        parser.print_help(sys.stderr)
        return EXIT_BAD_INPUT
    _setup_logging(args.verbose, args.quiet)
    previous = None
    if threading.current_thread() is threading.main_thread():
        previous = signal.signal(signal.SIGTERM, _on_sigterm)
    try:
        return _main(args)
    finally:
        if previous is not None:
            signal.signal(signal.SIGTERM, previous)


def _main(args) -> int:
    try:
        return int(args._run(args) or 0)
    except InputError as exc:
        if args.traceback:
            raise
        print(f"trackscan: error: {exc}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except TrackscanError as exc:
        if args.traceback:
            raise
        print(f"trackscan: error: {exc}", file=sys.stderr)
        return EXIT_FAILURE
    except KeyboardInterrupt as exc:
        signum = getattr(exc, "signum", signal.SIGINT)
        print(f"trackscan: interrupted by {signal.Signals(signum).name}; finished frames are "
              "recorded (run the same command again to continue)", file=sys.stderr)
        return 128 + signum
    except BrokenPipeError:
        # stdout closed early (e.g. piped into head): stop quietly
        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        return 1
    except OSError as exc:
        # the file system refused (a read-only folder, a full disk): one line, no trace
        if args.traceback:
            raise
        where = f"{exc.filename}: " if exc.filename else ""
        print(f"trackscan: error: {where}{exc.strerror or exc}", file=sys.stderr)
        return EXIT_BAD_INPUT if exc.errno in _BAD_INPUT_ERRNOS else EXIT_FAILURE
