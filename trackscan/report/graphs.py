"""Molecular graphs: both sides of each change, and one picture of every structure.

Nuclei are labelled with element and number; bond paths are the traced
polylines projected on a best-fit plane; bond, ring and cage CPs are marked.
The CPs a change concerns are ringed, the bond paths it breaks, forms or
switches drawn in colour, and the place where a fold pair vanished (or
appears) is marked on the panel without it.  When the pair's two markers
would overlap (just before a fold), an inset magnifies them.  Atom labels
are placed where their measured boxes hit no marker, no other label and
stay inside the panel.
"""

from __future__ import annotations

import numpy as np
from matplotlib.lines import Line2D

from trackscan.report.change_geometry import (Plane, best_plane, change_plane, changed_tracks,
                                              fold_pair, involved_atoms)
from trackscan.report.document import Figure
from trackscan.report.scan_view import ScanView
from trackscan.report.style import (CP_STYLE, FONT_SIZE, OKABE_ITO, legend_below, new_figure,
                                    render, settle, styled, wrap_to_width)
from trackscan.report.wording import change_decimals, fmt_coord
from trackscan.units import BOHR_IN_ANGSTROM

__all__ = ["draw_graph", "graph_figure", "structures_figure", "legend_handles",
           "place_atom_labels", "panel_title", "ATOM_LABEL_GID", "PAIR_INSET_PIXELS"]

PATH_COLOUR = "#555555"
CHANGED_COLOUR = OKABE_ITO["vermillion"]
#: gid of atom-label texts (the tests find them by it).
ATOM_LABEL_GID = "atom-label"
#: Atoms whose projections lie closer than this (Å) share one label.
_SAME_SPOT_ANGSTROM = 0.08
#: A fold pair closer than this on the page (pixels at 100 dpi) gets a magnifying inset.
PAIR_INSET_PIXELS = 12.0
_LABEL_FONT = FONT_SIZE - 0.5


def _uv(plane: Plane, points) -> np.ndarray:
    return plane.project(points) * BOHR_IN_ANGSTROM


def draw_graph(ax, scan: ScanView, frame, plane: Plane, *, involved=(), changed=(),
               labels: bool = True) -> list:
    """Draw one frame's molecular graph on `ax` (in-plane coordinates in Å).

    Returns
    -------
    list of (uv, text, bold)
        The atom labels to place (see :func:`place_atom_labels`) once the
        axes limits are final; empty when `labels` is False.
    """
    changed, involved = set(changed), set(involved)
    cps = {cp.id: cp for cp in frame.critical_points}
    pos = {a.number: a.position_bohr for a in frame.atoms}
    for path in frame.bond_paths:
        cp = cps.get(path.cp)
        hot = cp is not None and cp.track in changed
        pts = path.points_bohr
        if not pts:
            ends = [pos[a] for a in path.atoms if a in pos]
            if cp is not None and len(ends) == 2:
                pts = (ends[0], cp.position_bohr, ends[1])
        if not pts:
            continue
        uv = _uv(plane, pts)
        ax.plot(uv[:, 0], uv[:, 1], color=CHANGED_COLOUR if hot else PATH_COLOUR,
                ls=":" if path.complete is False else "-", lw=1.8 if hot else 0.9, zorder=1,
                solid_capstyle="round", gid="bond-path")
    for cp in cps.values():
        if cp.kind == "nuclear" or cp.kind not in CP_STYLE:
            continue
        st = CP_STYLE[cp.kind]
        uv = _uv(plane, cp.position_bohr)[0]
        ax.scatter([uv[0]], [uv[1]], marker=st["marker"], color=st["color"], s=st["size"],
                   zorder=3, edgecolors="black", linewidths=0.3, gid="cp-marker")
        if cp.track in changed:
            ax.scatter([uv[0]], [uv[1]], marker="o", facecolors="none",
                       edgecolors=CHANGED_COLOUR, s=st["size"] * 4.0, linewidths=1.1,
                       zorder=4, gid="cp-marker")
    st = CP_STYLE["nuclear"]
    spots = []
    for atom in sorted(frame.atoms, key=lambda a: a.number):
        uv = _uv(plane, atom.position_bohr)[0]
        bold = atom.number in involved
        ax.scatter([uv[0]], [uv[1]], marker=st["marker"], s=st["size"] * (1.25 if bold else 1.0),
                   color="white", edgecolors=st["color"], linewidths=1.3 if bold else 0.7,
                   zorder=5, gid="cp-marker")
        for spot in spots:
            if np.linalg.norm(spot[0] - uv) < _SAME_SPOT_ANGSTROM:
                spot[1].append(atom.label)
                spot[2] = spot[2] or bold
                break
        else:
            spots.append([uv, [atom.label], bold])
    ax.grid(alpha=0.2, lw=0.4)
    ax.tick_params(labelsize=FONT_SIZE - 1)
    return [(uv, ", ".join(names), bold) for uv, names, bold in spots] if labels else []


