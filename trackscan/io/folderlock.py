"""Advisory locks on the folders trackscan writes into (frames, output).

One trackscan run at a time may write into a folder: it holds a POSIX
advisory lock (``fcntl.lockf``, which also works on NFS) on the file
:data:`LOCK_NAME` inside the folder for as long as it writes there.  A
second run that needs the same folder does not wait: it stops at once with
:class:`FolderBusyError` (exit code 2, one line naming the folder and the
process holding it), so two cluster jobs pointed at one folder can never mix
their files.  Reading a folder needs no lock.

The lock is released when the holder exits, however it exits (the kernel
drops POSIX locks of a dead process), so a killed run never leaves a folder
locked.  The lock file itself stays (removing it would race with a run
that is about to lock it); it holds the holder's pid, for the message.

Within one process the lock is re-entrant: nested :func:`folder_lock`
blocks on the same folder share one lock (POSIX locks belong to the process,
and closing any descriptor of the file would drop them, so each folder's
lock file is opened once).
"""

from __future__ import annotations

import contextlib
import errno
import fcntl
import os
from pathlib import Path

from trackscan.errors import InputError

__all__ = ["LOCK_NAME", "FolderBusyError", "folder_lock", "try_folder_lock"]

LOCK_NAME = ".trackscan-lock"
"""Lock file in every folder trackscan writes into."""

#: Locks this process holds: folder key (device, inode) -> [fd, count].
_HELD: dict = {}


class FolderBusyError(InputError):
    """Another trackscan run is writing into the folder."""


def _key(folder: Path):
    st = os.stat(folder)
    return (st.st_dev, st.st_ino)


def _holder(path: Path) -> str:
    try:
        text = path.read_text(encoding="utf-8", errors="replace").strip()
    except OSError:
        return ""
    return text.splitlines()[0][:80] if text else ""


def _acquire(folder: Path, purpose: str, *, blocking_error: bool):
    """Lock `folder`; return its key, or None when busy and not `blocking_error`."""
    folder.mkdir(parents=True, exist_ok=True)
    key = _key(folder)
    held = _HELD.get(key)
    if held is not None:
        held[1] += 1
        return key
    path = folder / LOCK_NAME
    try:
        fd = os.open(path, os.O_RDWR | os.O_CREAT | os.O_CLOEXEC, 0o666)
    except OSError as exc:
        raise InputError(f"cannot lock the folder ({exc.strerror})", folder) from None
    try:
        fcntl.lockf(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
    except OSError as exc:
        os.close(fd)
        if exc.errno not in (errno.EACCES, errno.EAGAIN):
            raise InputError(f"cannot lock the folder ({exc.strerror})", folder) from None
        if not blocking_error:
            return None
        who = _holder(path)
        raise FolderBusyError(
            f"another trackscan run is writing into this folder ({who or 'pid unknown'}); "
            f"wait for it to finish or use another folder for {purpose}", folder) from None
    os.ftruncate(fd, 0)
    os.write(fd, f"pid {os.getpid()}\n".encode())
    _HELD[key] = [fd, 1]
    return key


def _release(key) -> None:
    held = _HELD[key]
    held[1] -= 1
    if held[1] == 0:
        del _HELD[key]
        os.close(held[0])           # drops the lock


@contextlib.contextmanager
def folder_lock(folder, *, purpose: str = "its files"):
    """Hold the advisory lock of `folder` (created if missing) inside the block.

    Parameters
    ----------
    folder : str or os.PathLike
    purpose : str
        Words for the message (``"the frames"``, ``"--out"``).

    Raises
    ------
    FolderBusyError
        Another process holds the lock.
    """
    key = _acquire(Path(folder), purpose, blocking_error=True)
    try:
        yield Path(folder)
    finally:
        _release(key)


@contextlib.contextmanager
def try_folder_lock(folder):
    """Like :func:`folder_lock`, but yield False instead of raising when busy.

    The folder must exist (nothing is created).
    """
    folder = Path(folder)
    if not folder.is_dir():
        yield False
        return
    key = _acquire(folder, "", blocking_error=False)
    if key is None:
        yield False
        return
    try:
        yield True
    finally:
        _release(key)
