"""The report's visual language and figure output: palette, CP markers, journal sizes, files.

Colours are the eight of Okabe and Ito [1]_, distinguishable with the common
colour-vision deficiencies; every CP kind also has its own marker shape, so
the figures stay readable in grey print.  Figures are drawn on
:class:`matplotlib.figure.Figure` with the Agg canvas (no pyplot, no global
state) at the width of one or two journal columns, and every figure is
written three times with the same content: a 300-dpi PNG, an SVG and a PDF
(fonts embedded as TrueType, so the text stays text).

:func:`text_overlaps` measures every visible text's bounding box with the
renderer; :func:`finish` shortens nothing but checks a figure after layout
and logs any overlap, and the tests assert there is none.

References
----------
.. [1] M. Okabe and K. Ito, "Color Universal Design (CUD): how to make
   figures and presentations that are friendly to colorblind people" (2008),
   https://jfly.uni-koeln.de/color/ [from memory: the address and the eight
   hex values below were not checked against the source here]
"""

from __future__ import annotations

import functools
import io
import logging
import textwrap

import matplotlib
import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure as MplFigure
from matplotlib.text import Text

__all__ = ["OKABE_ITO", "CP_STYLE", "LINE_COLOURS", "LINE_STYLES", "new_figure", "render",
           "BRACKET_STYLE", "ESTIMATE_STYLE", "COLUMN_WIDTH_IN", "DOUBLE_WIDTH_IN", "PNG_DPI",
           "FONT_SIZE", "styled", "label_clashes", "LABEL_GID", "MARKER_GID", "CONTEXT_GREY", "text_overlaps", "wrap_to_width", "visible_texts", "FigureFiles"]

logger = logging.getLogger(__name__)

#: Width of one journal column (85 mm), inches.
COLUMN_WIDTH_IN = 3.35
#: Width of a two-column figure (178 mm), inches.
DOUBLE_WIDTH_IN = 7.0
#: Resolution of the PNG files (journals ask for at least 300 dpi).
PNG_DPI = 300
#: White margin (inches) around the drawn content of a figure file.
_PAD_IN = 0.03
#: Base font size (pt) at printed size.
FONT_SIZE = 7.5

#: Okabe & Ito (2008) palette, name -> hex colour [from memory].
OKABE_ITO = {
    "black": "#000000",
    "orange": "#E69F00",
    "sky_blue": "#56B4E9",
    "bluish_green": "#009E73",
    "yellow": "#F0E442",
    "blue": "#0072B2",
    "vermillion": "#D55E00",
    "reddish_purple": "#CC79A7",
}

#: Colours for one-line-per-bond-path plots, in the order they are used.
LINE_COLOURS = tuple(OKABE_ITO[k] for k in ("blue", "orange", "bluish_green", "vermillion",
                                            "reddish_purple", "sky_blue", "black"))
#: Line styles combined with the colours when there are more lines than colours.
LINE_STYLES = ("-", "--", ":", "-.")
#: Colour of lines that are context, not the story (bonds not involved in a change).
CONTEXT_GREY = "#9a9a9a"

#: Marker, colour, size (pt²) and legend text of each CP kind (and the nuclei).
CP_STYLE = {
    "nuclear": dict(marker="o", color=OKABE_ITO["black"], size=30, label="nucleus"),
    "non_nuclear": dict(marker="D", color=OKABE_ITO["reddish_purple"], size=22,
                        label="non-nuclear attractor (3,−3)"),
    "bond": dict(marker="o", color=OKABE_ITO["blue"], size=12, label="bond CP (3,−1)"),
    "ring": dict(marker="^", color=OKABE_ITO["bluish_green"], size=24, label="ring CP (3,+1)"),
    "cage": dict(marker="s", color=OKABE_ITO["vermillion"], size=20, label="cage CP (3,+3)"),
    "degenerate": dict(marker="X", color=OKABE_ITO["orange"], size=26,
                       label="degenerate CP (rank < 3)"),
}

#: Shading of a change bracket on coordinate axes.
BRACKET_STYLE = dict(color="#999999", alpha=0.3, lw=0)
#: Line at a change estimate.
ESTIMATE_STYLE = dict(color=OKABE_ITO["vermillion"], ls="--", lw=1.0)

_RC = {
    "font.size": FONT_SIZE, "axes.titlesize": FONT_SIZE + 0.5, "axes.labelsize": FONT_SIZE,
    "xtick.labelsize": FONT_SIZE - 0.5, "ytick.labelsize": FONT_SIZE - 0.5,
    "legend.fontsize": FONT_SIZE - 0.5, "axes.linewidth": 0.6, "lines.linewidth": 1.1,
    "xtick.major.width": 0.6, "ytick.major.width": 0.6, "font.family": "DejaVu Sans",
    "svg.hashsalt": "trackscan", "svg.fonttype": "path", "pdf.fonttype": 42,
}


