"""Plots against the scanned coordinate: energy, CP counts, bond-CP properties.

Each function returns a :class:`~trackscan.report.document.Figure` or None
when the scan has nothing to show for it.  Change brackets are shaded and
estimates drawn as dashed lines, numbered as in the tables.
"""

from __future__ import annotations

import numpy as np
from matplotlib.lines import Line2D
from matplotlib.patches import Patch

from trackscan.report.change_geometry import changed_tracks
from trackscan.report.document import Figure
from trackscan.report.scan_view import CP_KINDS, ScanView
from trackscan.report.style import (BRACKET_STYLE, CONTEXT_GREY, CP_STYLE, ESTIMATE_STYLE,
                                    LINE_COLOURS, legend_below, new_figure, render, settle,
                                    styled, wrap_to_width)
from trackscan.units import HARTREE_IN_KCAL_PER_MOL
from trackscan.vocabulary import CP_KIND_NAMES

__all__ = ["counts_plot", "bond_cp_plot", "energy_plot", "bond_groups", "mark_changes",
           "change_handles", "set_xlabel", "EQUIVALENCE_RTOL"]

#: Bond paths whose ρ, ∇²ρ and ε agree to this relative tolerance in every
#: frame (and that link the same elements) are drawn as one line.
EQUIVALENCE_RTOL = 2e-3
_EQUIVALENCE_ATOL = 1e-5


def set_xlabel(ax, scan: ScanView, fig) -> None:
    """The coordinate label with its unit, wrapped to the width of the axes."""
    settle(fig)
    width = ax.get_position().width * fig.get_figwidth()
    ax.set_xlabel(wrap_to_width(fig, scan.axis_label, width))


def mark_changes(ax, scan: ScanView, *, numbers: bool = True) -> None:
    """Shade each change's bracket, draw its estimate, number it above the axes."""
    for k, change in enumerate(scan.changes, 1):
        lo, hi = sorted(change.bracket)
        style = dict(BRACKET_STYLE)
        if change.mechanism == "unresolved":
            style = dict(facecolor=style.pop("color"), hatch="///", edgecolor="#666666", **style)
        ax.axvspan(lo, hi, **style)
        x = scan.estimate(change)
        ax.axvline(x, **ESTIMATE_STYLE)
        if numbers:
            ax.annotate(str(k), (x, 1.0), xycoords=("data", "axes fraction"),
                        xytext=(0, 1.5), textcoords="offset points", ha="center",
                        va="bottom", fontsize=6.5, color=ESTIMATE_STYLE["color"])


def orient(ax, scan: ScanView) -> None:
    """Let the scan run from left to right (once per group of shared x axes)."""
    if scan.descending:
        ax.invert_xaxis()


def change_handles(scan: ScanView) -> list:
    """Legend entries for the change marks (only those drawn)."""
    if not scan.changes:
        return []
    handles = [Patch(facecolor=BRACKET_STYLE["color"], alpha=0.5, label="bracket of a change")]
    if any(c.mechanism == "unresolved" for c in scan.changes):
        handles.append(Patch(facecolor=BRACKET_STYLE["color"], alpha=0.5, hatch="///",
                             edgecolor="#666666", label="unresolved change"))
    handles.append(Line2D([], [], **ESTIMATE_STYLE, label="estimate (number: change)"))
    return handles


