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
    """A figure with its caption, rendered as PNG (300 dpi), SVG and PDF.

    Parameters
    ----------
    name : str
        File stem (``NAME.png``, ``NAME.svg``, ``NAME.pdf`` in the report folder).
    files : trackscan.report.style.FigureFiles
        The three renderings (same content).
    caption : str
    alt : str
        Short text alternative.
    """

    name: str
    files: object
    caption: str
    alt: str = ""

    @property
    def png(self) -> bytes:
        return self.files.png

    @property
    def svg(self) -> bytes:
        return self.files.svg

    @property
    def pdf(self) -> bytes:
        return self.files.pdf

    @property
    def width_in(self) -> float:
        """Printed width (inches) of the figure as laid out."""
        return self.files.size_in[0]


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
