"""Structure maps of plane scans: the figure and the report of a scan with two coordinates.

The figure is the structure diagram of Bader, Nguyen-Dang and Tal [1]_ drawn
from the frames: the plane coloured by structure (each structure's indicator
interpolated linearly between the frames, distances measured in grid steps
of each coordinate so that a degree and an angstrom count alike), the legend saying which bond paths and ring/cage CPs
each structure has; the boundary points (estimates) with their uncertainty
along their edge, joined into curves per pair of structures -- solid for
folds, dashed for conflicts, dotted for mixed or unresolved changes; the
sampled frames (grid frames as dots, refinement frames as crosses); and
contours of the energy when every frame has one.

``write_plane_report(scan, out_dir)`` writes report.html, report.md (with the
figure as PNG), structure_map.svg and .pdf, structures.csv and
boundaries.csv.

References
----------
.. [1] R. F. W. Bader, T. T. Nguyen-Dang and Y. Tal, "A topological theory of
   molecular structure", Rep. Prog. Phys. 44, 893 (1981).
   :DOI:`10.1088/0034-4885/44/8/002`
"""

from __future__ import annotations

import csv
import datetime
import io
import json
from pathlib import Path

import numpy as np

from trackscan.report.style import OKABE_ITO, new_figure, render

__all__ = ["plane_scan", "structure_map_figure", "save_figure", "structure_words",
           "plane_document", "write_plane_report", "MECHANISM_LINES", "RASTER"]

#: Line style of a boundary curve, by mechanism.
MECHANISM_LINES = {"fold": "-", "conflict": "--", "mixed": ":", "unresolved": ":"}

#: Raster resolution (points per axis) of the coloured plane.
RASTER = 240

#: Region colours, in the order of the structure numbers (light tints of the palette).
REGION_COLOURS = ("#56B4E9", "#E69F00", "#009E73", "#F0E442", "#CC79A7", "#0072B2",
                  "#D55E00", "#999999")


def plane_scan(scan):
    """A plane scan as a PlaneScanResult, or None when `scan` is not a plane scan.

    Parameters
    ----------
    scan : PlaneScanResult, dict, str or os.PathLike
        The result, its parsed scan.json, the file, or its folder.

    Raises
    ------
    trackscan.model.ScanFormatError
        A plane scan.json that is malformed (the message names the key path).
    """
    from trackscan.maps.model import PLANE_DIMENSIONS, PlaneScanResult

    if isinstance(scan, PlaneScanResult):
        return scan
    data = scan
    if not isinstance(scan, dict):
        if hasattr(scan, "to_dict"):
            return None
        p = Path(scan)
        if p.is_dir():
            p = p / "scan.json"
        try:
            data = json.loads(p.read_text(encoding="utf-8"))
        except (OSError, ValueError):
            return None          # the 1-D reader reports the problem
    if not isinstance(data, dict) or data.get("dimensions") != PLANE_DIMENSIONS:
        return None
    return PlaneScanResult.from_dict(data)


def _elements(scan):
    return list(scan.frames[0].elements) if scan.frames else []


def _end(a, elements):
    return f"{elements[a - 1]}{a}" if isinstance(a, int) and 1 <= a <= len(elements) else str(a)


def structure_words(structure: dict, elements) -> str:
    """A structure (trackscan.model.Structure) in words: its bond paths and ring/cage CPs."""
    bonds = ", ".join("–".join(_end(a, elements) for a in bp) for bp in structure.bond_paths)
    parts = [bonds or "no bond path"]
    extra = []
    if structure.rings:
        extra.append(f"{structure.rings} ring CP" + ("s" if structure.rings > 1 else ""))
    if structure.cages:
        extra.append(f"{structure.cages} cage CP" + ("s" if structure.cages > 1 else ""))
    if structure.non_nuclear:
        extra.append(f"{len(structure.non_nuclear)} non-nuclear attractor(s)")
    parts.append("; ".join(extra) if extra else "no ring or cage CP")
    return "; ".join(parts)


def _axis_label(c) -> str:
    return f"{c.label} ({c.unit})" if c.unit else c.label


def _grid_steps(values):
    """Typical grid step of each coordinate (for distances in the plane)."""
    steps = []
    for a in (0, 1):
        u = np.unique(values[:, a])
        d = np.diff(u)
        steps.append(float(np.median(d)) if d.size else 1.0)
    return np.array(steps)