@styled
def energy_plot(scan: ScanView):
    """Energy relative to the lowest frame (kcal/mol), or None without energies."""
    pts = [(f.value, scan.energy(f), f.is_refined) for f in scan.frames
           if scan.energy(f) is not None]
    if not pts:
        return None
    x = np.array([p[0] for p in pts], float)
    e = np.array([p[1] for p in pts], float)
    new = np.array([p[2] for p in pts], bool)
    e_min = float(e.min())
    rel = (e - e_min) * HARTREE_IN_KCAL_PER_MOL
    fig = new_figure(1, 2.3)
    ax = fig.add_subplot()
    colour = LINE_COLOURS[0]
    ax.plot(x, rel, color=colour, lw=1.1, zorder=2)
    ax.scatter(x[~new], rel[~new], color=colour, s=10, zorder=3)
    handles = [Line2D([], [], color=colour, marker="o", ms=3, label="frame")]
    if new.any():
        ax.scatter(x[new], rel[new], facecolors="white", edgecolors=colour, s=12, zorder=3)
        handles.append(Line2D([], [], ls="none", marker="o", ms=3.5, markerfacecolor="white",
                              markeredgecolor=colour, label="new frame (refinement)"))
    mark_changes(ax, scan)
    ax.set_ylabel("E − E$_\\mathrm{min}$ (kcal/mol)")
    orient(ax, scan)
    ax.grid(alpha=0.3, lw=0.4)
    ax.legend(handles=handles + change_handles(scan), loc="best", frameon=True,
              framealpha=0.85, edgecolor="none")
    set_xlabel(ax, scan, fig)
    marks = ("; dashed lines: the estimate of each change, numbered as in the tables"
             if scan.changes else "")
    return Figure("energy", render(fig),
                  f"Energy profile along the scan, relative to the lowest frame (E_min = "
                  f"{e_min:.8f} hartree; 1 hartree = {HARTREE_IN_KCAL_PER_MOL:.2f} kcal/mol)"
                  f"{marks}.", "energy profile")


@styled
def counts_plot(scan: ScanView):
    """Step plot of the number of CPs of each kind against the coordinate."""
    frames = [f for f in scan.frames if f.counts]
    if not frames:
        return None
    x = np.array([f.value for f in frames], float)
    kinds = [k for k in CP_KINDS if any(f.counts.get(k, 0) for f in frames)]
    new = np.array([f.is_refined for f in frames])
    fig = new_figure(1, 2.5)
    ax = fig.add_subplot()
    handles = []
    for j, kind in enumerate(kinds):
        st = CP_STYLE[kind]
        y = np.array([f.counts.get(kind, 0) for f in frames], float)
        offset = 0.08 * (j - (len(kinds) - 1) / 2)
        ax.step(x, y + offset, where="post", color=st["color"], lw=1.0)
        for sel, face in ((~new, st["color"]), (new, "white")):
            if sel.any():
                ax.scatter(x[sel], y[sel] + offset, marker=st["marker"], facecolors=face,
                           edgecolors=st["color"], s=st["size"] * 0.7, zorder=3, linewidths=0.7)
        handles.append(Line2D([], [], color=st["color"], marker=st["marker"], lw=1.0, ms=4,
                              label=CP_KIND_NAMES[kind].replace("nucleus", "nuclei")
                              if kind == "nuclear" else CP_KIND_NAMES[kind] + "s"))
    if new.any():
        handles.append(Line2D([], [], marker="o", ls="none", markerfacecolor="white", ms=4,
                              markeredgecolor="black", label="new frame (refinement)"))
    mark_changes(ax, scan)
    ax.set_ylabel("number of CPs")
    orient(ax, scan)
    ax.yaxis.get_major_locator().set_params(integer=True)
    ax.grid(alpha=0.3, lw=0.4)
    set_xlabel(ax, scan, fig)
    legend_below(fig, ax, handles + change_handles(scan), ncol=2)
    return Figure("cp_counts", render(fig),
                  "Number of critical points of each kind in every frame (a count holds from "
                  "a frame to the next; lines offset slightly so that equal counts stay "
                  "visible). Shaded: the bracket of each change; dashed: its estimate.",
                  "CP counts by kind")


def _series(points, key):
    return np.array([getattr(cp, key) if getattr(cp, key) is not None else np.nan
                     for _, cp in points], float)


