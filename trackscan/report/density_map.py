"""Density maps: ρ before and after a change, and the difference Δρ that shows the change.

Three panels in the plane of the atoms most involved in a change: contour
lines of ρ in the last frame before and the first after (logarithmic levels
capped at :data:`CONTOUR_CAP` a.u., so the cores do not crowd the map), and
Δρ = ρ(after) − ρ(before) at the same points (symmetric levels; solid where
density grew, dashed where it fell).

ρ on the plane comes from the frame's own cube file (its ``source`` in
scan.json), read again with :func:`trackscan.io.cube.read_cube` and
interpolated with cubic B-splines [1]_ (the package's grid field, with the
promolecule subtracted and added back, or :func:`scipy.ndimage.map_coordinates`).
When the scan's density source is the built-in promolecular model and no
cube is at hand, the model is evaluated exactly instead.  Otherwise the
report says why there is no map.  Bond paths and CPs are drawn on top
(projected onto the plane).

References
----------
.. [1] M. Unser, "Splines: a perfect fit for signal and image processing",
   IEEE Signal Process. Mag. 16(6), 22-38 (1999). :DOI:`10.1109/79.799930`
   [from memory]
"""

from __future__ import annotations

import logging

import numpy as np
from matplotlib import colormaps
from matplotlib.colors import ListedColormap, LogNorm
from matplotlib.lines import Line2D
from scipy import ndimage

from trackscan.errors import TrackscanError
from trackscan.report.change_geometry import (Plane, atom_positions, change_plane,
                                              changed_tracks, fold_pair, involved_atoms)
from trackscan.report.document import Figure
from trackscan.report.graphs import panel_title, draw_graph, legend_handles, place_atom_labels
from trackscan.report.scan_view import ScanView
from trackscan.report.style import (FONT_SIZE, OKABE_ITO, legend_below, new_figure, render,
                                    styled)
from trackscan.report.wording import change_decimals, fmt_sig
from trackscan.units import ANGSTROM_IN_BOHR, BOHR_IN_ANGSTROM

__all__ = ["density_on_plane", "contour_levels", "difference_levels", "frame_density",
           "density_map_figure", "MAP_POINTS", "MAP_MARGIN_ANGSTROM", "CONTOUR_CAP",
           "CONTOUR_FLOOR"]

logger = logging.getLogger(__name__)

#: Points per side of the sampled square.
MAP_POINTS = 121
#: Highest ρ contour (a.u.): bond CPs lie below it (C≡C about 0.4), cores far above.
CONTOUR_CAP = 0.5
#: Lowest ρ contour (a.u.): the outer valence region.
CONTOUR_FLOOR = 1e-3
#: Δρ levels span this many decades below the largest |Δρ| shown.
DIFFERENCE_DECADES = 2
#: Largest |Δρ| level (a.u.); larger differences sit at moving nuclei.
DIFFERENCE_CAP = 0.05
#: Margin (Å) around the projected involved atoms.
MAP_MARGIN_ANGSTROM = 1.2
_MIN_SIDE_ANGSTROM = 3.0
# cividis (made for colour-vision deficiencies) without its pale yellow end,
# which vanishes on white paper
_CONTOUR_CMAP = ListedColormap(colormaps["cividis"](np.linspace(0.0, 0.78, 256)),
                               name="cividis_dark")


def density_on_plane(grid, points) -> np.ndarray:
    """Density of a grid at 3-D points, interpolated.

    Uses the package's grid field (tricubic B-spline of ρ minus a
    core-localised promolecule, added back exactly) when available, else a
    cubic B-spline of ρ itself (:func:`scipy.ndimage.map_coordinates`).

    Parameters
    ----------
    grid : trackscan.grid.DensityGrid
    points : (N, 3) array_like, bohr

    Returns
    -------
    (N,) ndarray
        ρ (e/bohr³); NaN outside a non-periodic grid.
    """
    pts = np.asarray(points, float).reshape(-1, 3)
    frac = grid.fractional_index(pts)
    try:
        from trackscan.fields import GridField
    except ImportError:
        GridField = None
    if GridField is not None:
        vals = np.asarray(GridField(grid).evaluate(pts, 0)[0], float)
    else:
        mode = "grid-wrap" if grid.periodic else "nearest"
        vals = ndimage.map_coordinates(grid.values, frac.T, order=3, mode=mode)
    if not grid.periodic:
        shape = np.asarray(grid.shape) - 1
        outside = np.any((frac < -1e-9) | (frac > shape + 1e-9), axis=1)
        vals = np.where(outside, np.nan, vals)
    return vals


def contour_levels(values, *, cap: float = CONTOUR_CAP, floor: float = CONTOUR_FLOOR):
    """Logarithmic contour levels 1, 2, 5 × 10^n within the values, between `floor` and `cap`."""
    v = np.asarray(values, float)
    v = v[np.isfinite(v) & (v > 0)]
    if v.size == 0:
        return np.array([])
    lo, hi = max(float(v.min()), floor), min(float(v.max()), cap)
    levels = [m * 10.0 ** n for n in range(-5, 4) for m in (1.0, 2.0, 5.0)]
    return np.array([x for x in levels if lo <= x <= hi * (1 + 1e-12)])