def _obstacles(ax, fig) -> np.ndarray:
    """Marker discs and bond-path points of `ax` in display pixels: rows (x, y, radius, weight)."""
    out = []
    px = fig.dpi / 72.0
    for coll in ax.collections:
        if coll.get_gid() != "cp-marker":
            continue
        sizes = coll.get_sizes()
        r = 0.5 * np.sqrt(sizes[0] if len(sizes) else 20.0) * px + 1.0
        for xy in ax.transData.transform(coll.get_offsets()):
            out.append((xy[0], xy[1], r, 1.0))
    for line in ax.lines:
        if line.get_gid() != "bond-path":
            continue
        xy = ax.transData.transform(np.column_stack(line.get_data()))
        for a, b in zip(xy, xy[1:]):
            n = max(1, int(np.linalg.norm(b - a) / 4.0))
            for t in np.linspace(0, 1, n + 1):
                p = a + t * (b - a)
                out.append((p[0], p[1], 1.2, 0.15))
    return np.array(out, float).reshape(-1, 4)


def _box_hits(bb, obstacles: np.ndarray) -> float:
    """Weighted count of obstacles (markers 1, path points 0.15) that the box touches."""
    if not len(obstacles):
        return 0.0
    x, y, r, w = obstacles.T
    dx = np.maximum.reduce([bb.x0 - x, np.zeros_like(x), x - bb.x1])
    dy = np.maximum.reduce([bb.y0 - y, np.zeros_like(y), y - bb.y1])
    return float(np.sum(w[dx * dx + dy * dy < r * r]))


def _overlap(a, b) -> float:
    w = min(a.x1, b.x1) - max(a.x0, b.x0)
    h = min(a.y1, b.y1) - max(a.y0, b.y0)
    return max(w, 0.0) * max(h, 0.0)


_DIRECTIONS = [(np.cos(t), np.sin(t)) for t in np.deg2rad([45, 135, -45, -135, 0, 180, 90, -90])]


def place_atom_labels(ax, fig, spots) -> list:
    """Place atom labels where they hit no marker, no placed label, and stay inside the axes.

    Candidate offsets (8 directions, 3 distances) are tried for each label
    and scored with the renderer's measured text boxes; the best is kept.
    Returns the Text objects.
    """
    if not spots:
        return []
    settle(fig)
    renderer = fig.canvas.get_renderer()
    obstacles = _obstacles(ax, fig)
    frame_box = ax.get_window_extent(renderer)
    placed, texts = [], []
    for uv, text, bold in sorted(spots, key=lambda s: (not s[2], s[1])):
        t = ax.annotate(text, uv, xytext=(0, 0), textcoords="offset points",
                        fontsize=_LABEL_FONT, fontweight="bold" if bold else "normal",
                        zorder=6, gid=ATOM_LABEL_GID, annotation_clip=False)
        best = None
        for dist in (4.5, 7.5, 11.0):
            for dx, dy in _DIRECTIONS:
                ha = "left" if dx > 0.3 else "right" if dx < -0.3 else "center"
                va = "bottom" if dy > 0.3 else "top" if dy < -0.3 else "center"
                t.set_position((dx * dist, dy * dist))
                t.set_ha(ha)
                t.set_va(va)
                bb = t.get_window_extent(renderer)
                outside = (max(frame_box.x0 - bb.x0, 0) + max(bb.x1 - frame_box.x1, 0)
                           + max(frame_box.y0 - bb.y0, 0) + max(bb.y1 - frame_box.y1, 0))
                score = (10.0 * _box_hits(bb, obstacles) + 5.0 * outside
                         + sum(_overlap(bb, p) for p in placed) + 0.05 * dist)
                if best is None or score < best[0] - 1e-9:
                    best = (score, (dx * dist, dy * dist), ha, va, bb)
        _, xy, ha, va, bb = best
        t.set_position(xy)
        t.set_ha(ha)
        t.set_va(va)
        placed.append(bb)
        texts.append(t)
    return texts