def bond_groups(scan: ScanView) -> list:
    """Bond-CP tracks merged into symmetry-equivalent groups.

    Returns
    -------
    list of dict
        ``{"tracks": [...], "points": [(frame, cp), ...] of the first track,
        "label": "C–H", "members": ["C1–H4", ...], "involved": bool}``;
        groups of bond paths involved in a change first, then by label.
        Two tracks are equivalent when they exist in the same frames, link
        the same pair of elements, and their ρ, ∇²ρ and ε agree within
        :data:`EQUIVALENCE_RTOL` in every frame.
    """
    tracks = {}
    for f in scan.frames:
        for cp in f.critical_points:
            if cp.kind == "bond":
                key = cp.track if cp.track is not None else f"{f.index}:{cp.id}"
                tracks.setdefault(key, []).append((f, cp))
    involved = set()
    for change in scan.changes:
        involved |= changed_tracks(change)
    groups = []
    for key in sorted(tracks, key=str):
        points = tracks[key]
        frames_key = tuple(f.index for f, _ in points)
        f0, cp0 = points[0]
        elements = "–".join(sorted(scan.label(a, f0).rstrip("0123456789") for a in cp0.atoms))
        series = np.concatenate([_series(points, q) for q in ("rho", "laplacian", "ellipticity")])
        for g in groups:
            if g["frames"] == frames_key and g["elements"] == elements and \
                    (key in involved) == g["involved"] and \
                    np.allclose(series, g["series"], rtol=EQUIVALENCE_RTOL,
                                atol=_EQUIVALENCE_ATOL, equal_nan=True):
                g["tracks"].append(key)
                g["members"].append(_path_label(scan, points))
                break
        else:
            groups.append({"tracks": [key], "points": points, "frames": frames_key,
                           "elements": elements, "series": series, "involved": key in involved,
                           "members": [_path_label(scan, points)]})
    for g in groups:
        n = len(g["tracks"])
        g["label"] = g["members"][0] if n == 1 else f"{g['elements']} ×{n}"
    groups.sort(key=lambda g: (not g["involved"], g["label"]))
    return groups


def _path_label(scan: ScanView, points) -> str:
    labels = []
    for f, cp in points:
        lab = scan.labels(cp.atoms, f)
        if not labels or labels[-1] != lab:
            labels.append(lab)
    return " → ".join(labels) if labels else "?"


@styled
def bond_cp_plot(scan: ScanView):
    """ρ, ∇²ρ and ε at the bond CPs, the bond paths involved in changes emphasised."""
    groups = bond_groups(scan)
    if not groups:
        return None
    fig = new_figure(2, 4.6)
    axes = fig.subplots(3, 1, sharex=True)
    quantities = (("rho", "ρ (a.u.)"), ("laplacian", "∇²ρ (a.u.)"), ("ellipticity", "ε"))
    handles = []
    colours = iter(LINE_COLOURS)
    markers = iter(("o", "s", "^", "D", "v", "P", "X"))
    for g in groups:
        x = [f.value for f, _ in g["points"]]
        if g["involved"]:
            colour, lw, ms, marker, z = next(colours, "black"), 1.6, 3.5, next(markers, "o"), 3
        else:
            colour, lw, ms, marker, z = CONTEXT_GREY, 0.8, 0, None, 2
        for ax, (q, _) in zip(axes, quantities):
            ax.plot(x, _series(g["points"], q), color=colour, lw=lw, marker=marker, ms=ms,
                    zorder=z)
        if g["involved"]:
            handles.append(Line2D([], [], color=colour, lw=lw, marker=marker, ms=ms,
                                  label=g["label"]))
    others = [g for g in groups if not g["involved"]]
    if others:
        handles.append(Line2D([], [], color=CONTEXT_GREY, lw=0.8,
                              label="other bond paths (see caption)"))
    for ax, (_, label) in zip(axes, quantities):
        mark_changes(ax, scan, numbers=ax is axes[0])
        ax.set_ylabel(label)
        ax.grid(alpha=0.3, lw=0.4)
    orient(axes[0], scan)
    fig.subplots_adjust(hspace=0.12)
    set_xlabel(axes[-1], scan, fig)
    legend_below(fig, list(axes), handles + change_handles(scan), ncol=3)
    named = "; ".join(f"{g['label']} ({', '.join(g['members'])})" if len(g["members"]) > 1
                      else g["label"] for g in others)
    merged = any(len(g["members"]) > 1 for g in others)
    involved = [g["label"] for g in groups if g["involved"]]
    text = ("Density ρ, its Laplacian ∇²ρ and the ellipticity ε at the bond CPs along the "
            "scan. ")
    if involved:
        text += (f"In colour, the bond paths involved in a change ({', '.join(involved)}; an "
                 "arrow means the path changed ends); ")
    if others:
        text += f"in grey, the other bond paths: {named}."
        if merged:
            text += (f" Symmetry-equivalent bond paths (same elements, the same ρ, ∇²ρ and ε "
                     f"within {EQUIVALENCE_RTOL:.1%} in every frame) are drawn as one line, "
                     "labelled ×n.")
    return Figure("bond_cp_properties", render(fig), text.strip(), "bond CP properties")