def _regions(values, labels, lo, hi, steps):
    """Structure label on a raster of the plane.

    Each structure's indicator (1 at its frames, 0 elsewhere) is interpolated
    linearly over the Delaunay triangulation of the frames (in grid steps)
    and the raster point takes the structure with the largest value, so
    region edges run between the frames that differ, through the refinement
    frames along the boundary edges; points no triangle covers take the
    nearest frame's structure.
    """
    from scipy.interpolate import griddata
    from scipy.spatial import cKDTree

    xs = np.linspace(lo[0], hi[0], RASTER)
    ys = np.linspace(lo[1], hi[1], RASTER)
    X, Y = np.meshgrid(xs, ys)
    pts = np.column_stack([X.ravel(), Y.ravel()]) / steps
    scaled = values / steps
    kinds = np.unique(labels)
    _, nearest = cKDTree(scaled).query(pts)
    out = labels[nearest]
    if len(kinds) > 1 and len(values) >= 3:
        try:
            ind = np.column_stack([griddata(scaled, (labels == k).astype(float), pts,
                                            method="linear") for k in kinds])
        except Exception:            # degenerate (collinear) frames: no triangulation
            ind = None
        if ind is not None:
            ok = np.all(np.isfinite(ind), axis=1)
            out = np.where(ok, kinds[np.argmax(np.nan_to_num(ind, nan=-1.0), axis=1)], out)
    return xs, ys, out.reshape(X.shape)


def _uncertainty(b) -> float:
    """The ± of a boundary along its edge: the model error when there is one, else half the bracket."""
    u = b.uncertainty
    if u is not None:
        d = u.to_dict()
        for k in ("value", "model_error", "half_width"):
            if isinstance(d.get(k), (int, float)) and not isinstance(d.get(k), bool):
                return float(d[k])
    return 0.5 * b.width


def _evidence(b) -> str:
    """The mechanism a boundary's events point to (its candidate when judged unresolved)."""
    if b.mechanism == "unresolved" and b.mechanism_candidate:
        return b.mechanism_candidate
    return b.mechanism


def _chain(points, steps):
    """Order boundary points into a polyline by nearest neighbours (scaled by grid steps)."""
    pts = [np.asarray(p) for p in points]
    if len(pts) < 3:
        return sorted(pts, key=lambda p: tuple(p))
    scaled = [p / steps for p in pts]
    # start from the point farthest from the centroid, then walk to the nearest unused one
    c = np.mean(scaled, axis=0)
    k = int(np.argmax([np.linalg.norm(s - c) for s in scaled]))
    order, left = [k], set(range(len(pts))) - {k}
    while left:
        last = scaled[order[-1]]
        k = min(left, key=lambda i: (np.linalg.norm(scaled[i] - last), i))
        order.append(k)
        left.remove(k)
    return [pts[i] for i in order]


