"""Progress reporting: events from the library, drawn by the command line.

Library functions take ``progress: Callable[[ProgressEvent], None] | None``
and call it as work advances; they never print.  :class:`TextProgress` is the
command line's renderer: a one-line counter on stderr, drawn only when stderr
is a terminal (so logs and error lines stay clean), cleared when done.
"""

from __future__ import annotations

import sys
from dataclasses import dataclass

__all__ = ["ProgressEvent", "TextProgress", "report"]


@dataclass(frozen=True)
class ProgressEvent:
    """One step of a long task.

    Attributes
    ----------
    task : str
        What is being done, e.g. ``"analyse frames"``.
    done : int
        Steps finished.
    total : int
        Steps in all (0 when unknown).
    message : str
        Detail of the last step, e.g. a file name.
    """

    task: str
    done: int
    total: int = 0
    message: str = ""


def report(progress, task: str, done: int, total: int = 0, message: str = "") -> None:
    """Send a :class:`ProgressEvent` to `progress` if it is not None."""
    if progress is not None:
        progress(ProgressEvent(task, done, total, message))


class TextProgress:
    """Draw progress events as one self-overwriting line on a stream.

    Parameters
    ----------
    stream : file object, optional
        Default ``sys.stderr``.
    enabled : bool, optional
        Default: only when the stream is a terminal.
    """

    def __init__(self, stream=None, enabled: bool | None = None):
        self.stream = stream if stream is not None else sys.stderr
        if enabled is None:
            enabled = bool(getattr(self.stream, "isatty", lambda: False)())
        self.enabled = enabled
        self._width = 0

    def __call__(self, event: ProgressEvent) -> None:
        if not self.enabled:
            return
        total = f"/{event.total}" if event.total else ""
        text = f"{event.task}: {event.done}{total} {event.message}"[:100]
        pad = max(0, self._width - len(text))
        self.stream.write("\r" + text + " " * pad)
        self.stream.flush()
        self._width = len(text)
        if event.total and event.done >= event.total:
            self.close()

    def close(self) -> None:
        """Clear the line."""
        if self.enabled and self._width:
            self.stream.write("\r" + " " * self._width + "\r")
            self.stream.flush()
            self._width = 0
