"""Type checks for YAML mappings that name the key path (and line) of a bad value.

One checker serves the scan manifest and its ``generator`` section, so every
configuration error reads the same: ``scan.yaml:7: frames[3].file: ...``.
"""

from __future__ import annotations

import difflib
import math
from pathlib import Path

from trackscan.errors import ConfigError

__all__ = ["KeyChecker", "as_number"]


def as_number(value):
    """`value`, or the float a YAML 1.1 string such as ``"1e-9"`` spells.

    PyYAML follows YAML 1.1, which reads ``1e-9`` (no decimal point) as a
    string; chemists write tolerances that way, so such strings count as
    numbers.  Anything else is returned unchanged.
    """
    if isinstance(value, str):
        try:
            return float(value)
        except ValueError:
            return value
    return value


class KeyChecker:
    """Checks values of a parsed YAML mapping; raises :class:`ConfigError`.

    Parameters
    ----------
    path : path-like or None
        The YAML file, for messages.
    lines : dict, optional
        Key path -> 1-based line, as recorded while composing the YAML; a
        missing key is reported at the line of its closest parent.
    """

    def __init__(self, path, lines=None):
        self.path = path
        self.lines = lines or {}

    def fail(self, key, message):
        """Raise ConfigError for `key`."""
        raise ConfigError(message, self.path, key or None, self.line_of(key))

    def line_of(self, key):
        """Line of `key`, or of its closest parent when the key is missing."""
        if not self.lines:
            return None
        while key:
            if key in self.lines:
                return self.lines[key]
            key = key.rsplit(".", 1)[0] if "." in key else (
                key.rsplit("[", 1)[0] if "[" in key else "")
        return self.lines.get("", 1)

    def mapping(self, value, key, allowed):
        """A dict whose keys are all in `allowed` (close matches suggested)."""
        if not isinstance(value, dict):
            self.fail(key, f"expected a mapping, got {type(value).__name__}")
        for k in value:
            if k not in allowed:
                close = difflib.get_close_matches(str(k), allowed, n=1)
                hint = f" (did you mean {close[0]!r}?)" if close else ""
                sub = f"{key}.{k}" if key else str(k)
                self.fail(sub, f"unknown key{hint}; allowed: {', '.join(allowed)}")
        return value

    def string(self, value, key):
        """A non-empty string."""
        if not isinstance(value, str) or not value.strip():
            self.fail(key, f"expected a non-empty string, got {value!r}")
        return value

    def number(self, value, key, *, positive=False, minimum=None):
        """A finite number (``"1e-9"`` included), optionally > 0 or >= `minimum`."""
        value = as_number(value)
        if isinstance(value, bool) or not isinstance(value, (int, float)) \
                or not math.isfinite(value):
            self.fail(key, f"expected a finite number, got {value!r}")
        if positive and value <= 0:
            self.fail(key, f"must be > 0, got {value!r}")
        if minimum is not None and value < minimum:
            self.fail(key, f"must be >= {minimum}, got {value!r}")
        return float(value)

    def integer(self, value, key, *, minimum=None):
        """An integer (not a bool), optionally >= `minimum`."""
        if isinstance(value, bool) or not isinstance(value, int):
            self.fail(key, f"expected an integer, got {value!r}")
        if minimum is not None and value < minimum:
            self.fail(key, f"must be >= {minimum}, got {value!r}")
        return int(value)

    def boolean(self, value, key):
        """true or false."""
        if not isinstance(value, bool):
            self.fail(key, f"expected true or false, got {value!r}")
        return value

    def file(self, value, key, base):
        """An existing file, relative to `base`."""
        p = Path(base) / self.string(value, key)
        if not p.is_file():
            self.fail(key, f"file not found: {p}")
        return p

    def atoms(self, value, key, n=None):
        """A list of distinct 1-based atom numbers (exactly `n` of them if given)."""
        ok = isinstance(value, list) and value and all(
            isinstance(a, int) and not isinstance(a, bool) and a >= 1 for a in value)
        if not ok or (n is not None and len(value) != n):
            what = f"a list of {n} atom numbers" if n else "a list of atom numbers"
            self.fail(key, f"expected {what} (1-based), got {value!r}")
        if len(set(value)) != len(value):
            self.fail(key, f"atoms must be distinct, got {value!r}")
        return tuple(value)
