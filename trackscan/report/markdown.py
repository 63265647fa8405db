"""Render the report document as Markdown (report.md), images as PNG files beside it."""

from __future__ import annotations

import re

from trackscan.report.document import BulletList, Document, Figure, Paragraph, Section, Table

__all__ = ["render_markdown", "image_name"]


def image_name(fig: Figure) -> str:
    """File name of a figure beside report.md."""
    return f"{fig.name}.png"


_HTML_START = re.compile(r"<(?=[A-Za-z/!?])|&(?=#?\w+;)")


def _text(text) -> str:
    """Text from the scan (names, descriptions) with HTML neutralised: a Markdown
    viewer shows ``<script>`` as text instead of passing it through."""
    return _HTML_START.sub(lambda m: "&lt;" if m.group() == "<" else "&amp;", str(text))


def _cell(text: str) -> str:
    return _text(text).replace("\\", "\\\\").replace("|", "\\|").replace("\n", " ")


def _table(t: Table) -> str:
    lines = []
    if t.caption:
        lines += [f"*{_cell(t.caption)}*", ""]
    lines.append("| " + " | ".join(_cell(h) for h in t.header) + " |")
    lines.append("|" + "|".join(" --- " for _ in t.header) + "|")
    for row in t.rows:
        lines.append("| " + " | ".join(_cell(c) for c in row) + " |")
    return "\n".join(lines)


def _block(b) -> str:
    if isinstance(b, Table):
        return _table(b)
    if isinstance(b, Figure):
        return f"![{_text(b.alt or b.name)}]({image_name(b)})\n\n*{_text(b.caption)}*"
    if isinstance(b, Paragraph):
        return f"> **Note.** {_text(b.text)}" if b.note else _text(b.text)
    if isinstance(b, BulletList):
        return "\n".join(f"- {_text(i)}" for i in b.items)
    raise TypeError(f"unknown block {type(b).__name__}")


def _section(s: Section) -> str:
    body = "\n\n".join(_block(b) for b in s.blocks)
    return f"## {_text(s.title)}\n\n{body}"


def render_markdown(doc: Document, *, footer: str = "") -> str:
    """The document as Markdown text; figures refer to ``NAME.png`` beside the file."""
    parts = [f"# {_text(doc.title)}"] + [_section(s) for s in doc.sections]
    if footer:
        parts.append(f"---\n\n{footer}")
    return "\n\n".join(parts) + "\n"
