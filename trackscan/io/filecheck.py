"""What kind of file a path is, checked with ``os.stat`` before anything opens it.

Opening a FIFO blocks until a writer appears, and a character device such
as ``/dev/zero`` never ends; a path longer than the file system allows
raises ``ENAMETOOLONG`` from every call.  :func:`regular_file_problem` says
in words why a path cannot be read as an input file, without opening it, so
that readers refuse such inputs with one line instead of hanging.
"""

from __future__ import annotations

import errno
import os
import stat

__all__ = ["regular_file_problem", "path_problem"]

_KINDS = (
    (stat.S_ISDIR, "is a directory"),
    (stat.S_ISFIFO, "is a FIFO (named pipe), not a regular file"),
    (stat.S_ISCHR, "is a character device, not a regular file"),
    (stat.S_ISBLK, "is a block device, not a regular file"),
    (stat.S_ISSOCK, "is a socket, not a regular file"),
)


def path_problem(path) -> str | None:
    """Why `path` cannot even be looked up (too long, a file used as a folder...), or None.

    A missing file is not a problem here (it may be made later).
    """
    try:
        os.stat(path)
    except FileNotFoundError:
        return None
    except OSError as exc:
        return _describe(exc)
    except ValueError as exc:          # an embedded NUL byte
        return f"not a usable path ({exc})"
    return None


def regular_file_problem(path) -> str | None:
    """Why `path` is not a readable regular file, or None when it is one.

    Symbolic links are followed (a link to ``/dev/zero`` is a device).

    Parameters
    ----------
    path : str or os.PathLike

    Returns
    -------
    str or None
        ``"no such file"``, ``"is a directory"``, ``"is a FIFO (named pipe),
        not a regular file"``, ``"file name too long"``, ...

    Examples
    --------
    >>> regular_file_problem("/dev/null")
    'is a character device, not a regular file'
    """
    try:
        st = os.stat(path)
    except FileNotFoundError:
        return "no such file"
    except OSError as exc:
        return _describe(exc)
    except ValueError as exc:
        return f"not a usable path ({exc})"
    for test, words in _KINDS:
        if test(st.st_mode):
            return words
    return None


def _describe(exc: OSError) -> str:
    if exc.errno == errno.ENAMETOOLONG:
        return "file name too long for the file system"
    if exc.errno == errno.ENOTDIR:
        return "no such file (a part of the path is not a folder)"
    if exc.errno == errno.ELOOP:
        return "too many levels of symbolic links"
    if exc.errno in (errno.EACCES, errno.EPERM):
        return "permission denied"
    return f"cannot look up the file ({exc.strerror})"
