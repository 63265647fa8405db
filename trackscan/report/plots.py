"""Plots against the scanned coordinate: CP counts, bond-CP properties, energy, fold distances.

Each function returns a :class:`~trackscan.report.document.Figure` (PNG bytes
and caption) or None when the scan has nothing to show for it.  Change
brackets are shaded and estimates drawn as dashed lines in every plot.
"""

from __future__ import annotations

import numpy as np
from matplotlib.lines import Line2D
from matplotlib.patches import Patch

from trackscan.report.change_geometry import coalescing_pair
from trackscan.report.document import Figure
from trackscan.report.scan_data import CP_KINDS, ScanData, frame_energy
from trackscan.report.style import (BRACKET_STYLE, CP_STYLE, ESTIMATE_STYLE, LINE_COLOURS,
                                    LINE_STYLES, new_figure, to_png)
from trackscan.units import BOHR_IN_ANGSTROM, HARTREE_IN_KCAL_PER_MOL

__all__ = ["counts_plot", "bond_cp_plot", "energy_plot", "fold_distance_plot", "fold_zoom_plot",
           "fold_series", "bond_tracks", "MAX_LINES", "ZOOM_FRAMES"]

# Marker shapes cycled through the bond paths, so coinciding lines stay distinguishable.
_MARKERS = ("o", "s", "^", "D", "v", "P")

#: Most bond paths drawn in the bond-CP plot (the ones involved in changes first).
MAX_LINES = 12


def _xlabel(scan: ScanData) -> str:
    unit = scan.unit_symbol
    return f"{scan.coordinate_label} ({unit})" if unit else scan.coordinate_label


def _mark_changes(ax, scan: ScanData, *, numbers: bool = True) -> None:
    for k, change in enumerate(scan.changes, 1):
        bracket = change.get("bracket")
        if bracket:
            style = dict(BRACKET_STYLE)
            if change.get("mechanism") == "unresolved":
                style = dict(facecolor=style.pop("color"), hatch="///", edgecolor="#666666",
                             **style)
            ax.axvspan(min(bracket), max(bracket), **style)
        est = change.get("estimate")
        x = est if isinstance(est, (int, float)) else (sum(bracket) / 2 if bracket else None)
        if isinstance(est, (int, float)):
            ax.axvline(est, **ESTIMATE_STYLE)
        if numbers and x is not None:
            ax.annotate(str(k), (x, 1.0), xycoords=("data", "axes fraction"),
                        xytext=(0, 2), textcoords="offset points", ha="center", va="bottom",
                        fontsize=8, color=ESTIMATE_STYLE["color"])


def _orient(ax, scan: ScanData) -> None:
    """Let the scan run from left to right (call once per group of shared x axes)."""
    if scan.descending:
        ax.invert_xaxis()


def _change_handles(scan: ScanData) -> list:
    if not scan.changes:
        return []
    handles = [Patch(facecolor=BRACKET_STYLE["color"], alpha=0.5,
                     label="change bracket (number above)")]
    if any(c.get("mechanism") == "unresolved" for c in scan.changes):
        handles.append(Patch(facecolor=BRACKET_STYLE["color"], alpha=0.5, hatch="///",
                             edgecolor="#666666", label="unresolved change"))
    handles.append(Line2D([], [], **ESTIMATE_STYLE, label="change estimate"))
    return handles


