"""Molecular graphs on both sides of a change, projected on the plane of the atoms involved.

Nuclei are labelled with element and number; bond paths are the traced
polylines (``points_bohr``) projected on the best-fit plane of the atoms most
involved in the change; bond, ring and cage CPs are marked, and the CPs and
bond paths that appear or vanish in the change are highlighted.
"""

from __future__ import annotations

import numpy as np
from matplotlib.lines import Line2D

from trackscan.report.change_geometry import Plane, change_plane, involved_atoms, vanishing_tracks
from trackscan.report.document import Figure
from trackscan.report.scan_data import ScanData, atom_label
from trackscan.report.style import CP_STYLE, OKABE_ITO, new_figure, to_png
from trackscan.report.wording import change_decimals, fmt_coord
from trackscan.units import BOHR_IN_ANGSTROM

__all__ = ["draw_graph", "graph_figure", "legend_handles", "changed_keys", "frames_features"]

PATH_COLOUR = "#555555"
# Atoms whose projections lie closer than this (Å) get one joint label.
_SAME_SPOT_ANGSTROM = 0.08
CHANGED_COLOUR = OKABE_ITO["vermillion"]


def _cp_key(cp):
    return cp.get("track", cp.get("id"))


def changed_keys(scan: ScanData, change) -> set:
    """Track (or id) keys of the CPs a change concerns.

    The CPs that appear or vanish, and those its events name by ``track``
    (e.g. the bond CP of a bond path that switches ends in a conflict).
    """
    lost, born = vanishing_tracks(scan, change)
    keys = {_cp_key(cp) for cp in lost + born}
    keys |= {e["track"] for e in change.get("events") or [] if e.get("track") is not None}
    return keys


def draw_graph(ax, scan: ScanData, frame, plane: Plane, *, involved=(), changed=()) -> None:
    """Draw one frame's molecular graph on `ax` (coordinates in Å in the plane).

    Parameters
    ----------
    ax : matplotlib Axes
    scan : ScanData
    frame : dict
    plane : Plane
    involved : iterable of int
        Atom numbers drawn bold.
    changed : iterable
        Track (or id) keys of CPs that appear or vanish; drawn highlighted,
        with their bond paths.
    """
    changed = set(changed)
    involved = set(involved)
    cps = {cp.get("id"): cp for cp in frame.get("critical_points") or []}
    atoms = {a["number"]: a for a in frame.get("atoms") or [] if a.get("position_bohr")}

    for path in frame.get("bond_paths") or []:
        cp = cps.get(path.get("cp"), {})
        hot = _cp_key(cp) in changed
        pts = path.get("points_bohr")
        if not pts:  # no traced path: straight segments through the bond CP
            ends = [atoms[a]["position_bohr"] for a in path.get("atoms") or [] if a in atoms]
            if cp.get("position_bohr") is not None and len(ends) == 2:
                pts = [ends[0], cp["position_bohr"], ends[1]]
        if not pts:
            continue
        uv = plane.project(pts) * BOHR_IN_ANGSTROM
        ls = ":" if path.get("complete") is False else "-"
        ax.plot(uv[:, 0], uv[:, 1], color=CHANGED_COLOUR if hot else PATH_COLOUR, ls=ls,
                lw=2.4 if hot else 1.2, zorder=1, solid_capstyle="round")

    for cp in cps.values():
        kind = cp.get("kind")
        if kind == "nuclear" or kind not in CP_STYLE or cp.get("position_bohr") is None:
            continue
        st = CP_STYLE[kind]
        uv = plane.project(cp["position_bohr"])[0] * BOHR_IN_ANGSTROM
        ax.scatter([uv[0]], [uv[1]], marker=st["marker"], color=st["color"], s=st["size"],
                   zorder=3, edgecolors="black", linewidths=0.4)
        if _cp_key(cp) in changed:
            ax.scatter([uv[0]], [uv[1]], marker="o", facecolors="none",
                       edgecolors=CHANGED_COLOUR, s=st["size"] * 4.5, linewidths=1.6, zorder=4)

    st = CP_STYLE["nuclear"]
    labels = []          # [(uv, [label, ...], bold)]: atoms that project onto one spot share
    for num in sorted(atoms):
        a = atoms[num]
        uv = plane.project(a["position_bohr"])[0] * BOHR_IN_ANGSTROM
        bold = num in involved
        ax.scatter([uv[0]], [uv[1]], marker=st["marker"], s=st["size"] * (1.3 if bold else 1.0),
                   color="white", edgecolors=st["color"], linewidths=1.8 if bold else 1.0,
                   zorder=5)
        for entry in labels:
            if np.linalg.norm(entry[0] - uv) < _SAME_SPOT_ANGSTROM:
                entry[1].append(atom_label(a))
                entry[2] = entry[2] or bold
                break
        else:
            labels.append([uv, [atom_label(a)], bold])
    for uv, names, bold in labels:
        ax.annotate(", ".join(names), uv, xytext=(6, 5), textcoords="offset points", fontsize=9,
                    fontweight="bold" if bold else "normal", zorder=6)
    ax.margins(0.15)
    ax.grid(alpha=0.25, lw=0.5)
    ax.set_xlabel("in-plane u (Å)")


