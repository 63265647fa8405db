"""Meaning and unit of each setting, read from the settings classes' own docstrings.

The numpydoc ``Attributes`` sections of
:class:`trackscan.settings.AnalysisSettings` and
:class:`trackscan.tracking.settings.TrackingSettings` are the one place
where a setting is explained; the report quotes their first sentence and
the unit they name, so the two can never disagree.
"""

from __future__ import annotations

import inspect
import re

__all__ = ["setting_meanings", "UNITS_IN_TEXT"]

#: Units recognised after the type (``float, bohr``) or in parentheses in the text.
UNITS_IN_TEXT = ("e/bohr^3", "bohr", "a.u.", "Å", "angstrom", "hartree", "degrees", "seconds")
_UNIT_DISPLAY = {"e/bohr^3": "a.u.", "angstrom": "Å", "degrees": "°"}


def _attributes(cls) -> dict:
    doc = inspect.getdoc(cls) or ""
    lines = doc.splitlines()
    out, name, head, body = {}, None, "", []
    in_section = False
    for i, line in enumerate(lines):
        if line.strip() == "Attributes" and i + 1 < len(lines) and set(lines[i + 1].strip()) == {"-"}:
            in_section = True
            continue
        if not in_section or set(line.strip()) == {"-"}:
            continue
        m = re.match(r"^(\w+) : (.*)$", line)
        if m and not line.startswith(" "):
            if name:
                out[name] = (head, " ".join(body))
            name, head, body = m.group(1), m.group(2), []
        elif line.startswith(" ") and name:
            body.append(line.strip())
        elif line.strip() and not line.startswith(" "):
            break
    if name:
        out[name] = (head, " ".join(body))
    return out


def _unit(head: str, text: str) -> str:
    parts = [p.strip() for p in head.split(",")]
    for p in parts[1:]:
        if p in UNITS_IN_TEXT:
            return _UNIT_DISPLAY.get(p, p)
    m = re.search(r"\(([^()]*)\)", text)
    if m:
        inner = m.group(1)
        for u in UNITS_IN_TEXT:
            if inner == u or inner.startswith(u + ",") or inner.endswith(" " + u):
                return _UNIT_DISPLAY.get(u, u)
    return ""


def _first_sentence(text: str) -> str:
    # "Default 2.5." ends at the period that ends the sentence, not at the decimal point
    text = re.sub(r"\s*Default .*?\.(?=\s|$)", "", text).strip()
    m = re.match(r"(.+?\.)(\s|$)", text)
    return (m.group(1) if m else text).replace("``", "")


def setting_meanings(group: str) -> dict:
    """``{name: (meaning, unit)}`` of the settings in `group` (``"settings"`` or ``"tracking"``)."""
    if group == "tracking":
        from trackscan.tracking.settings import TrackingSettings as cls
    else:
        from trackscan.settings import AnalysisSettings as cls
    return {name: (_first_sentence(text), _unit(head, text))
            for name, (head, text) in _attributes(cls).items()}