def structure_map_figure(scan):
    """The structure map of a plane scan (a matplotlib Figure on the Agg canvas)."""
    from matplotlib.colors import ListedColormap
    from matplotlib.lines import Line2D
    from matplotlib.patches import Patch

    frames = scan.frames
    elements = _elements(scan)
    c1, c2 = scan.scan.coordinates
    values = np.array([f.values for f in frames], dtype=float)
    labels = np.array([int(f.structure) for f in frames])
    lo, hi = values.min(axis=0), values.max(axis=0)
    steps = _grid_steps(values)
    fig = new_figure(8.0, 5.6)
    ax = fig.add_subplot(1, 1, 1)
    n = max(s.number for s in scan.structures)
    colours = [REGION_COLOURS[(k - 1) % len(REGION_COLOURS)] for k in range(1, n + 1)]
    xs, ys, raster = _regions(values, labels, lo, hi, steps)
    ax.pcolormesh(xs, ys, raster, cmap=ListedColormap(colours), vmin=0.5, vmax=n + 0.5,
                  shading="auto", alpha=0.35, rasterized=True)
    energies = [f.energy_hartree for f in frames]
    if len(frames) >= 4 and all(isinstance(e, (int, float)) for e in energies):
        try:
            cs = ax.tricontour(values[:, 0], values[:, 1], np.array(energies, dtype=float),
                               levels=10, colors="#555555", linewidths=0.6)
            ax.clabel(cs, fontsize=6, fmt="%.4f")
        except (ValueError, RuntimeError):
            pass         # collinear frames: no triangulation, no contours
    refined = np.array([f.refine is not None for f in frames])
    ax.scatter(values[~refined, 0], values[~refined, 1], s=14, c="black", zorder=4,
               label="grid frame")
    if refined.any():
        ax.scatter(values[refined, 0], values[refined, 1], s=10, c="#555555", marker="x",
                   lw=0.7, zorder=4, label="refinement frame")
    curves: dict = {}
    for b in scan.boundaries:
        curves.setdefault(tuple(sorted(b.structures)), []).append(b)
    for pair, group in sorted(curves.items()):
        order = _chain([np.array(b.estimate, dtype=float) for b in group], steps)
        by_point = {tuple(np.array(b.estimate, dtype=float)): b for b in group}
        chain = [by_point[tuple(p)] for p in order]
        for b0, b1 in zip(chain, chain[1:]):
            m0, m1 = _evidence(b0), _evidence(b1)
            ls = MECHANISM_LINES.get(m0 if m0 == m1 else "mixed", ":")
            ax.plot([b0.estimate[0], b1.estimate[0]], [b0.estimate[1], b1.estimate[1]], ls=ls,
                    color=OKABE_ITO["black"], lw=1.3, zorder=5)
        for b in group:
            err = _uncertainty(b)
            xerr, yerr = (err, 0.0) if b.along == 0 else (0.0, err)
            face = "white" if b.mechanism == "unresolved" else OKABE_ITO["vermillion"]
            ax.errorbar([b.estimate[0]], [b.estimate[1]], xerr=[xerr], yerr=[yerr], fmt="o",
                        ms=3.5, mfc=face, color=OKABE_ITO["vermillion"],
                        ecolor=OKABE_ITO["vermillion"], elinewidth=1.0, capsize=2, zorder=6)
    ax.set_xlim(lo[0], hi[0])
    ax.set_ylim(lo[1], hi[1])
    ax.set_xlabel(_axis_label(c1))
    ax.set_ylabel(_axis_label(c2))
    ax.set_title(f"Structure map of {scan.scan.name}")
    handles = [Patch(facecolor=colours[s.number - 1], alpha=0.5,
                     label=f"{s.number}: {structure_words(s, elements)}")
               for s in scan.structures]
    used = sorted({_evidence(b) for b in scan.boundaries})
    handles += [Line2D([], [], color="black", ls=MECHANISM_LINES.get(m, ":"),
                       label=f"{m} line" if m != "unresolved" else "mixed or unresolved line")
                for m in used if m in ("fold", "conflict")]
    if any(_evidence(b) not in ("fold", "conflict") for b in scan.boundaries) or len(used) > 1:
        handles.append(Line2D([], [], color="black", ls=":", label="mixed or unresolved line"))
    handles.append(Line2D([], [], color=OKABE_ITO["vermillion"], marker="o", ls="",
                          label="boundary estimate ± uncertainty"))
    if any(b.mechanism == "unresolved" for b in scan.boundaries):
        handles.append(Line2D([], [], color=OKABE_ITO["vermillion"], marker="o", mfc="white",
                              ls="", label="boundary judged unresolved (events as drawn)"))
    handles.append(Line2D([], [], color="black", marker="o", ls="", ms=4, label="grid frame"))
    if refined.any():
        handles.append(Line2D([], [], color="#555555", marker="x", ls="",
                              label="refinement frame"))
    ax.legend(handles=handles, loc="upper center", bbox_to_anchor=(0.5, -0.13), fontsize=7,
              ncol=1, frameon=False)
    return fig


def save_figure(fig, path) -> Path:
    """Write a figure as SVG, PDF or PNG (by suffix), atomically, without time stamps."""
    from trackscan.io.atomic import write_bytes_atomic

    path = Path(path)
    fmt = path.suffix.lstrip(".").lower()
    if fmt not in ("svg", "pdf", "png"):
        raise ValueError(f"figure format must be svg, pdf or png, got {path.suffix!r}")
    write_bytes_atomic(path, getattr(render(fig), fmt))
    return path


def _fmt_point(p) -> str:
    return "(" + ", ".join(f"{v:.6g}" for v in p) + ")"


def _boundary_rows(scan):
    from trackscan.tracking import describe_change

    elements = _elements(scan)
    units = [c.unit for c in scan.scan.coordinates]
    labels = [c.label for c in scan.scan.coordinates]
    rows = []
    for n, b in enumerate(scan.boundaries, start=1):
        a, z = b.bracket
        rows.append((str(n), f"{b.structures[0]} → {b.structures[1]}",
                     f"{_fmt_point(a)} → {_fmt_point(z)}",
                     f"{_fmt_point(b.estimate)} ± {_uncertainty(b):.2g} {units[b.along]}",
                     labels[b.along], b.mechanism, describe_change(b, elements)))
    return rows