def difference_levels(diff) -> np.ndarray:
    """Symmetric levels ±1, 2, 5 × 10^n for a difference map (empty when it is zero).

    The top level is the largest 1-2-5 value below the 99th percentile of
    |Δρ| (at most :data:`DIFFERENCE_CAP`), the lowest
    :data:`DIFFERENCE_DECADES` decades under it.
    """
    d = np.abs(np.asarray(diff, float))
    d = d[np.isfinite(d)]
    if d.size == 0 or not np.any(d > 0):
        return np.array([])
    top = min(float(np.percentile(d, 99)), DIFFERENCE_CAP)
    if top <= 0:
        return np.array([])
    levels = [m * 10.0 ** n for n in range(-8, 2) for m in (1.0, 2.0, 5.0)]
    pos = [x for x in levels if top * 10.0 ** -DIFFERENCE_DECADES <= x <= top]
    return np.array(sorted([-x for x in pos] + pos))


def _is_model(scan: ScanView) -> bool:
    return scan.is_model_density or "promolecul" in str(scan.header.density_source).lower()


def frame_density(scan: ScanView, frame):
    """A function giving ρ at points (bohr) for a frame, and where it comes from.

    Returns
    -------
    (callable or None, str)
        ``(rho, origin)``; when no density is available, ``(None, reason)``.
    """
    path = scan.source_path(frame)
    reason = "the frame has no source file"
    if path is not None:
        if path.is_file():
            from trackscan.io.cube import read_cube
            try:
                grid = read_cube(path)
            except (TrackscanError, OSError, ValueError) as exc:
                reason = f"cube could not be read ({exc})"
            else:
                return (lambda pts: density_on_plane(grid, pts)), \
                    "the frames' cube files, tricubic B-spline interpolation"
        else:
            reason = ("cube not found (relative paths are looked up in the manifest's "
                      "folder, given as source_dir or --source-dir, then beside scan.json)")
    if _is_model(scan) and frame.atoms:
        from trackscan.promolecule import Promolecule
        model = Promolecule([a.Z for a in frame.atoms], [a.position_bohr for a in frame.atoms])
        return model.value, "the promolecular model, evaluated exactly"
    return None, reason


def _extent(scan, change, plane: Plane):
    before, after = scan.change_frames(change)
    nums = involved_atoms(scan, change)
    pts = []
    for frame in (before, after):
        pos = atom_positions(frame)
        pts += [pos[n] for n in nums if n in pos]
    uv = plane.project(pts) * BOHR_IN_ANGSTROM
    lo, hi = uv.min(axis=0) - MAP_MARGIN_ANGSTROM, uv.max(axis=0) + MAP_MARGIN_ANGSTROM
    side = max(float(np.max(hi - lo)), _MIN_SIDE_ANGSTROM)
    centre = 0.5 * (lo + hi)
    return centre - side / 2, centre + side / 2


