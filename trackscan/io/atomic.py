"""Atomic file output: write to a temporary file beside the target, then rename.

A reader never sees a half-written file, and an error or interruption leaves
the previous file (if any) untouched.
"""

from __future__ import annotations

import contextlib
import os
import tempfile
from pathlib import Path

__all__ = ["atomic_open", "write_text_atomic", "write_bytes_atomic"]


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
