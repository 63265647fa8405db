"""The one exception hierarchy of trackscan.

Every error that trackscan raises on purpose derives from
:class:`TrackscanError`.  The command line maps :class:`InputError` (bad
files, bad manifests, bad settings) to exit code 2 and prints its message as
one line; other trackscan errors exit with code 1.

Hierarchy::

    TrackscanError
    ├── InputError             bad input from the user (exit code 2)
    │   ├── ParseError         a file could not be read (path, line number)
    │   ├── ConfigError        a manifest or settings key is wrong (key path)
    │   ├── ConsistencyError   frames of one scan disagree (atoms differ)
    │   ├── ScanFormatError    a scan result or cached frame is malformed (key path)
    │   └── DegenerateDensityError  a grid with no traceable topology (constant,
    │                          noise): refused instead of traced without end
    └── GeneratorError         a density source failed (program, SCF, ...)

(Classes that nothing raised were removed: a class exists here when some
code raises it.)
"""

from __future__ import annotations

import os

__all__ = [
    "TrackscanError",
    "InputError",
    "ParseError",
    "ConfigError",
    "ConsistencyError",
    "ScanFormatError",
    "DegenerateDensityError",
    "GeneratorError",
]


class TrackscanError(Exception):
    """Base class of every error trackscan raises on purpose.

    Errors pickle with all their attributes (a worker process's error
    reaches the parent with its file, line and key, not re-built from the
    formatted message).
    """

    def __reduce__(self):
        return (_restore, (type(self), self.args, dict(self.__dict__)))


def _restore(cls, args, state):
    """Rebuild a pickled trackscan error without calling its ``__init__``."""
    obj = cls.__new__(cls)
    obj.args = args
    obj.__dict__.update(state)
    return obj


class InputError(TrackscanError):
    """Input from the user is wrong: a file, a manifest, a setting.

    Parameters
    ----------
    message : str
        What is wrong, in one line.
    path : str or os.PathLike, optional
        The file concerned; it is prefixed to the message.
    """

    def __init__(self, message: str, path: str | os.PathLike | None = None):
        self.path = None if path is None else os.fspath(path)
        self.message = message
        super().__init__(self._format())

    def _format(self) -> str:
        if self.path is None:
            return self.message
        return f"{self.path}: {self.message}"


class ParseError(InputError):
    """A file could not be parsed.

    Parameters
    ----------
    message : str
        What is wrong.
    path : str or os.PathLike, optional
        The file.
    lineno : int, optional
        1-based line number, when the problem sits on one line.
    """

    def __init__(self, message: str, path: str | os.PathLike | None = None,
                 lineno: int | None = None):
        self.lineno = lineno
        super().__init__(message, path)

    def _format(self) -> str:
        where = self.path or "<input>"
        if self.lineno is not None:
            where = f"{where}:{self.lineno}"
        return f"{where}: {self.message}"


class ConfigError(InputError):
    """A manifest or settings value is wrong.

    Parameters
    ----------
    message : str
        What is wrong.
    path : str or os.PathLike, optional
        The manifest file.
    key : str, optional
        Key path such as ``frames[3].file``.
    lineno : int, optional
        1-based line number in the YAML file, when known.
    """

    def __init__(self, message: str, path: str | os.PathLike | None = None,
                 key: str | None = None, lineno: int | None = None):
        self.key = key
        self.lineno = lineno
        super().__init__(message, path)

    def _format(self) -> str:
        where = self.path or "<manifest>"
        if self.lineno is not None:
            where = f"{where}:{self.lineno}"
        if self.key:
            return f"{where}: {self.key}: {self.message}"
        return f"{where}: {self.message}"


class ConsistencyError(InputError):
    """Frames of one scan disagree (different atoms, different order)."""


class ScanFormatError(InputError):
    """A scan result (scan.json, a cached frame) is malformed; the message names the key path."""


class DegenerateDensityError(InputError):
    """A density grid whose topology cannot be traced in bounded work.

    Raised for a constant grid (a plateau: every point is degenerate) and
    when the number of critical points or of gradient-path steps of one
    frame passes its cap (:mod:`trackscan.topology.limits`), as on a grid
    of random noise.  It is bad input (exit code 2), not a failed
    computation.
    """


class GeneratorError(TrackscanError):
    """A density source (external program, SCF, model) failed."""