def counts_plot(scan: ScanData):
    """Step plot of CP counts by kind against the coordinate.

    Returns None when the frames carry no counts.
    """
    frames = [f for f in scan.frames if f.get("counts")]
    if not frames:
        return None
    x = np.array([f["value"] for f in frames], float)
    kinds = [k for k in CP_KINDS if any(f["counts"].get(k, 0) for f in frames)]
    refined = np.array([isinstance(f.get("refine"), dict) for f in frames])
    fig = new_figure(7.5, 3.8)
    ax = fig.add_subplot()
    handles = []
    for j, kind in enumerate(kinds):
        st = CP_STYLE[kind]
        y = np.array([f["counts"].get(kind, 0) for f in frames], float)
        offset = 0.06 * (j - (len(kinds) - 1) / 2)
        ax.step(x, y + offset, where="post", color=st["color"], lw=1.4)
        for sel, face in ((~refined, st["color"]), (refined, "white")):
            if sel.any():
                ax.scatter(x[sel], y[sel] + offset, marker=st["marker"], facecolors=face,
                           edgecolors=st["color"], s=st["size"] * 0.6, zorder=3, linewidths=1.0)
        handles.append(Line2D([], [], color=st["color"], marker=st["marker"], lw=1.4,
                              label=st["label"].split(" (")[0]))
    _mark_changes(ax, scan)
    handles.append(Line2D([], [], color="none", label="markers: sampled frames"))
    if refined.any():
        handles.append(Line2D([], [], marker="o", ls="none", markerfacecolor="white",
                              markeredgecolor="black", label="open marker: added by refinement"))
    ax.set_xlabel(_xlabel(scan))
    ax.set_ylabel("number of CPs")
    _orient(ax, scan)
    ax.yaxis.get_major_locator().set_params(integer=True)
    ax.legend(handles=handles + _change_handles(scan), loc="center left",
              bbox_to_anchor=(1.01, 0.5), fontsize=8, frameon=False)
    ax.grid(alpha=0.3, lw=0.5)
    return Figure("cp_counts", to_png(fig),
                  "Critical points of each kind against the coordinate (step plot; a count "
                  "holds from a frame to the next; lines offset by a few hundredths so "
                  "equal counts stay visible). Shaded: change brackets; dashed: estimates.",
                  "CP counts by kind")


def bond_tracks(scan: ScanData) -> dict:
    """Bond CPs grouped by persistent track id.

    Returns
    -------
    dict
        ``{track: [(frame, cp), ...]}`` in coordinate order.  Bond CPs
        without a ``track`` are grouped by their atoms.
    """
    tracks = {}
    for f in scan.frames:
        for cp in f.get("critical_points") or []:
            if cp.get("kind") != "bond":
                continue
            key = cp.get("track")
            if key is None:
                key = "atoms " + "-".join(str(a) for a in cp.get("atoms") or [])
            tracks.setdefault(key, []).append((f, cp))
    return tracks


def _track_label(scan: ScanData, points) -> str:
    labels = []
    for f, cp in points:
        lab = scan.labels(cp.get("atoms"), f)
        if not labels or labels[-1] != lab:
            labels.append(lab)
    return " → ".join(labels) if labels else "?"


def _select_tracks(scan: ScanData, tracks: dict) -> list:
    involved = set()
    for key, points in tracks.items():
        present = {f.get("index") for f, _ in points}
        for change in scan.changes:
            between = change.get("between") or []
            if len(between) == 2 and (between[0] in present) != (between[1] in present):
                involved.add(key)

    def spread(key):
        eps = [cp.get("ellipticity") for _, cp in tracks[key]]
        eps = [e for e in eps if isinstance(e, (int, float))]
        return (max(eps) - min(eps)) if eps else 0.0

    order = sorted(tracks, key=lambda k: (k not in involved, -spread(k), str(k)))
    return order[:MAX_LINES]