def frames_features(frames) -> set:
    """What the drawings of these frames show: CP kinds, plus ``"open_path"``."""
    out = set()
    for f in frames:
        if f is None:
            continue
        out |= {cp.get("kind") for cp in f.get("critical_points") or []}
        if any(p.get("complete") is False for p in f.get("bond_paths") or []):
            out.add("open_path")
    return out


def legend_handles(kinds) -> list:
    """Legend entries for what is drawn: nuclei, bond paths, the CP kinds present, highlights.

    Parameters
    ----------
    kinds : set of str
        From :func:`frames_features`.
    """
    st = CP_STYLE["nuclear"]
    handles = [Line2D([], [], marker="o", ls="none", markerfacecolor="white",
                      markeredgecolor=st["color"], ms=8, label="nucleus (label: element+number; "
                      "bold: involved)"),
               Line2D([], [], color=PATH_COLOUR, lw=1.2, label="bond path (projected)")]
    if "open_path" in kinds:
        handles.append(Line2D([], [], color=PATH_COLOUR, lw=1.2, ls=":",
                              label="bond path not reaching an attractor"))
    handles.append(Line2D([], [], color=CHANGED_COLOUR, lw=2.4,
                          label="bond path that breaks, forms or switches"))
    for kind in ("bond", "ring", "cage", "non_nuclear", "degenerate"):
        if kind in kinds:
            s = CP_STYLE[kind]
            handles.append(Line2D([], [], marker=s["marker"], ls="none", color=s["color"],
                                  markeredgecolor="black", markeredgewidth=0.4,
                                  ms=np.sqrt(s["size"]), label=s["label"]))
    handles.append(Line2D([], [], marker="o", ls="none", markerfacecolor="none",
                          markeredgecolor=CHANGED_COLOUR, ms=12, markeredgewidth=1.6,
                          label="CP that appears, vanishes or switches"))
    return handles


def graph_figure(scan: ScanData, change, number: int):
    """Two panels: the molecular graph in the frame before and after a change.

    Returns None when neither frame has atoms.
    """
    before, after = scan.change_frames(change)
    plane = change_plane(scan, change)
    if plane is None:
        return None
    involved = involved_atoms(scan, change)
    changed = changed_keys(scan, change)
    fig = new_figure(10.0, 4.6)
    axes = fig.subplots(1, 2)
    kinds = frames_features((before, after))
    d = change_decimals(change)
    for ax, frame, side in zip(axes, (before, after), ("before", "after")):
        if frame is None:
            ax.text(0.5, 0.5, f"frame {side} the change not in scan.json", ha="center",
                    transform=ax.transAxes)
            ax.set_axis_off()
            continue
        draw_graph(ax, scan, frame, plane, involved=involved, changed=changed)
        ax.set_title(f"{side}: frame {frame.get('index')}, "
                     f"{scan.coordinate_label} = {fmt_coord(frame.get('value'), d)} "
                     f"{scan.unit_symbol}".rstrip(), fontsize=10)
    axes[0].set_ylabel("in-plane v (Å)")
    _share_limits(axes)
    for ax in axes:
        ax.set_aspect("equal", adjustable="box")
    fig.legend(handles=legend_handles(kinds), loc="lower center", ncol=3, fontsize=8,
               frameon=False, bbox_to_anchor=(0.5, 0.0))
    fig.subplots_adjust(bottom=0.22)
    labels = ", ".join(scan.label(n, before or after) for n in involved)
    return Figure(f"graph_change{number}", to_png(fig),
                  f"Change {number}: molecular graph in the last frame before and the first "
                  f"frame after the change, projected on the best-fit plane of {labels}. "
                  "Atoms and CPs off that plane are projected onto it.",
                  f"molecular graphs around change {number}")


def _share_limits(axes) -> None:
    """Same square limits on every live panel, so the two sides compare directly."""
    live = [ax for ax in axes if ax.axison]
    if not live:
        return
    xs = [ax.get_xlim() for ax in live]
    ys = [ax.get_ylim() for ax in live]
    x0, x1 = min(x[0] for x in xs), max(x[1] for x in xs)
    y0, y1 = min(y[0] for y in ys), max(y[1] for y in ys)
    half = max(x1 - x0, y1 - y0) / 2
    cx, cy = (x0 + x1) / 2, (y0 + y1) / 2
    for ax in live:
        ax.set_xlim(cx - half, cx + half)
        ax.set_ylim(cy - half, cy + half)
