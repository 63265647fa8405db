"""Read a written report back (HTML tables, Markdown tables, numbers at their shown precision).

Test helpers only: they parse what the report shows, independently of the
report code, so the tests compare the page with scan.json.
"""

from __future__ import annotations

import math
import re
from html.parser import HTMLParser

NUMBER = re.compile(r"[-−]?\d+(?:\.\d+)?(?:e[-+]?\d+)?")


VOID = {"meta", "img", "br", "hr", "link", "input", "col", "area", "base", "source", "wbr"}


class TableReader(HTMLParser):
    """Collects every <table id=...> as header + rows of cell text, and every <img>.

    ``errors`` lists tags closed out of order or never closed (HTML that
    html.parser accepts but is not well nested).
    """

    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.tables, self.images, self.links = {}, [], []
        self._table = None
        self._row = None
        self._cell = None
        self._stack = []
        self.errors = []

    def handle_starttag(self, tag, attrs):
        attrs = dict(attrs)
        if tag not in VOID:
            self._stack.append(tag)
        if tag == "table":
            self._table = {"header": [], "rows": []}
            self.tables[attrs.get("id")] = self._table
        elif tag == "tr" and self._table is not None:
            self._row = []
        elif tag in ("td", "th") and self._row is not None:
            self._cell = []
        elif tag == "img":
            self.images.append(attrs)
        for key in ("href", "src"):
            if key in attrs and tag != "img":
                self.links.append(attrs[key])

    def handle_endtag(self, tag):
        if self._stack and self._stack[-1] == tag:
            self._stack.pop()
        else:
            self.errors.append(f"</{tag}> closes {self._stack[-1] if self._stack else 'nothing'}")
        if tag in ("td", "th") and self._cell is not None:
            self._row.append(("th" if tag == "th" else "td", "".join(self._cell).strip()))
            self._cell = None
        elif tag == "tr" and self._row is not None:
            if all(kind == "th" for kind, _ in self._row):
                self._table["header"] = [t for _, t in self._row]
            else:
                self._table["rows"].append([t for _, t in self._row])
            self._row = None
        elif tag == "table":
            self._table = None

    def handle_data(self, data):
        if self._cell is not None:
            self._cell.append(data)


def read_html(text: str) -> TableReader:
    reader = TableReader()
    reader.feed(text)
    reader.close()
    reader.errors += [f"<{t}> never closed" for t in reader._stack]
    return reader


def _split_md_row(line: str) -> list:
    cells, cur, i = [], [], 1
    body = line.strip()
    while i < len(body):
        ch = body[i]
        if ch == "\\" and i + 1 < len(body):
            cur.append(body[i + 1])
            i += 2
            continue
        if ch == "|":
            cells.append("".join(cur).strip())
            cur = []
        else:
            cur.append(ch)
        i += 1
    return cells


def read_markdown_tables(text: str) -> list:
    """Every pipe table of a Markdown text as {"header": [...], "rows": [[...]]}."""
    tables, lines, i = [], text.splitlines(), 0
    while i < len(lines):
        if lines[i].startswith("|") and i + 1 < len(lines) and lines[i + 1].startswith("|") \
                and set(lines[i + 1].replace("|", "").split()) <= {"---"}:
            table = {"header": _split_md_row(lines[i]), "rows": []}
            i += 2
            while i < len(lines) and lines[i].startswith("|"):
                table["rows"].append(_split_md_row(lines[i]))
                i += 1
            tables.append(table)
        else:
            i += 1
    return tables


def numbers(text: str) -> list:
    """The numbers written in a cell, as strings."""
    return [m.group(0).replace("−", "-") for m in NUMBER.finditer(text)]


def shown_equals(shown: str, value) -> bool:
    """True when the string `shown` is `value` written at the precision it shows."""
    x = float(shown)
    mant, _, exp = shown.lower().partition("e")
    decimals = len(mant.split(".")[1]) if "." in mant else 0
    tol = 0.5 * 10.0 ** (int(exp or 0) - decimals)
    return math.isclose(x, float(value), abs_tol=tol * (1 + 1e-9) + 1e-15)
