"""Figure layout: no text overlaps another, atom labels cover no marker, long labels wrap.

The overlaps are measured on the drawn figures with matplotlib's renderer
(text bounding boxes in pixels), by the same functions the report runs on
every figure it writes (:func:`trackscan.report.style.text_overlaps` and
:func:`~trackscan.report.style.label_clashes`); the first tests show those
functions do find overlaps when there are some.
"""

from __future__ import annotations

import importlib.util
from pathlib import Path

import numpy as np
import pytest

from trackscan.report import load_scan
from trackscan.report.assemble import build_document
from trackscan.report.style import label_clashes, new_figure, text_overlaps

LONG_LABEL = ("distance between the migrating hydrogen H4 and the midpoint of the C1–C2 bond "
              "measured along the intrinsic reaction coordinate")


def _fixture():
    path = Path(__file__).with_name("report_fixtures.py")
    spec = importlib.util.spec_from_file_location("report_fixtures", path)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module.ring_opening_scan()


def test_text_overlaps_finds_two_titles_on_top_of_each_other():
    fig = new_figure(1, 2.0)
    a, b = fig.subplots(1, 2)
    a.set_title("a title long enough to run into the next panel's title")
    b.set_title("the next title")
    fig.canvas.draw()
    assert any("the next title" in pair for pair in text_overlaps(fig))
    a.set_title("short")
    fig.canvas.draw()
    assert text_overlaps(fig) == []


def test_label_clashes_finds_a_label_on_a_marker_and_one_outside_the_panel():
    fig = new_figure(1, 2.0)
    ax = fig.add_subplot()
    ax.set_xlim(0, 1)
    ax.set_ylim(0, 1)
    ax.scatter([0.5], [0.5], s=30, gid="cp-marker")
    ax.text(0.5, 0.5, "C1", gid="atom-label", ha="center", va="center")
    ax.text(0.99, 0.2, "H9 far out", gid="atom-label")
    fig.canvas.draw()
    found = label_clashes(fig)
    assert any(t == "C1" and "marker" in w for t, w in found)
    assert any(t == "H9 far out" and "edge" in w for t, w in found)


@pytest.fixture(scope="module")
def long_label_document():
    raw = _fixture()
    raw["scan"]["coordinate"]["label"] = LONG_LABEL
    return build_document(load_scan(raw))


def test_no_text_overlaps_in_any_figure_with_a_long_coordinate_label(long_label_document):
    figures = long_label_document.figures()
    names = {f.name for f in figures}
    # every kind of figure of the fixture is there to be checked
    assert {"energy", "cp_counts", "bond_cp_properties", "structures", "fold_change1",
            "graph_change1"} <= names
    for fig in figures:
        assert fig.files.overlaps == (), (fig.name, fig.files.overlaps)


def test_figures_fit_two_journal_columns(long_label_document):
    widths = [f.width_in for f in long_label_document.figures()]
    assert len(widths) >= 6 and max(widths) <= 7.3 and min(widths) >= 2.5


def test_atom_labels_avoid_the_markers_in_a_crowded_graph():
    # four atoms 0.25 Å apart around a bond CP: labels must find free space
    from trackscan.report.graphs import place_atom_labels
    fig = new_figure(1, 2.6)
    ax = fig.add_subplot()
    pts = np.array([[0, 0], [0.25, 0], [0, 0.25], [0.25, 0.25], [0.125, 0.125]])
    ax.scatter(pts[:, 0], pts[:, 1], s=30, gid="cp-marker")
    ax.set_xlim(-0.6, 0.85)
    ax.set_ylim(-0.6, 0.85)
    ax.set_aspect("equal")
    spots = [(p, f"H{i + 1}", False) for i, p in enumerate(pts[:4])]
    texts = place_atom_labels(ax, fig, spots)
    fig.canvas.draw()
    assert len(texts) == 4
    assert label_clashes(fig) == [] and text_overlaps(fig) == []
