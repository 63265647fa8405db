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
so a failure leaves the scan as it was.  Standard output and error go to a
``.log`` file beside the frame.
"""

from __future__ import annotations

import contextlib
import logging
import os
import re
import shutil
import signal
import subprocess
from pathlib import Path

import numpy as np

from trackscan.errors import GeneratorError, InputError
from trackscan.generators.base import GeneratedFrame, Generator, sibling
from trackscan.io.generator_config import CommandConfig
from trackscan.io.atomic import write_text_atomic
from trackscan.io.cube import read_cube

__all__ = ["CommandGenerator"]

logger = logging.getLogger(__name__)

_PLACEHOLDER_RE = re.compile(r"\{(value|xyz|cube|workdir)\}")
_TAIL = 400


def _tail(text: str) -> str:
    text = text.strip()
    if not text:
        return ""
    last = text.splitlines()[-1].strip()
    return last[-_TAIL:]


def _run(args, cwd, timeout):
    """Run without a shell; on timeout kill the program's whole process group.

    Returns ``(exit status or None on timeout, stdout, stderr)``.
    """
    proc = subprocess.Popen(args, cwd=cwd, stdin=subprocess.DEVNULL, stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True, errors="replace",
                            start_new_session=True)
    try:
        out, err = proc.communicate(timeout=timeout)
    except subprocess.TimeoutExpired:
        with contextlib.suppress(ProcessLookupError, PermissionError):
            os.killpg(proc.pid, signal.SIGKILL)
        out, err = proc.communicate()
        return None, out or "", err or ""
    except BaseException:
        with contextlib.suppress(ProcessLookupError, PermissionError):
            os.killpg(proc.pid, signal.SIGKILL)
        proc.wait()
        raise
    return proc.returncode, out or "", err or ""


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
    """

    def __init__(self, options: CommandConfig, drive=None, *, base_dir=None):
        if "xyz" in options.uses and drive is None:
            raise ValueError("{xyz} in the command needs a geometry drive")
        super().__init__(drive)
        self.options = options
        self.base_dir = Path(base_dir) if base_dir is not None else Path.cwd()

    def describe(self) -> str:
        return f"external command: {' '.join(self.options.args)}"

    def _program(self) -> str:
        prog = self.options.args[0]
        if os.sep in prog or (os.altsep and os.altsep in prog):
            p = Path(prog)
            if not p.is_absolute():
                p = self.base_dir / p
            if not p.is_file():
                raise GeneratorError(f"program not found: {p}")
            if not os.access(p, os.X_OK):
                raise GeneratorError(f"program is not executable: {p}")
            return str(p)
        found = shutil.which(prog)
        if found is None:
            raise GeneratorError(f"program {prog!r} not found on PATH")
        return found

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
        tmp = cube_path.with_name(f".partial-{cube_path.name}")
        log = sibling(cube_path, ".log")
        with contextlib.suppress(FileNotFoundError):
            tmp.unlink()
        subs = {"value": repr(float(value)), "cube": str(tmp), "workdir": str(workdir),
                "xyz": str(xyz) if xyz is not None else ""}
        args = [_PLACEHOLDER_RE.sub(lambda m: subs[m.group(1)], a) for a in self.options.args]
        args[0] = self._program()
        where = f"at coordinate value {value:g}"
        logger.info("running %s", args)
        try:
            status, out, err = _run(args, self.base_dir, self.options.timeout)
        except OSError as exc:
            self._discard(tmp)
            raise GeneratorError(f"cannot run {args[0]}: {exc}") from None
        if status is None:
            self._write_log(log, args, None, out, err)
            self._discard(tmp)
            raise GeneratorError(f"{Path(args[0]).name} timed out after "
                                 f"{self.options.timeout:g} s {where} (log: {log})")
        self._write_log(log, args, status, out, err)
        if status != 0:
            self._discard(tmp)
            last = _tail(err) or _tail(out)
            raise GeneratorError(f"{Path(args[0]).name} failed with exit status "
                                 f"{status} {where}"
                                 + (f": {last}" if last else "") + f" (log: {log})")
        if not tmp.is_file():
            raise GeneratorError(f"{Path(args[0]).name} exited normally {where} but wrote no "
                                 f"cube at {{cube}} = {tmp} (log: {log})")
        try:
            grid = read_cube(tmp)
        except InputError as exc:
            self._discard(tmp)
            raise GeneratorError(f"{Path(args[0]).name} wrote a broken cube {where}: "
                                 f"{exc.message} (log: {log})") from None
        if geom is not None and (grid.n_atoms != geom.n_atoms
                                 or np.any(grid.numbers != geom.numbers)):
            self._discard(tmp)
            raise GeneratorError(f"{Path(args[0]).name} wrote a cube {where} whose atoms "
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

    @staticmethod
    def _write_log(log: Path, args, status, out: str, err: str) -> None:
        text = (f"command: {args!r}\n"
                f"exit status: {'timeout' if status is None else status}\n"
                f"--- stdout ---\n{out}\n--- stderr ---\n{err}\n")
        write_text_atomic(log, text)
