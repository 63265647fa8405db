"""Generator that runs an external program to make each density cube.

The manifest gives an argument list with placeholders::

    command: ["my-qc-wrapper", "--at", "{value}", "--geom", "{xyz}", "--out", "{cube}"]

``{value}`` is the coordinate value, ``{xyz}`` a geometry file trackscan
writes beside the frame (needs ``generator.geometry``), ``{cube}`` where the
program must write the density, ``{workdir}`` the frame's folder (for
scratch files).  The program runs in the manifest's folder, so relative
paths in the arguments mean what they mean in the YAML file.  The list is
passed to :class:`subprocess.Popen` as is -- never through a shell.  The
program writes to a temporary name; trackscan checks the cube (it must read
cleanly and carry the expected atoms) and only then renames it into place,
so a failure leaves the scan as it was.

The program runs under a small watchdog (:mod:`trackscan.generators.watchdog`)
as the leader of its own process group, so that trackscan can always stop
all of it: on a timeout (``generator.timeout`` seconds, default
:data:`~trackscan.io.generator_config.DEFAULT_TIMEOUT`, 24 hours), when
trackscan is interrupted (SIGINT, SIGTERM), and when trackscan dies (even by
SIGKILL: the watchdog notices within a fraction of a second).  Helpers the
program leaves running in its group are stopped when it exits; trackscan
waits for the program, never for whoever still holds its output.

Standard output and error stream into a ``.log`` file beside the frame
(nothing is held in memory): first written as a partial file, renamed into
place when the program ends, with the command and the exit status.  A
program that does not exist or is not executable is a bad-input error
(exit code 2), found by ``trackscan check`` and before any frame is made.
"""

from __future__ import annotations

import contextlib
import logging
import os
import re
import shutil
import signal
import subprocess
import sys
from pathlib import Path

import numpy as np

from trackscan.errors import ConfigError, GeneratorError, InputError
from trackscan.generators.base import GeneratedFrame, Generator, sibling
from trackscan.io.generator_config import CommandConfig
from trackscan.io.cube import read_cube

__all__ = ["CommandGenerator"]

logger = logging.getLogger(__name__)

_PLACEHOLDER_RE = re.compile(r"\{(value|xyz|cube|workdir)\}")
_TAIL = 400
#: Prefix of the partial cube and log (with the process id: unique per process).
PARTIAL_PREFIX = ".partial-"


#: Seconds trackscan gives the program's group between SIGTERM and SIGKILL.
STOP_GRACE = 5.0
#: The watchdog script (run with this Python, isolated mode).
WATCHDOG = Path(__file__).with_name("watchdog.py")


def _last_line(log: Path, start: int) -> str:
    """Last non-empty output line in `log` after byte `start` (at most _TAIL characters)."""
    try:
        with open(log, "rb") as fh:
            size = fh.seek(0, os.SEEK_END)
            fh.seek(max(start, size - 8192))
            text = fh.read().decode("utf-8", errors="replace")
    except OSError:
        return ""
    lines = [ln.strip() for ln in text.splitlines() if ln.strip()
             and not ln.startswith(("trackscan: ", "--- exit status: "))]
    return lines[-1][-_TAIL:] if lines else ""


def _end_group(proc) -> None:
    """Stop the program's whole process group: SIGTERM, then SIGKILL."""
    with contextlib.suppress(ProcessLookupError, PermissionError):
        os.killpg(proc.pid, signal.SIGTERM)
    try:
        proc.wait(timeout=STOP_GRACE)
    except subprocess.TimeoutExpired:
        pass
    with contextlib.suppress(ProcessLookupError, PermissionError):
        os.killpg(proc.pid, signal.SIGKILL)
    proc.wait()


def _run(args, cwd, timeout, log_fd):
    """Run `args` (no shell) under the watchdog; output to `log_fd`.

    Returns the exit status, or None on timeout (the group is stopped).
    On any exception here (KeyboardInterrupt on SIGINT/SIGTERM) the group
    is stopped before it propagates.
    """
    cmd = [sys.executable, "-I", os.fspath(WATCHDOG), str(os.getpid()), "--", *args]
    proc = subprocess.Popen(cmd, cwd=cwd, stdin=subprocess.DEVNULL, stdout=log_fd,
                            stderr=subprocess.STDOUT, start_new_session=True)
    try:
        status = proc.wait(timeout=timeout)
    except subprocess.TimeoutExpired:
        _end_group(proc)
        return None
    except BaseException:
        _end_group(proc)
        raise
    # helpers the program left in its group (the watchdog sent them SIGTERM)
    with contextlib.suppress(ProcessLookupError, PermissionError):
        os.killpg(proc.pid, signal.SIGKILL)
    return status


