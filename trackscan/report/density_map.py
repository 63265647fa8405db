"""Density maps: contour lines of ρ in the plane of the atoms most involved in a change.

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
                                              involved_atoms)
from trackscan.report.document import Figure
from trackscan.report.graphs import changed_keys, draw_graph, frames_features, legend_handles
from trackscan.report.scan_data import ScanData
from trackscan.report.style import new_figure, to_png
from trackscan.report.wording import change_decimals, fmt_coord
from trackscan.units import ANGSTROM_IN_BOHR, BOHR_IN_ANGSTROM

__all__ = ["density_on_plane", "contour_levels", "frame_density", "density_map_figure",
           "MAP_POINTS", "MAP_MARGIN_ANGSTROM"]

logger = logging.getLogger(__name__)

#: Points per side of the sampled square.
MAP_POINTS = 161
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


def contour_levels(values) -> np.ndarray:
    """Logarithmic contour levels 1, 2, 5 × 10^n spanning the finite positive values."""
    v = np.asarray(values, float)
    v = v[np.isfinite(v) & (v > 0)]
    if v.size == 0:
        return np.array([])
    lo, hi = max(float(v.min()), 1e-4), float(v.max())
    levels = [m * 10.0 ** n for n in range(-5, 4) for m in (1.0, 2.0, 5.0)]
    return np.array([x for x in levels if lo <= x <= hi])


def _is_model(scan: ScanData) -> bool:
    src = scan.scan.get("density_source")
    text = str(src).lower()
    return "promolecul" in text


def frame_density(scan: ScanData, frame):
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
            try:
                from trackscan.io.cube import read_cube
            except ImportError:
                reason = "no cube reader in this installation"
            else:
                try:
                    grid = read_cube(path)
                except (TrackscanError, OSError, ValueError) as exc:
                    reason = f"cube could not be read ({exc})"
                else:
                    return (lambda pts: density_on_plane(grid, pts)), \
                        f"cube {path.name}, cubic-spline interpolation"
        else:
            reason = ("cube not found (relative paths are looked up in the manifest's "
                      "folder, given as source_dir or --source-dir, then beside scan.json)")
    if _is_model(scan) and frame.get("atoms"):
        try:
            from trackscan.promolecule import Promolecule
        except ImportError:
            return None, reason
        atoms = frame["atoms"]
        model = Promolecule([a["Z"] for a in atoms], [a["position_bohr"] for a in atoms])
        return model.value, "promolecular model, evaluated exactly"
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


def density_map_figure(scan: ScanData, change, number: int):
    """Contour maps of ρ before and after a change, with bond paths and CPs.

    Returns
    -------
    (Figure or None, str or None)
        The figure, and a sentence explaining any panel without a map (None
        when both panels have one).  The figure is None when neither frame
        has a density available or the frames have no atoms.
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
    changed = changed_keys(scan, change)
    panels, missing, origins = [], [], set()
    for frame, side in ((before, "before"), (after, "after")):
        if frame is None:
            missing.append((f"the frame {side} the change", "not in scan.json"))
            panels.append(None)
            continue
        rho, origin = frame_density(scan, frame)
        if rho is None:
            src = f", {frame['source']}" if frame.get("source") else ""
            missing.append((f"frame {frame.get('index')} ({side}{src})", origin))
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
    fig = new_figure(10.0, 5.0)
    axes = fig.subplots(1, 2)
    d = change_decimals(change)
    mappable = None
    kinds = frames_features((before, after))
    for ax, frame, rho, side in zip(axes, (before, after), panels, ("before", "after")):
        if rho is None:
            ax.text(0.5, 0.5, "no density available", ha="center", transform=ax.transAxes)
            ax.set_axis_off()
            continue
        if len(levels) > 1:
            # interpolation can undershoot to <= 0 far out; no log contour lives there
            mappable = ax.contour(uu, vv, np.where(np.isfinite(rho) & (rho > 0), rho, np.nan),
                                  levels=levels, cmap=_CONTOUR_CMAP, norm=norm, linewidths=0.8)
        draw_graph(ax, scan, frame, plane, involved=involved, changed=changed)
        ax.set_aspect("equal", adjustable="box")
        ax.set_xlim(lo[0], hi[0])
        ax.set_ylim(lo[1], hi[1])
        ax.set_title(f"{side}: frame {frame.get('index')}, {scan.coordinate_label} = "
                     f"{fmt_coord(frame.get('value'), d)} {scan.unit_symbol}".rstrip(),
                     fontsize=10)
    axes[0].set_ylabel("in-plane v (Å)")
    handles = [Line2D([], [], color="#6b6b6b", lw=0.8,
                      label="ρ contour (log levels 1, 2, 5 × 10ⁿ)")]
    fig.legend(handles=handles + legend_handles(kinds), loc="lower center", ncol=3,
               fontsize=8, frameon=False, bbox_to_anchor=(0.5, 0.0))
    fig.subplots_adjust(bottom=0.24)
    if mappable is not None:
        cbar = fig.colorbar(mappable, ax=list(axes), shrink=0.8, pad=0.02)
        cbar.set_label("ρ (e/bohr³)")
    labels = ", ".join(scan.label(n, before or after) for n in involved)
    return Figure(f"density_change{number}", to_png(fig),
                  f"Change {number}: contour lines of ρ (logarithmic levels) in the best-fit "
                  f"plane of {labels}, with bond paths and CPs projected onto it. "
                  f"Density from: {'; '.join(sorted(origins))}.",
                  f"density map around change {number}"), note