def bond_cp_plot(scan: ScanData):
    """ρ, ∇²ρ and ε at each bond CP against the coordinate, one line per bond path.

    Returns None when no frame has bond CPs.
    """
    tracks = bond_tracks(scan)
    if not tracks:
        return None
    keys = _select_tracks(scan, tracks)
    fig = new_figure(7.5, 7.2)
    axes = fig.subplots(3, 1, sharex=True)
    quantities = (("rho", "ρ (a.u.)"), ("laplacian", "∇²ρ (a.u.)"), ("ellipticity", "ε"))
    handles = []
    for j, key in enumerate(keys):
        points = tracks[key]
        colour = LINE_COLOURS[j % len(LINE_COLOURS)]
        style = LINE_STYLES[(j // len(LINE_COLOURS)) % len(LINE_STYLES)]
        marker, ms = _MARKERS[j % len(_MARKERS)], 6.5 - 1.5 * (j % 3)
        x = [f["value"] for f, _ in points]
        for ax, (q, _) in zip(axes, quantities):
            y = [cp.get(q) if isinstance(cp.get(q), (int, float)) else np.nan
                 for _, cp in points]
            ax.plot(x, y, color=colour, ls=style, lw=1.3, marker=marker, ms=ms,
                    markerfacecolor="none" if j % 2 else colour)
        handles.append(Line2D([], [], color=colour, ls=style, marker=marker, ms=ms,
                              markerfacecolor="none" if j % 2 else colour,
                              label=f"{_track_label(scan, points)} [{key}]"))
    for ax, (_, label) in zip(axes, quantities):
        _mark_changes(ax, scan, numbers=ax is axes[0])
        ax.set_ylabel(label)
        ax.grid(alpha=0.3, lw=0.5)
    axes[-1].set_xlabel(_xlabel(scan))
    _orient(axes[0], scan)
    handles.append(Line2D([], [], color="none", label="markers: sampled frames"))
    axes[0].legend(handles=handles + _change_handles(scan), loc="upper left",
                   bbox_to_anchor=(1.01, 1.0), fontsize=7.5, frameon=False,
                   title="bond path [track]", title_fontsize=8)
    more = len(tracks) - len(keys)
    extra = (f" The {len(keys)} bond paths shown are those involved in changes and those "
             f"whose ellipticity varies most; {more} more are in critical_points.csv."
             if more > 0 else "")
    return Figure("bond_cp_properties", to_png(fig),
                  "Density ρ, its Laplacian ∇²ρ and the ellipticity ε at each bond CP, one "
                  "line per bond path, labelled by its atoms and persistent track id (a label "
                  "with an arrow means the path changed ends). Lines of symmetry-equivalent "
                  "bond paths coincide; their markers differ." + extra,
                  "bond CP properties")


def energy_plot(scan: ScanData):
    """Energy (relative, kcal/mol) against the coordinate, or None without energies."""
    pts = [(f["value"], frame_energy(f)) for f in scan.frames if frame_energy(f) is not None]
    if not pts:
        return None
    x = np.array([p[0] for p in pts])
    e = np.array([p[1] for p in pts])
    e_min = float(e.min())
    fig = new_figure(7.5, 3.4)
    ax = fig.add_subplot()
    ax.plot(x, (e - e_min) * HARTREE_IN_KCAL_PER_MOL, color=LINE_COLOURS[0], marker="o",
            ms=4, lw=1.4)
    _mark_changes(ax, scan)
    ax.set_xlabel(_xlabel(scan))
    ax.set_ylabel("E − E_min (kcal/mol)")
    _orient(ax, scan)
    ax.grid(alpha=0.3, lw=0.5)
    handles = [Line2D([], [], color=LINE_COLOURS[0], marker="o", ms=4, label="frame energy")]
    ax.legend(handles=handles + _change_handles(scan), loc="center left",
              bbox_to_anchor=(1.01, 0.5), fontsize=8, frameon=False)
    return Figure("energy", to_png(fig),
                  f"Energy of each frame relative to the lowest (E_min = {e_min:.10g} hartree; "
                  f"1 hartree = {HARTREE_IN_KCAL_PER_MOL} kcal/mol).", "energy")


def fold_series(scan: ScanData, change):
    """Distance between the two coalescing CPs of a fold along the scan.

    Returns
    -------
    tuple or None
        ``(label, x, d)``: a description of the pair, coordinate values and
        distances (Å) in every frame where both tracks exist; None when the
        change has no coalescing pair.
    """
    pair = coalescing_pair(scan, change)
    if pair is None:
        return None
    a, b, _side = pair
    ta, tb = a.get("track", a.get("id")), b.get("track", b.get("id"))
    xs, ds = [], []
    for f in scan.frames:
        found = {}
        for cp in f.get("critical_points") or []:
            key = cp.get("track", cp.get("id"))
            if key in (ta, tb) and cp.get("position_bohr") is not None:
                found[key] = np.asarray(cp["position_bohr"], float)
        if ta in found and tb in found:
            xs.append(f["value"])
            ds.append(float(np.linalg.norm(found[ta] - found[tb])) * BOHR_IN_ANGSTROM)
    who = {}
    for cp in (a, b):
        text = f"{cp.get('kind')} CP"
        if cp.get("kind") == "bond" and cp.get("atoms"):
            text += " " + scan.labels(cp["atoms"])
        who[cp.get("kind")] = text
    label = " · ".join(who[k] for k in ("bond", "ring", "cage") if k in who)
    return label, np.array(xs), np.array(ds)


def fold_distance_plot(scan: ScanData):
    """Distance (and its square) between coalescing CPs near each fold, or None."""
    series = []
    for k, change in enumerate(scan.changes, 1):
        if change.get("mechanism") not in ("fold", "mixed") and \
                change.get("mechanism_candidate") not in ("fold", "mixed"):
            continue
        s = fold_series(scan, change)
        if s is not None and len(s[1]):
            series.append((k, *s))
    if not series:
        return None
    fig = new_figure(7.5, 5.0)
    ax_d, ax_d2 = fig.subplots(2, 1, sharex=True)
    handles = []
    for j, (k, label, x, d) in enumerate(series):
        colour = LINE_COLOURS[j % len(LINE_COLOURS)]
        ax_d.plot(x, d, color=colour, marker="o", ms=4, lw=1.3)
        ax_d2.plot(x, d ** 2, color=colour, marker="o", ms=4, lw=1.3)
        handles.append(Line2D([], [], color=colour, marker="o", ms=4,
                              label=f"change {k}: {label}"))
    for ax in (ax_d, ax_d2):
        _mark_changes(ax, scan, numbers=ax is ax_d)
        ax.grid(alpha=0.3, lw=0.5)
        ax.set_ylim(bottom=0)
    ax_d.set_ylabel("d (Å)")
    ax_d2.set_ylabel("d² (Å²)")
    ax_d2.set_xlabel(_xlabel(scan))
    _orient(ax_d, scan)
    ax_d.legend(handles=handles + _change_handles(scan), loc="upper left",
                bbox_to_anchor=(1.01, 1.0), fontsize=8, frameon=False)
    return Figure("fold_distance", to_png(fig),
                  "Distance d between the two critical points that coalesce at each fold, in "
                  "the frames where both exist. Near a fold d² falls linearly with the "
                  "coordinate (fold normal form), so the lower panel should end in a straight "
                  "line pointing at the estimate.", "fold CP distance")


#: Frames nearest the fold shown in the zoomed fold plot.
ZOOM_FRAMES = 5


def fold_zoom_plot(scan: ScanData, change, number: int):
    """d and d² of a fold's coalescing pair in the frames nearest the fold, or None.

    Made only when those frames span less than half the scan (else the plot
    along the scan shows the same).
    """
    s = fold_series(scan, change)
    bracket = change.get("bracket")
    if s is None or len(s[1]) < 2 or not bracket:
        return None
    label, x, d = s
    near = np.argsort(np.abs(x - float(np.mean(bracket))))[:ZOOM_FRAMES]
    near = np.sort(near)
    x, d = x[near], d[near]
    values = [f["value"] for f in scan.frames]
    lo, hi = min(x.min(), min(bracket)), max(x.max(), max(bracket))
    if (hi - lo) >= 0.5 * (max(values) - min(values)):
        return None
    fig = new_figure(7.5, 4.6)
    ax_d, ax_d2 = fig.subplots(2, 1, sharex=True)
    colour = LINE_COLOURS[0]
    ax_d.plot(x, d, color=colour, marker="o", ms=5, lw=1.3)
    ax_d2.plot(x, d ** 2, color=colour, marker="o", ms=5, lw=1.3)
    pad = 0.05 * (hi - lo)
    for ax in (ax_d, ax_d2):
        _mark_changes(ax, scan, numbers=ax is ax_d)
        ax.set_xlim(lo - pad, hi + pad)
        ax.grid(alpha=0.3, lw=0.5)
        ax.set_ylim(bottom=0)
    ax_d.set_ylabel("d (Å)")
    ax_d2.set_ylabel("d² (Å²)")
    ax_d2.set_xlabel(_xlabel(scan))
    _orient(ax_d, scan)
    handles = [Line2D([], [], color=colour, marker="o", ms=5, label=label)]
    ax_d.legend(handles=handles + _change_handles(scan), loc="upper left",
                bbox_to_anchor=(1.01, 1.0), fontsize=8, frameon=False)
    return Figure(f"fold_zoom_change{number}", to_png(fig),
                  f"Change {number}: distance d between the coalescing CPs in the "
                  f"{len(x)} frames nearest the fold, and d², which the fold normal form makes "
                  "linear in the coordinate.", f"fold CP distance near change {number}")