class CommandGenerator(Generator):
    """Run an external program per coordinate value.

    Parameters
    ----------
    options : CommandConfig
        Argument template and timeout.
    drive : CoordinateDrive or TrajectoryDrive, optional
        Geometry source, for ``{xyz}``.
    base_dir : Path, optional
        Folder the program runs in and against which a relative program
        path (``./run.sh``, ``bin/qc``) is resolved; usually the manifest's
        folder (default: the current folder).
    manifest : Path, optional
        The manifest, named in the error when the program is missing.
    """

    def __init__(self, options: CommandConfig, drive=None, *, base_dir=None, manifest=None):
        if "xyz" in options.uses and drive is None:
            raise ValueError("{xyz} in the command needs a geometry drive")
        super().__init__(drive)
        self.options = options
        self.base_dir = Path(base_dir) if base_dir is not None else Path.cwd()
        self.manifest = manifest

    def describe(self) -> str:
        return f"external command: {' '.join(self.options.args)}"

    def _program(self) -> str:
        """The program's full path.

        Raises
        ------
        ConfigError
            The program does not exist or cannot be run (exit code 2).
        """
        prog = self.options.args[0]
        key = "generator.command"
        if os.sep in prog or (os.altsep and os.altsep in prog):
            p = Path(prog)
            if not p.is_absolute():
                p = self.base_dir / p
            if not p.is_file():
                raise ConfigError(f"program not found: {p}", self.manifest, key)
            if not os.access(p, os.X_OK):
                raise ConfigError(f"program is not executable: {p}", self.manifest, key)
            return str(p)
        found = shutil.which(prog)
        if found is None:
            raise ConfigError(f"program {prog!r} not found on PATH (or not executable)",
                              self.manifest, key)
        return found

    def check(self) -> None:
        """Raise :class:`ConfigError` unless the program exists and is executable."""
        self._program()

    def generate(self, value: float, cube_path, workdir=None) -> GeneratedFrame:
        cube_path = Path(cube_path).absolute()
        workdir = Path(workdir).absolute() if workdir is not None else cube_path.parent
        workdir.mkdir(parents=True, exist_ok=True)
        cube_path.parent.mkdir(parents=True, exist_ok=True)
        xyz = None
        geom = None
        if self.drive is not None:
            geom = self.geometry(value)
            xyz = sibling(cube_path, ".xyz")
            self.write_geometry(value, xyz)
        tmp = cube_path.with_name(f"{PARTIAL_PREFIX}{os.getpid()}-{cube_path.name}")
        log = sibling(cube_path, ".log")
        self._discard(tmp)
        subs = {"value": repr(float(value)), "cube": str(tmp), "workdir": str(workdir),
                "xyz": str(xyz) if xyz is not None else ""}
        args = [_PLACEHOLDER_RE.sub(lambda m: subs[m.group(1)], a) for a in self.options.args]
        args[0] = self._program()
        where = f"at coordinate value {value:g}"
        name = Path(args[0]).name
        timeout = self.options.timeout
        logger.info("running %s", args)
        partial_log = log.with_name(f"{PARTIAL_PREFIX}{os.getpid()}-{log.name}")
        status = "interrupted"
        try:
            with open(partial_log, "wb") as fh:
                fh.write(f"command: {args!r}\n--- output (stdout and stderr) ---\n".encode())
                fh.flush()
                start = fh.tell()
                try:
                    status = _run(args, self.base_dir, timeout, fh)
                finally:
                    fh.seek(0, os.SEEK_END)
                    state = "timeout" if status is None else status
                    fh.write(f"--- exit status: {state} ---\n".encode())
            last = _last_line(partial_log, start)
            os.replace(partial_log, log)
        except OSError as exc:
            self._discard(tmp)
            self._discard(partial_log)
            raise GeneratorError(f"cannot run {args[0]}: {exc}") from None
        except BaseException:
            self._discard(tmp)
            with contextlib.suppress(OSError):
                os.replace(partial_log, log)
            raise
        if status is None:
            self._discard(tmp)
            raise GeneratorError(f"{name} timed out after {timeout:g} s {where} (log: {log})")
        if status != 0:
            self._discard(tmp)
            raise GeneratorError(f"{name} failed with exit status {status} {where}"
                                 + (f": {last}" if last else "") + f" (log: {log})")
        if not tmp.is_file():
            raise GeneratorError(f"{name} exited normally {where} but wrote no "
                                 f"cube at {{cube}} = {tmp} (log: {log})")
        try:
            grid = read_cube(tmp)
        except InputError as exc:
            self._discard(tmp)
            raise GeneratorError(f"{name} wrote a broken cube {where}: "
                                 f"{exc.message} (log: {log})") from None
        if geom is not None and (grid.n_atoms != geom.n_atoms
                                 or np.any(grid.numbers != geom.numbers)):
            self._discard(tmp)
            raise GeneratorError(f"{name} wrote a cube {where} whose atoms "
                                 f"({grid.n_atoms}) are not those of the geometry "
                                 f"{xyz} ({geom.n_atoms}) (log: {log})")
        if geom is not None:
            dev = float(np.max(np.linalg.norm(grid.positions - geom.positions, axis=1)))
            if dev > 1e-3:
                logger.warning("cube at %g: nuclei are up to %.3g bohr away from the "
                               "geometry given in %s", value, dev, xyz)
        os.replace(tmp, cube_path)
        return GeneratedFrame(cube_path, float(value), None, False, xyz, log)

    @staticmethod
    def _discard(tmp: Path) -> None:
        with contextlib.suppress(FileNotFoundError):
            tmp.unlink()