def legend_handles(frames, *, pair=False, changed=True) -> list:
    """Legend entries for what is drawn (CP kinds present, highlights)."""
    kinds = set()
    open_path = False
    for f in frames:
        if f is None:
            continue
        kinds |= {cp.kind for cp in f.critical_points}
        open_path = open_path or any(p.complete is False for p in f.bond_paths)
    st = CP_STYLE["nuclear"]
    handles = [Line2D([], [], marker="o", ls="none", markerfacecolor="white",
                      markeredgecolor=st["color"], ms=5,
                      label="nucleus (bold: involved)" if changed else "nucleus"),
               Line2D([], [], color=PATH_COLOUR, lw=0.9, label="bond path")]
    if open_path:
        handles.append(Line2D([], [], color=PATH_COLOUR, lw=0.9, ls=":",
                              label="bond path not reaching an attractor"))
    if changed:
        handles.append(Line2D([], [], color=CHANGED_COLOUR, lw=1.8,
                              label="bond path broken, formed or switched"))
    for kind in ("bond", "ring", "cage", "non_nuclear", "degenerate"):
        if kind in kinds:
            s = CP_STYLE[kind]
            handles.append(Line2D([], [], marker=s["marker"], ls="none", color=s["color"],
                                  markeredgecolor="black", markeredgewidth=0.3,
                                  ms=np.sqrt(s["size"]), label=s["label"]))
    if changed:
        handles.append(Line2D([], [], marker="o", ls="none", markerfacecolor="none",
                              markeredgecolor=CHANGED_COLOUR, ms=7, markeredgewidth=1.1,
                              label="CP lost, formed or switched"))
    if pair:
        handles.append(Line2D([], [], marker="x", ls="none", color=CHANGED_COLOUR, ms=6,
                              markeredgewidth=1.4, label="where the fold pair was"))
    return handles


def _share_limits(axes, pad=0.12) -> None:
    live = [ax for ax in axes if ax.axison]
    if not live:
        return
    for ax in live:
        ax.relim()
        ax.autoscale_view()
    xs = [ax.get_xlim() for ax in live]
    ys = [ax.get_ylim() for ax in live]
    x0, x1 = min(x[0] for x in xs), max(x[1] for x in xs)
    y0, y1 = min(y[0] for y in ys), max(y[1] for y in ys)
    half = max(x1 - x0, y1 - y0) / 2 * (1 + pad)
    cx, cy = (x0 + x1) / 2, (y0 + y1) / 2
    for ax in live:
        ax.set_xlim(cx - half, cx + half)
        ax.set_ylim(cy - half, cy + half)
        ax.set_aspect("equal", adjustable="box")


def panel_title(ax, fig, scan: ScanView, frame, side: str, decimals: int) -> None:
    settle(fig)
    width = ax.get_position().width * fig.get_figwidth()
    text = (f"{side}: frame {scan.frame_label(frame)} "
            f"({scan.with_unit(fmt_coord(frame.value, decimals))})")
    ax.set_title(wrap_to_width(fig, text, width, fontsize=FONT_SIZE), loc="left",
                 fontsize=FONT_SIZE)


def _pair_inset(ax, fig, scan, frame, plane, pair, involved, changed):
    """Magnify a fold pair whose markers would overlap."""
    uv = _uv(plane, [cp.position_bohr for cp in pair.cps])
    settle(fig)
    px = ax.transData.transform(uv)
    if np.linalg.norm(px[0] - px[1]) >= PAIR_INSET_PIXELS:
        return None
    centre = uv.mean(axis=0)
    half = max(2.5 * float(np.linalg.norm(uv[0] - uv[1])), 0.02)
    ins = ax.inset_axes([0.64, 0.64, 0.34, 0.34])
    draw_graph(ins, scan, frame, plane, involved=involved, changed=changed, labels=False)
    ins.set_xlim(centre[0] - half, centre[0] + half)
    ins.set_ylim(centre[1] - half, centre[1] + half)
    ins.set_aspect("equal", adjustable="box")
    ins.set_xticks([])
    ins.set_yticks([])
    ins.grid(False)
    for spine in ins.spines.values():
        spine.set_edgecolor(CHANGED_COLOUR)
    ax.indicate_inset_zoom(ins, edgecolor=CHANGED_COLOUR, alpha=0.8)
    sep = float(np.linalg.norm(uv[0] - uv[1]))
    magnification = (ax.get_xlim()[1] - ax.get_xlim()[0]) / (2 * half)
    ins.text(0.05, 0.05, f"×{magnification:.0f}", transform=ins.transAxes,
             fontsize=FONT_SIZE - 1.5, color=CHANGED_COLOUR)
    return sep


