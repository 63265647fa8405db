"""The report as data: sections of paragraphs, lists, tables and figures.

:func:`trackscan.report.assemble.build_document` fills a :class:`Document`;
:mod:`trackscan.report.html` and :mod:`trackscan.report.markdown` render the
same document, so both files carry the same content.
"""

from __future__ import annotations

from dataclasses import dataclass, field

__all__ = ["Paragraph", "BulletList", "Table", "Figure", "Section", "Document"]


@dataclass(frozen=True)
class Paragraph:
    """Plain text (no markup); ``note=True`` renders it as a highlighted notice."""

    text: str
    note: bool = False


@dataclass(frozen=True)
class BulletList:
    """A list of plain-text items."""

    items: tuple


@dataclass(frozen=True)
class Table:
    """A table of strings.

    Parameters
    ----------
    key : str
        Identifier (HTML ``id`` and the name tests look tables up by).
    header : tuple of str
    rows : tuple of tuple of str
        Every row has as many cells as the header.
    caption : str
    """

    key: str
    header: tuple
    rows: tuple
    caption: str = ""

    def __post_init__(self):
        for row in self.rows:
            if len(row) != len(self.header):
                raise ValueError(f"table {self.key}: row {row!r} does not match the header")


@dataclass(frozen=True)
class Figure:
    """A PNG image with its caption.

    Parameters
    ----------
    name : str
        File stem for the Markdown report (``NAME.png`` beside report.md).
    png : bytes
    caption : str
    alt : str
        Short text alternative.
    """

    name: str
    png: bytes
    caption: str
    alt: str = ""


@dataclass(frozen=True)
class Section:
    """A titled section; ``collapsible`` sections fold away in HTML."""

    key: str
    title: str
    blocks: tuple = ()
    collapsible: bool = False


@dataclass
class Document:
    """The whole report: a title and its sections."""

    title: str
    sections: list = field(default_factory=list)

    def figures(self) -> list:
        """All figures in order."""
        return [b for s in self.sections for b in s.blocks if isinstance(b, Figure)]

    def tables(self) -> list:
        """All tables in order."""
        return [b for s in self.sections for b in s.blocks if isinstance(b, Table)]