def new_figure(columns: int = 2, height: float = 2.6) -> MplFigure:
    """A new figure one (`columns` = 1) or two journal columns wide, `height` inches tall."""
    width = COLUMN_WIDTH_IN if columns == 1 else DOUBLE_WIDTH_IN
    fig = MplFigure(figsize=(width, height), dpi=100, facecolor="white")
    FigureCanvasAgg(fig)
    return fig


def settle(fig: MplFigure) -> None:
    """Fix every axes' final box (aspect ratios applied) without drawing the figure.

    Measuring texts and transforming data to pixels needs only this, not a
    full draw, which is the expensive part of making a figure.
    """
    for ax in fig.axes:
        ax.apply_aspect()
        for child in ax.child_axes:
            child.apply_aspect()


def styled(make):
    """Decorator: run a figure-making function inside the report's rc settings.

    Font sizes and line widths are read by matplotlib when axes and artists
    are created, so the whole function runs in :func:`matplotlib.rc_context`
    (nothing global is changed).
    """
    @functools.wraps(make)
    def wrapper(*args, **kwargs):
        with matplotlib.rc_context(_RC):
            return make(*args, **kwargs)
    return wrapper


class FigureFiles:
    """The three renderings of one figure (same content): PNG, SVG and PDF bytes."""

    __slots__ = ("png", "svg", "pdf", "size_in", "overlaps")

    def __init__(self, png: bytes, svg: bytes, pdf: bytes, size_in: tuple, overlaps=()):
        self.png, self.svg, self.pdf, self.size_in = png, svg, pdf, size_in
        #: What :func:`text_overlaps` and :func:`label_clashes` found after layout.
        self.overlaps = tuple(overlaps)


def render(fig: MplFigure) -> FigureFiles:
    """The figure as 300-dpi PNG, SVG and PDF bytes, with no time stamps (reruns identical).

    The figure is laid out once (``bbox_inches="tight"``) and checked with
    :func:`text_overlaps`; an overlap is logged as a warning.
    """
    with matplotlib.rc_context(_RC):
        fig.canvas.draw()
        clashes = text_overlaps(fig) + label_clashes(fig)
        for a, b in clashes:
            logger.warning("figure text overlaps: %r and %r", a, b)
        # the tight box once, so each format draws the figure once (not twice)
        bbox = fig.get_tightbbox(fig.canvas.get_renderer()).padded(_PAD_IN)
        out = {}
        for fmt, meta in (("png", {"Software": None}),
                          ("svg", {"Date": None, "Creator": None}),
                          ("pdf", {"CreationDate": None, "Creator": None, "Producer": None})):
            buf = io.BytesIO()
            fig.savefig(buf, format=fmt, dpi=PNG_DPI, metadata=meta, bbox_inches=bbox,
                        facecolor="white")
            out[fmt] = buf.getvalue()
    return FigureFiles(out["png"], out["svg"], out["pdf"],
                       (float(bbox.width), float(bbox.height)), clashes)


def _axes_texts(ax) -> list:
    out = [ax.title, ax._left_title, ax._right_title, ax.xaxis.label, ax.yaxis.label]
    for axis in (ax.xaxis, ax.yaxis):
        lo, hi = sorted(axis.get_view_interval())
        span = hi - lo
        for tick in axis.get_major_ticks() + axis.get_minor_ticks():
            loc = tick.get_loc()
            if loc is None or not (lo - 1e-9 * span <= loc <= hi + 1e-9 * span):
                continue
            out += [tick.label1, tick.label2]
        out.append(axis.get_offset_text())
    out += list(ax.texts)
    legend = ax.get_legend()
    if legend is not None:
        out += list(legend.get_texts()) + [legend.get_title()]
    for child in ax.child_axes:
        out += _axes_texts(child)
    return out


def visible_texts(fig: MplFigure) -> list:
    """Every drawn, non-empty text of a figure: titles, axis and tick labels, legends, notes.

    Tick labels outside the view interval (which matplotlib keeps but does not
    draw) are left out.
    """
    texts = list(fig.texts)
    for legend in fig.legends:
        texts += list(legend.get_texts()) + [legend.get_title()]
    for ax in fig.axes:
        if ax.get_visible() and ax.axison:
            texts += _axes_texts(ax)
    seen, out = set(), []
    for t in texts:
        if id(t) in seen or not t.get_visible() or not t.get_text().strip():
            continue
        seen.add(id(t))
        out.append(t)
    return out


