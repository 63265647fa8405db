"""The report's visual language: colour-blind-safe palette, CP markers, PNG output.

Colours are the eight of Okabe and Ito [1]_, distinguishable with the common
colour-vision deficiencies; every CP kind also has its own marker shape, so
the figures stay readable in grey print.  Figures are made with
:class:`matplotlib.figure.Figure` and the Agg canvas directly: no pyplot, no
global backend switch, nothing left open.

References
----------
.. [1] M. Okabe and K. Ito, "Color Universal Design (CUD): how to make
   figures and presentations that are friendly to colorblind people" (2008),
   https://jfly.uni-koeln.de/color/ [from memory: the address and the eight
   hex values below were not checked against the source here]
"""

from __future__ import annotations

import io

from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

__all__ = ["OKABE_ITO", "CP_STYLE", "LINE_COLOURS", "LINE_STYLES", "new_figure", "to_png",
           "BRACKET_STYLE", "ESTIMATE_STYLE"]

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

#: Marker, colour, size and legend text of each CP kind (and the nuclei).
CP_STYLE = {
    "nuclear": dict(marker="o", color=OKABE_ITO["black"], size=60, label="nucleus (attractor)"),
    "non_nuclear": dict(marker="D", color=OKABE_ITO["reddish_purple"], size=40,
                        label="non-nuclear attractor (3,−3)"),
    "bond": dict(marker="o", color=OKABE_ITO["blue"], size=22, label="bond CP (3,−1)"),
    "ring": dict(marker="^", color=OKABE_ITO["bluish_green"], size=46, label="ring CP (3,+1)"),
    "cage": dict(marker="s", color=OKABE_ITO["vermillion"], size=40, label="cage CP (3,+3)"),
    "degenerate": dict(marker="X", color=OKABE_ITO["orange"], size=50,
                       label="degenerate CP (rank < 3)"),
}

#: Shading of a change bracket on coordinate axes.
BRACKET_STYLE = dict(color="#999999", alpha=0.25, lw=0)
#: Line at a change estimate.
ESTIMATE_STYLE = dict(color=OKABE_ITO["vermillion"], ls="--", lw=1.2)


def new_figure(width: float = 7.0, height: float = 4.0) -> Figure:
    """A new figure (inches) on its own Agg canvas, white background."""
    fig = Figure(figsize=(width, height), dpi=100, facecolor="white")
    FigureCanvasAgg(fig)
    return fig


def to_png(fig: Figure) -> bytes:
    """The figure as PNG bytes (no time stamp in the metadata)."""
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=100, metadata={"Software": None},
                bbox_inches="tight", facecolor="white")
    return buf.getvalue()