def plane_document(scan, *, date=None):
    """The report of a plane scan as a :class:`trackscan.report.document.Document`."""
    from trackscan.report.document import Document, Figure, Paragraph, Section, Table

    elements = _elements(scan)
    c1, c2 = scan.scan.coordinates
    frames = scan.frames
    n_refined = sum(1 for f in frames if f.refine is not None)
    intro = (f"{len(frames)} frames over {_axis_label(c1)} and {_axis_label(c2)} "
             f"({len(frames) - n_refined} on the grid, {n_refined} added by refinement along "
             f"boundary edges); {len(scan.structures)} structures; "
             f"{len(scan.boundaries)} boundary points.  Density source: "
             f"{scan.scan.density_source or ''}.")
    blocks = [Paragraph(intro)]
    if scan.scan.description:
        blocks.append(Paragraph(scan.scan.description.strip()))
    if date:
        blocks.append(Paragraph(f"Report date: {date}."))
    fig = structure_map_figure(scan)
    files = render(fig)
    doc = Document(title=f"Structure map: {scan.scan.name}")
    doc.sections.append(Section("overview", "Overview", tuple(blocks)))
    doc.sections.append(Section("structure-map", "Structure map", (Figure(
        "structure_map", files,
        "The plane coloured by structure (interpolated between the frames); boundary points with their "
        "uncertainty along their edge, joined per pair of structures (solid: fold, dashed: "
        "conflict, dotted: mixed or unresolved; hollow: judged unresolved); dots: grid frames, crosses: refinement "
        "frames; grey lines: energy contours (hartree) when energies are known.",
        "structure map"),)))
    srows = tuple((str(s.number), structure_words(s, elements), str(s.rings),
                   str(s.cages), str(len(s.frames))) for s in scan.structures)
    doc.sections.append(Section("structures", "Structures", (Table(
        "structures", ("structure", "bond paths; ring/cage CPs", "ring CPs", "cage CPs",
                       "frames"), srows),)))
    brows = tuple(_boundary_rows(scan))
    words = tuple(Paragraph(f"Boundary {r[0]} (structure {r[1]}, along {r[4]}): {r[6]} "
                            f"({r[5]}), at {r[3]}.") for r in brows)
    doc.sections.append(Section("boundaries", "Boundaries", (Table(
        "boundaries", ("#", "structures", "bracket", "estimate", "along", "mechanism",
                       "events"), brows),) + words))
    ref = scan.scan.refine
    if isinstance(ref, dict):
        doc.sections.append(Section("refinement", "Refinement", (Paragraph(
            f"{ref.get('evaluations', 0)} frames added along {ref.get('boundary_edges', 0)} "
            f"boundary edges, to a bracket of at most {ref.get('tolerance')} (units of the "
            f"coordinate varying along each edge): {ref.get('message', '')}."),)))
    return doc, fig


def _write_csv(path, header, rows):
    from trackscan.io.atomic import write_text_atomic

    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(header)
    w.writerows(rows)
    write_text_atomic(path, buf.getvalue())


def write_plane_report(scan, out_dir, *, date="today", progress=None):
    """Write the report of a plane scan; returns :class:`trackscan.report.writer.ReportFiles`.

    ``changes_csv`` is ``boundaries.csv`` and ``critical_points_csv`` is
    ``structures.csv`` for a plane scan.
    """
    from trackscan import __version__
    from trackscan.io.atomic import write_bytes_atomic, write_text_atomic
    from trackscan.progress import report
    from trackscan.report.html import render_html
    from trackscan.report.markdown import image_name, render_markdown
    from trackscan.report.writer import ReportFiles

    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    if date == "today":
        date = datetime.datetime.now(datetime.timezone.utc).date().isoformat()
    report(progress, "report", 0, 2, "structure map")
    doc, fig = plane_document(scan, date=date)
    images = []
    for f in doc.figures():
        path = out / image_name(f)
        write_bytes_atomic(path, f.png)
        images.append(path)
    for suffix in (".svg", ".pdf"):
        images.append(save_figure(fig, out / f"structure_map{suffix}"))
    elements = _elements(scan)
    structures_csv = out / "structures.csv"
    _write_csv(structures_csv, ("structure", "bond_paths", "rings", "cages", "frames"),
               [(s.number, structure_words(s, elements), s.rings, s.cages,
                 " ".join(str(k) for k in s.frames)) for s in scan.structures])
    boundaries_csv = out / "boundaries.csv"
    _write_csv(boundaries_csv, ("boundary", "frame_a", "frame_b", "a_value1", "a_value2",
                                "b_value1", "b_value2", "estimate1", "estimate2",
                                "uncertainty", "along", "mechanism", "structure_a",
                                "structure_b"),
               [(n, b.between[0], b.between[1], *b.bracket[0], *b.bracket[1],
                 *b.estimate, _uncertainty(b), b.along, b.mechanism,
                 *b.structures) for n, b in enumerate(scan.boundaries, start=1)])
    footer = (f"Made by trackscan {__version__} from scan.json"
              + (f" on {date}" if date else "") + ".")
    md = out / "report.md"
    write_text_atomic(md, render_markdown(doc, footer=footer))
    html = out / "report.html"
    write_text_atomic(html, render_html(doc, footer=footer))
    report(progress, "report", 2, 2, str(html))
    return ReportFiles(html, md, boundaries_csv, structures_csv, tuple(images))