def text_overlaps(fig: MplFigure, *, pad: float = 0.5) -> list:
    """Pairs of visible texts whose bounding boxes overlap (measured with the renderer).

    Parameters
    ----------
    fig : matplotlib.figure.Figure
        Drawn at least once (its layout final).
    pad : float
        Pixels (at 100 dpi) by which boxes are shrunk before testing, so
        that texts that merely touch do not count.

    Returns
    -------
    list of (str, str)
    """
    renderer = fig.canvas.get_renderer()
    boxes = []
    for t in visible_texts(fig):
        bb = t.get_window_extent(renderer)
        if bb.width <= 0 or bb.height <= 0:
            continue
        boxes.append((t.get_text(), bb.x0 + pad, bb.y0 + pad, bb.x1 - pad, bb.y1 - pad))
    out = []
    for i in range(len(boxes)):
        for j in range(i + 1, len(boxes)):
            a, b = boxes[i], boxes[j]
            if a[1] < b[3] and b[1] < a[3] and a[2] < b[4] and b[2] < a[4]:
                out.append((a[0], b[0]))
    return out


#: gid of the texts that label atoms, and of the markers they must not cover.
LABEL_GID = "atom-label"
MARKER_GID = "cp-marker"


def label_clashes(fig: MplFigure) -> list:
    """Atom labels that cover a marker or reach outside their axes.

    Markers are the scatter collections with gid :data:`MARKER_GID`; labels
    the texts with gid :data:`LABEL_GID`.  Returns ``(label, what)`` pairs.
    """
    renderer = fig.canvas.get_renderer()
    out = []
    axes = list(fig.axes)
    for ax in axes:
        labels = [t for t in ax.texts if t.get_gid() == LABEL_GID and t.get_visible()]
        if not labels:
            continue
        frame = ax.get_window_extent(renderer)
        discs = []
        px = fig.dpi / 72.0
        for coll in ax.collections:
            if coll.get_gid() != MARKER_GID:
                continue
            sizes = coll.get_sizes()
            r = 0.5 * float(np.sqrt(sizes[0] if len(sizes) else 20.0)) * px
            for xy in ax.transData.transform(coll.get_offsets()):
                discs.append((xy[0], xy[1], r))
        for t in labels:
            bb = t.get_window_extent(renderer)
            if bb.x0 < frame.x0 - 0.5 or bb.x1 > frame.x1 + 0.5 or \
                    bb.y0 < frame.y0 - 0.5 or bb.y1 > frame.y1 + 0.5:
                out.append((t.get_text(), "the edge of its panel"))
            for x, y, r in discs:
                dx = max(bb.x0 - x, 0.0, x - bb.x1)
                dy = max(bb.y0 - y, 0.0, y - bb.y1)
                if dx * dx + dy * dy < (0.8 * r) ** 2:
                    out.append((t.get_text(), f"a marker at ({x:.0f}, {y:.0f}) px"))
    return out


def wrap_to_width(fig: MplFigure, text: str, width_in: float, *,
                  fontsize: float = FONT_SIZE) -> str:
    """`text` wrapped (at spaces) so that each line fits `width_in` inches at `fontsize`.

    Measured with the figure's renderer, not estimated from a character count.
    """
    renderer = fig.canvas.get_renderer()
    limit = width_in * fig.dpi

    def fits(line):
        t = Text(0, 0, line, fontsize=fontsize, figure=fig)
        return t.get_window_extent(renderer).width <= limit

    if fits(text):
        return text
    words = text.split()
    for n in range(max(len(text), 1), 5, -1):
        lines = textwrap.wrap(text, n)
        if all(fits(line) for line in lines):
            return "\n".join(lines)
    return "\n".join(words)


def legend_below(fig: MplFigure, axes, handles, *, ncol: int = 2):
    """A figure legend just below `axes` (one axes or a list), under their tick labels.

    The axes' full extent (ticks, labels) is measured with the renderer, so
    the legend never covers an axis label; saving with ``bbox_inches="tight"``
    makes room for it.
    """
    if not handles:
        return None
    axes = list(axes) if isinstance(axes, (list, tuple)) else [axes]
    settle(fig)
    renderer = fig.canvas.get_renderer()
    boxes = [ax.get_tightbbox(renderer) for ax in axes]
    x0 = min(b.x0 for b in boxes)
    x1 = max(b.x1 for b in boxes)
    y0 = min(b.y0 for b in boxes)
    inv = fig.transFigure.inverted()
    (fx0, fy0), (fx1, _) = inv.transform([(x0, y0), (x1, y0)])
    return fig.legend(handles=handles, loc="upper center", ncol=ncol, frameon=False,
                      bbox_to_anchor=(0.5 * (fx0 + fx1), fy0 - 0.01),
                      columnspacing=1.2, handletextpad=0.5)