@styled
def density_map_figure(scan: ScanView, change, number: int):
    """ρ before, ρ after and Δρ in the plane of a change, with bond paths and CPs.

    Returns
    -------
    (Figure or None, str or None)
        The figure, and a sentence explaining any panel without a map (None
        when both frames have a density).
    """
    plane = change_plane(scan, change)
    if plane is None:
        return None, f"Change {number}: no density map (the frames list no atoms)."
    before, after = scan.change_frames(change)
    lo, hi = _extent(scan, change, plane)
    u = np.linspace(lo[0], hi[0], MAP_POINTS)
    v = np.linspace(lo[1], hi[1], MAP_POINTS)
    uu, vv = np.meshgrid(u, v)
    pts = plane.lift(np.stack([uu.ravel(), vv.ravel()], axis=1) * ANGSTROM_IN_BOHR)
    involved = involved_atoms(scan, change)
    changed = changed_tracks(change)
    panels, missing, origins = [], [], set()
    for frame, side in ((before, "before"), (after, "after")):
        if frame is None:
            missing.append((f"the frame {side} the change", "not in scan.json"))
            panels.append(None)
            continue
        rho, origin = frame_density(scan, frame)
        if rho is None:
            src = f", {frame.source}" if frame.source else ""
            missing.append((f"frame {scan.frame_label(frame)} ({side}{src})", origin))
            panels.append(None)
            continue
        origins.add(origin)
        panels.append(np.asarray(rho(pts), float).reshape(uu.shape))
    note = None
    if missing:
        by_reason = {}
        for who, why in missing:
            by_reason.setdefault(why, []).append(who)
        note = f"Change {number}: no density map for " + "; ".join(
            f"{' and '.join(who)}: {why}" for why, who in by_reason.items()) + "."
    if all(p is None for p in panels):
        return None, note
    finite = np.concatenate([p[np.isfinite(p)] for p in panels if p is not None])
    levels = contour_levels(finite)
    norm = LogNorm(vmin=levels[0], vmax=levels[-1]) if len(levels) > 1 else None
    diff = panels[1] - panels[0] if all(p is not None for p in panels) else None
    dlevels = difference_levels(diff) if diff is not None else np.array([])
    fig = new_figure(2, 2.9)
    axes = list(fig.subplots(1, 3 if diff is not None else 2))
    d = change_decimals(change)
    spots = []
    for ax, frame, rho, side in zip(axes, (before, after), panels, ("before", "after")):
        if rho is None:
            ax.text(0.5, 0.5, "no density available", ha="center", transform=ax.transAxes)
            ax.set_axis_off()
            spots.append([])
            continue
        if len(levels) > 1:
            ax.contour(uu, vv, np.where(np.isfinite(rho) & (rho > 0), rho, np.nan),
                       levels=levels, cmap=_CONTOUR_CMAP, norm=norm, linewidths=0.6)
        spots.append(draw_graph(ax, scan, frame, plane, involved=involved, changed=changed))
    pair = fold_pair(scan, change)
    if diff is not None:
        ax = axes[2]
        if len(dlevels):
            neg, pos = dlevels[dlevels < 0], dlevels[dlevels > 0]
            if len(neg):
                ax.contour(uu, vv, diff, levels=neg, colors=OKABE_ITO["blue"],
                           linestyles="dashed", linewidths=0.6)
            if len(pos):
                ax.contour(uu, vv, diff, levels=pos, colors=OKABE_ITO["vermillion"],
                           linestyles="solid", linewidths=0.6)
        draw_graph(ax, scan, after, plane, involved=involved, changed=changed, labels=False)
        if pair is not None:
            uv = plane.project(pair.midpoint)[0] * BOHR_IN_ANGSTROM
            ax.scatter([uv[0]], [uv[1]], marker="x", color="black", s=30, linewidths=1.4,
                       zorder=6, gid="cp-marker")
    for ax in axes:
        if ax.axison:
            ax.set_aspect("equal", adjustable="box")
            ax.set_xlim(lo[0], hi[0])
            ax.set_ylim(lo[1], hi[1])
            ax.set_xlabel("u (Å)")
            ax.tick_params(labelsize=FONT_SIZE - 1)
    axes[0].set_ylabel("v (Å)")
    fig.subplots_adjust(wspace=0.25)
    for ax, frame, side in zip(axes, (before, after), ("before", "after")):
        if frame is not None and ax.axison:
            panel_title(ax, fig, scan, frame, side, d)
    if diff is not None:
        axes[2].set_title("Δρ = after − before", loc="left", fontsize=FONT_SIZE)
    for ax, sp in zip(axes, spots):
        place_atom_labels(ax, fig, sp)
    handles = []
    if len(levels) > 1:
        handles.append(Line2D([], [], color="#6b6b6b", lw=0.6,
                              label=f"ρ contour ({fmt_sig(levels[0], 1)}–"
                                    f"{fmt_sig(levels[-1], 1)} a.u.)"))
    if len(dlevels):
        handles += [Line2D([], [], color=OKABE_ITO["vermillion"], lw=0.6,
                           label="Δρ > 0 (density gained)"),
                    Line2D([], [], color=OKABE_ITO["blue"], lw=0.6, ls="--",
                           label="Δρ < 0 (density lost)")]
    handles += legend_handles((before, after), pair=pair is not None)
    legend_below(fig, axes, handles, ncol=3)
    labels = ", ".join(scan.label(n, before or after) for n in involved)
    text = (f"Change {number}: electron density ρ in the best-fit plane of {labels}, in the "
            f"last frame before and the first frame after the change (logarithmic contour "
            f"levels 1, 2, 5 × 10ⁿ a.u. from {fmt_sig(levels[0] if len(levels) else 0, 1)} "
            f"to {fmt_sig(levels[-1] if len(levels) else 0, 1)} a.u.; the cores, far above, "
            f"are left blank), with bond paths and CPs projected onto the plane.")
    if diff is not None and len(dlevels):
        text += (f" Right: Δρ = ρ(after) − ρ(before) at the same points, levels ±1, 2, 5 × "
                 f"10ⁿ a.u. from {fmt_sig(dlevels[dlevels > 0][0], 1)} to "
                 f"{fmt_sig(dlevels[-1], 1)} a.u.; solid where density was gained, dashed "
                 "where it was lost (the atoms move between the two frames, so Δρ also "
                 "shows their displacement).")
        if pair is not None:
            text += " The cross marks where the fold pair was."
    text += f" Density from {'; '.join(sorted(origins))}."
    return Figure(f"density_change{number}", render(fig), text,
                  f"density maps around change {number}"), note