@styled
def graph_figure(scan: ScanView, change, number: int):
    """Two panels: the molecular graph in the frame before and after a change."""
    before, after = scan.change_frames(change)
    plane = change_plane(scan, change)
    if plane is None:
        return None
    involved = involved_atoms(scan, change)
    changed = changed_tracks(change)
    pair = fold_pair(scan, change)
    fig = new_figure(2, 3.3)
    axes = fig.subplots(1, 2)
    d = change_decimals(change)
    spots = {}
    for ax, frame, side in zip(axes, (before, after), ("before", "after")):
        if frame is None:
            ax.text(0.5, 0.5, f"frame {side} the change not in scan.json", ha="center",
                    transform=ax.transAxes)
            ax.set_axis_off()
            continue
        spots[side] = draw_graph(ax, scan, frame, plane, involved=involved, changed=changed)
    if pair is not None:
        mark = axes[1] if pair.side == "before" else axes[0]
        uv = _uv(plane, pair.midpoint)[0]
        if mark.axison:
            mark.scatter([uv[0]], [uv[1]], marker="x", color=CHANGED_COLOUR, s=30,
                         linewidths=1.4, zorder=6, gid="cp-marker")
    _share_limits(axes)
    for ax, frame, side in zip(axes, (before, after), ("before", "after")):
        if frame is not None:
            panel_title(ax, fig, scan, frame, side, d)
            ax.set_xlabel("u (Å)")
    axes[0].set_ylabel("v (Å)")
    sep = None
    if pair is not None:
        ax = axes[0] if pair.side == "before" else axes[1]
        if ax.axison:
            sep = _pair_inset(ax, fig, scan, pair.frame, plane, pair, involved, changed)
    for ax, side in zip(axes, ("before", "after")):
        place_atom_labels(ax, fig, spots.get(side, []))
    legend_below(fig, list(axes), legend_handles((before, after), pair=pair is not None),
                 ncol=3)
    labels = ", ".join(scan.label(n, before or after) for n in involved)
    text = (f"Change {number}: molecular graph in the last frame before and the first frame "
            f"after the change, projected on the best-fit plane of {labels} (u, v: in-plane "
            "axes; atoms and CPs off the plane are projected onto it). Ringed: the CPs the "
            "change concerns; in colour: the bond paths it breaks, forms or switches.")
    if pair is not None:
        where = "after" if pair.side == "before" else "before"
        text += (f" The cross on the {where} panel marks where the fold pair "
                 f"{'was' if pair.side == 'before' else 'appears'}.")
        if sep is not None:
            text += (f" The inset magnifies the pair, {sep:.3f} Å apart on the page "
                     f"({pair.separation_bohr * BOHR_IN_ANGSTROM:.3f} Å in space).")
    return Figure(f"graph_change{number}", render(fig), text,
                  f"molecular graphs around change {number}")


def _structure_frame(scan: ScanView, structure):
    frames = [scan.frame(i) for i in structure.frames]
    frames = [f for f in frames if f is not None]
    return frames[len(frames) // 2] if frames else None


@styled
def structures_figure(scan: ScanView):
    """One molecular-graph panel per structure (its middle frame), all in one view plane."""
    structures = sorted(scan.result.structures, key=lambda s: s.number)
    shown = [(s, _structure_frame(scan, s)) for s in structures]
    shown = [(s, f) for s, f in shown if f is not None]
    if not shown:
        return None
    ncol = min(3, len(shown))
    nrow = -(-len(shown) // ncol)
    fig = new_figure(2 if ncol > 1 else 1, 2.6 * nrow)
    axes = np.atleast_1d(fig.subplots(nrow, ncol)).ravel()
    first = shown[0][1]
    plane = best_plane([a.position_bohr for a in first.atoms])
    spots = []
    for ax, (s, f) in zip(axes, shown):
        spots.append(draw_graph(ax, scan, f, plane))
    for ax in axes[len(shown):]:
        ax.set_axis_off()
    _share_limits(list(axes[:len(shown)]))
    for ax, (s, f) in zip(axes, shown):
        settle(fig)
        width = ax.get_position().width * fig.get_figwidth()
        title = f"structure {s.number}: frame {scan.frame_label(f)}"
        ax.set_title(wrap_to_width(fig, title, width, fontsize=FONT_SIZE), loc="left",
                     fontsize=FONT_SIZE)
        ax.set_xlabel("u (Å)")
    axes[0].set_ylabel("v (Å)")
    for ax, sp in zip(axes, spots):
        place_atom_labels(ax, fig, sp)
    legend_below(fig, list(axes[:len(shown)]), legend_handles([f for _, f in shown],
                                                               changed=False), ncol=3)
    parts = [f"structure {s.number} (frames {scan.frame_ranges(s.frames)}) drawn from frame "
             f"{scan.frame_label(f)}" for s, f in shown]
    return Figure("structures", render(fig),
                  "The molecular graph of every structure along the scan, each drawn from "
                  "the middle frame of its run and projected on the best-fit plane of all "
                  "atoms of the first: " + "; ".join(parts) + ".", "molecular graph of each structure")
