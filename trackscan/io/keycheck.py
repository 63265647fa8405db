"""Type checks for YAML mappings that name the key path (and line) of a bad value.

One checker serves the scan manifest and its ``generator`` section, so every
configuration error reads the same: ``scan.yaml:7: frames[3].file: ...``.
"""

from __future__ import annotations

import difflib
import math
from pathlib import Path

from trackscan.errors import ConfigError

__all__ = ["KeyChecker", "as_number", "show", "MAX_MAGNITUDE"]

MAX_MAGNITUDE = 1e9
"""Largest magnitude a number in a manifest may have (coordinate values,
energies, spacings, timeouts).  Beyond it a value is a typo, and values such
as 1e300 or 1.7e308 overflow every computation made with them."""


def show(value, limit: int = 60) -> str:
    """``repr(value)``, cut to about `limit` characters for a one-line message."""
    text = repr(value)
    if len(text) <= limit:
        return text
    return f"{text[:limit]}... ({len(text)} characters)"


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
                name = str(k) if len(str(k)) <= 60 else str(k)[:60] + "..."
                sub = f"{key}.{name}" if key else name
                self.fail(sub, f"unknown key{hint}; allowed: {', '.join(allowed)}")
        return value

    def string(self, value, key):
        """A non-empty string."""
        if not isinstance(value, str) or not value.strip():
            self.fail(key, f"expected a non-empty string, got {show(value)}")
        return value

    def number(self, value, key, *, positive=False, minimum=None, limit=MAX_MAGNITUDE):
        """A finite number (``"1e-9"`` included), optionally > 0 or >= `minimum`.

        Its magnitude must not pass `limit` (default :data:`MAX_MAGNITUDE`).
        """
        value = as_number(value)
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            self.fail(key, f"expected a finite number, got {show(value)}")
        try:
            finite = math.isfinite(value)
        except OverflowError:           # an integer too large for a float
            finite = True
        if not finite:
            self.fail(key, f"expected a finite number, got {show(value)}")
        if limit is not None and abs(value) > limit:
            self.fail(key, f"{show(value)} is out of range (the magnitude must not pass "
                           f"{limit:g}; a typo?)")
        if positive and value <= 0:
            self.fail(key, f"must be > 0, got {show(value)}")
        if minimum is not None and value < minimum:
            self.fail(key, f"must be >= {minimum}, got {show(value)}")
        return float(value)

    def integer(self, value, key, *, minimum=None, limit=MAX_MAGNITUDE):
        """An integer (not a bool), optionally >= `minimum`, magnitude at most `limit`."""
        if isinstance(value, bool) or not isinstance(value, int):
            self.fail(key, f"expected an integer, got {show(value)}")
        if limit is not None and abs(value) > limit:
            self.fail(key, f"{show(value)} is out of range (the magnitude must not pass "
                           f"{limit:g}; a typo?)")
        if minimum is not None and value < minimum:
            self.fail(key, f"must be >= {minimum}, got {show(value)}")
        return int(value)

    def boolean(self, value, key):
        """true or false."""
        if not isinstance(value, bool):
            self.fail(key, f"expected true or false, got {show(value)}")
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
            self.fail(key, f"expected {what} (1-based), got {show(value)}")
        if len(set(value)) != len(value):
            self.fail(key, f"atoms must be distinct, got {show(value)}")
        return tuple(value)
