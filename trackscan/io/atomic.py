"""Atomic file output: write to a temporary file beside the target, then rename.

A reader never sees a half-written file, and an error or interruption leaves
the previous file (if any) untouched.
"""

from __future__ import annotations

import contextlib
import os
import tempfile
from pathlib import Path

__all__ = ["atomic_open", "write_text_atomic", "write_bytes_atomic", "add_write_guard",
           "remove_write_guard", "check_write"]

#: Write guards of this process (see :func:`trackscan.io.ownership.guard_folder`):
#: each is asked before any atomic write whether the target may be written.
_WRITE_GUARDS: list = []


def add_write_guard(guard) -> None:
    """Register an object whose ``before_write(path)`` checks every atomic write."""
    _WRITE_GUARDS.append(guard)


def remove_write_guard(guard) -> None:
    """Unregister a guard added with :func:`add_write_guard`."""
    _WRITE_GUARDS.remove(guard)


def check_write(path) -> None:
    """Ask every registered guard whether `path` may be written (they raise if not)."""
    for guard in list(_WRITE_GUARDS):
        guard.before_write(path)


@contextlib.contextmanager
def atomic_open(path, mode: str = "w", *, encoding: str | None = "utf-8"):
    """Open a temporary file that replaces `path` when the block ends cleanly.

    Parameters
    ----------
    path : str or os.PathLike
        Final destination.  Its folder is created if missing.
    mode : {'w', 'wb'}
        Text or binary.
    encoding : str, optional
        Text encoding (ignored in binary mode).

    Yields
    ------
    file object
        Write to it; on an exception the temporary file is removed and
        `path` is left as it was.
    """
    if mode not in ("w", "wb"):
        raise ValueError(f"mode must be 'w' or 'wb', got {mode!r}")
    path = Path(path)
    check_write(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    try:
        kwargs = {} if "b" in mode else {"encoding": encoding, "newline": "\n"}
        with os.fdopen(fd, mode, **kwargs) as fh:
            yield fh
            fh.flush()
            os.fsync(fh.fileno())
        os.chmod(tmp, _default_mode())
        os.replace(tmp, path)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(tmp)
        raise


def _default_mode() -> int:
    """Permissions an ordinary new file would get (0o666 less the umask)."""
    mask = os.umask(0)
    os.umask(mask)
    return 0o666 & ~mask


def write_text_atomic(path, text: str) -> None:
    """Write `text` to `path` atomically (UTF-8)."""
    with atomic_open(path, "w") as fh:
        fh.write(text)


def write_bytes_atomic(path, data: bytes) -> None:
    """Write `data` to `path` atomically."""
    with atomic_open(path, "wb") as fh:
        fh.write(data)


def is_temporary_name(name: str) -> bool:
    """True for the name of a temporary file of :func:`atomic_open` (``.NAME.XXXX.tmp``)."""
    return name.startswith(".") and name.endswith(".tmp")


def remove_stale_temporaries(folder) -> list:
    """Delete the temporary files an interrupted writer left in `folder`.

    Call only while holding the folder's lock
    (:mod:`trackscan.io.folderlock`): another writer's temporary file would
    be deleted too.  Returns the names removed.
    """
    removed = []
    with contextlib.suppress(FileNotFoundError, NotADirectoryError):
        for entry in os.scandir(folder):
            if entry.is_file(follow_symlinks=False) and is_temporary_name(entry.name):
                with contextlib.suppress(FileNotFoundError):
                    os.unlink(entry.path)
                    removed.append(entry.name)
    return sorted(removed)
