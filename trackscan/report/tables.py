"""Tables of the report and its CSV files.

Display tables (:class:`~trackscan.report.document.Table`) hold strings at a
stated precision.  The CSV files carry units in every header, numbers at
:data:`CSV_DIGITS` significant digits (coordinate values with enough
decimals to keep every bracket apart; scan.json keeps full precision), and
plain words, never JSON, in their cells.
"""

from __future__ import annotations

import csv
import io
import math

import numpy as np

from trackscan.io.atomic import write_text_atomic
from trackscan.report.change_geometry import changed_tracks, fold_pair
from trackscan.report.document import Table
from trackscan.report.estimate_geometry import xyz_name
from trackscan.report.scan_view import CP_KINDS, ScanView, cp_by_track
from trackscan.report.settings_text import setting_meanings
from trackscan.report.wording import (change_decimals, change_words, coord_decimals,
                                      describe_value, estimate_decimals, estimate_text,
                                      fmt_coord, fmt_sig, fmt_uncertainty, method_words,
                                      resolution_words, uncertainty_words)
from trackscan.units import BOHR_IN_ANGSTROM
from trackscan.vocabulary import CP_KIND_SHORT, INDICATORS, UNCERTAINTY_SOURCES

__all__ = ["summary_table", "structures_table", "pair_table", "geometry_table",
           "energy_density_table", "resolution_table", "frame_table", "warning_table",
           "settings_table", "change_csv", "critical_point_csv", "write_csv", "CSV_DIGITS"]

#: The quantity each early-warning projection extrapolates, in words.
PROJECTED_FROM = {"ellipticity": "from ε", "min_abs_eigenvalue": "from the smallest |λ|",
                  "nearest_ring_bohr": "from the ring CP's distance", "rho": "from ρ"}
#: Significant digits of densities and curvatures in the CSV files.
CSV_DIGITS = 6
#: Decimals of positions (Å) in tables and CSV files.
POSITION_DECIMALS = 4


def _u(scan: ScanView) -> str:
    return f" ({scan.unit_symbol})" if scan.unit_symbol else ""


def _bracket_text(change, d) -> str:
    return f"{fmt_coord(change.bracket[0], d)} → {fmt_coord(change.bracket[1], d)}"


def summary_table(scan: ScanView) -> Table:
    """One row per change: frames, bracket, estimate ± uncertainty, mechanism, events."""
    u = _u(scan)
    header = ("#", "Frames", f"Bracket{u}", f"Estimate ± uncertainty{u}", "Mechanism",
              "Events", "New frames")
    rows = []
    for k, change in enumerate(scan.changes, 1):
        before, after = scan.change_frames(change)
        frames = "–".join(scan.frame_label(f) if f is not None else "?" for f in (before, after))
        mech = change.mechanism
        cand = change.mechanism_candidate
        if cand and cand != mech:
            mech += f" (looks like {cand})"
        n = change.evaluations
        new = str(n) if isinstance(n, int) else "—"
        bis = (change.refine or {}).get("bisection_evaluations") if isinstance(change.refine, dict) else None
        if isinstance(bis, int) and isinstance(n, int):
            new += f" (bisection: {bis})"
        rows.append((str(k), frames, _bracket_text(change, change_decimals(change)),
                     estimate_text(scan, change, unit=False), mech, change_words(scan, change),
                     new))
    return Table("summary", header, tuple(rows),
                 "The changes along the scan. The bracket runs from the last frame with the "
                 "old structure to the first frame with the new one; the ± is the one "
                 "uncertainty quoted for each estimate (see Methods).")


def structures_table(scan: ScanView):
    """One row per structure: its frames and coordinate range, bond paths, rings, cages."""
    structures = sorted(scan.result.structures, key=lambda s: s.number)
    if not structures:
        return None
    rows = []
    for s in structures:
        frames = [scan.frame(i) for i in s.frames]
        frames = [f for f in frames if f is not None]
        values = [f.value for f in frames]
        d = coord_decimals(*[f.value for f in scan.frames])
        span = (f"{fmt_coord(min(values), d)} – {fmt_coord(max(values), d)}" if values else "—")
        ref = frames[0] if frames else None
        paths = ", ".join(scan.labels(p, ref) for p in s.bond_paths) or "—"
        nna = ", ".join(str(x) for x in s.non_nuclear) or "—"
        rows.append((str(s.number), scan.frame_ranges(s.frames), span, str(len(s.bond_paths)),
                     paths, str(s.rings), str(s.cages), nna))
    return Table("structures", ("Structure", "Frames", f"Coordinate{_u(scan)}", "Bond paths",
                                "Atoms linked", "Rings", "Cages", "Non-nuclear attractors"),
                 tuple(rows), "The structures (classes of molecular graphs) along the scan "
                 "and the frames that have them (a run of frames in scan order is written as its "
                 "first and last frame).")


def pair_table(scan: ScanView, change, number: int):
    """The two CPs of a change's fold, in the last frame where both exist (None without)."""
    pair = fold_pair(scan, change)
    if pair is None:
        return None
    header = ("CP", "Track", "Atoms", "x (Å)", "y (Å)", "z (Å)", "ρ (a.u.)", "∇²ρ (a.u.)",
              "λ1 (a.u.)", "λ2 (a.u.)", "λ3 (a.u.)", "ε")
    rows = []
    for cp in pair.cps:
        ev = list(cp.eigenvalues or ()) + [None] * 3
        atoms = scan.labels(cp.atoms, pair.frame) if cp.kind != "cage" and cp.atoms else "—"
        rows.append((f"{cp.kind.replace('_', '-')} CP", str(cp.track or "—"), atoms,
                     *(fmt_coord(x * BOHR_IN_ANGSTROM, POSITION_DECIMALS)
                       for x in cp.position_bohr),
                     fmt_sig(cp.rho), fmt_sig(cp.laplacian), fmt_sig(ev[0]), fmt_sig(ev[1]),
                     fmt_sig(ev[2]), fmt_sig(cp.ellipticity)))
    where = "last frame before" if pair.side == "before" else "first frame after"
    return Table(f"pair{number}", header, tuple(rows),
                 f"Change {number}: the fold pair in frame {scan.frame_label(pair.frame)} (the "
                 f"{where} the change), {fmt_sig(pair.separation_bohr * BOHR_IN_ANGSTROM, 3)} Å "
                 "apart.")


def geometry_table(scan: ScanView, change, number: int, geometry):
    """The driven coordinate and the key distances before, at and after the estimate."""
    if geometry is None:
        return None
    before, after = scan.change_frames(change)
    d = estimate_decimals(scan, change)
    rows = [(f"{scan.coordinate_label}{_u(scan)}", fmt_coord(before.value, d),
             fmt_coord(geometry.measured if geometry.measured is not None else geometry.value, d),
             fmt_coord(after.value, d))]
    for atoms, b, at, a in geometry.distances:
        rows.append((f"{atoms} distance (Å)", f"{b:.4f}", f"{at:.4f}", f"{a:.4f}"))
    return Table(f"geometry{number}", ("Quantity", f"Frame {scan.frame_label(before)}",
                                       "At the estimate", f"Frame {scan.frame_label(after)}"),
                 tuple(rows),
                 f"Change {number}: geometry at the estimate {estimate_text(scan, change)}, from "
                 f"{geometry.origin}; written to {xyz_name(number)} (Å).")


def energy_density_table(scan: ScanView, change, number: int):
    """G, V, H at the bond CPs the change involves, in the frames before and after."""
    tracks = changed_tracks(change)
    rows = []
    for frame in scan.change_frames(change):
        if frame is None:
            continue
        for cp in frame.critical_points:
            if cp.kind != "bond" or cp.track not in tracks:
                continue
            e = cp.energy_densities or {}
            g, v, h = (e.get(k) for k in ("G", "V", "H"))
            ratio = abs(v) / g if isinstance(v, (int, float)) and isinstance(g, (int, float)) \
                and g else None
            rows.append((scan.labels(cp.atoms, frame), scan.frame_label(frame),
                         fmt_sig(cp.rho), fmt_sig(cp.laplacian), fmt_sig(g), fmt_sig(v),
                         fmt_sig(h), fmt_sig(ratio, 3)))
    if not rows:
        return None
    approx = ""
    for frame in scan.change_frames(change):
        for cp in (frame.critical_points if frame is not None else ()):
            if cp.energy_densities and cp.energy_densities.get("approximate"):
                approx = str(cp.energy_densities["approximate"])
    return Table(f"energy_densities{number}",
                 ("Bond path", "Frame", "ρ (a.u.)", "∇²ρ (a.u.)", "G (a.u.)", "V (a.u.)",
                  "H (a.u.)", "|V|/G"), tuple(rows),
                 f"Change {number}: kinetic (G), potential (V) and total (H = G + V) energy "
                 "densities at the bond CPs involved, in the frames on both sides"
                 + (f" (G approximated: {approx})" if approx else "") + ". H < 0 and "
                 "|V|/G > 1 mark a shared interaction.")


def resolution_table(scan: ScanView) -> Table:
    """Per change: what limits how close to the catastrophe the grid can see."""
    rows = []
    for k, change in enumerate(scan.changes, 1):
        rows.append((str(k), resolution_words(scan, change), uncertainty_words(scan, change),
                     str(change.note or "—")))
    return Table("resolution", ("#", "Resolution limit", "Uncertainty quoted", "Note"),
                 tuple(rows), "Grid spacing and printed precision limit how close to a "
                 "catastrophe a grid can see: the limit of each change, from the analysis.")


def _frame_warnings(scan: ScanView, frame) -> list:
    out = [str(w) for w in frame.warnings]
    if frame.complete is False:
        out.insert(0, "incomplete: the critical points found do not satisfy Poincaré–Hopf")
    for k, change in enumerate(scan.changes, 1):
        if change.mechanism == "unresolved" and frame.index in change.between:
            out.append(f"change {k} unresolved: {change.note or 'no note'}")
    return out


def frame_table(scan: ScanView) -> Table:
    """One row per frame: structure, counts, Poincaré–Hopf, spacing, energy, warnings."""
    frames = scan.frames
    d = coord_decimals(*[f.value for f in frames])
    has_energy = scan.has_energies
    has_new = any(f.is_refined for f in frames)
    header = ["Frame", f"Coordinate{_u(scan)}", "Structure"]
    header += [CP_KIND_SHORT[k] for k in CP_KINDS]
    header += ["n − b + r − c", "Expected", "Holds", "Grid spacing (Å)"]
    if has_new:
        header.append("Made by")
    if has_energy:
        header.append("Energy (hartree)")
    header.append("Warnings")
    rows = []
    for f in frames:
        counts = f.counts or {}
        ph = f.poincare_hopf
        spacing = f.grid.max_spacing if f.grid is not None else math.nan
        row = [scan.frame_label(f), fmt_coord(f.value, d), describe_value(f.structure)]
        row += [str(counts.get(k, 0)) for k in CP_KINDS]
        row += [describe_value(ph.value if ph else None),
                describe_value(ph.expected if ph else None),
                describe_value(ph.holds if ph else None),
                fmt_sig(spacing * BOHR_IN_ANGSTROM, 3)]
        if has_new:
            row.append(f"refinement, round {f.refine.round}" if f.is_refined else "the scan")
        if has_energy:
            row.append(f"{scan.energy(f):.8f}" if scan.energy(f) is not None else "—")
        row.append("; ".join(_frame_warnings(scan, f)) or "—")
        rows.append(tuple(row))
    return Table("frames", tuple(header), tuple(rows),
                 "Per-frame results: critical points by kind (n nuclei, nna non-nuclear "
                 "attractors, b bond, r ring, c cage, deg. degenerate) and the Poincaré–Hopf "
                 "relation. " + FRAME_NAMING)


#: How frames are named, for captions (:func:`trackscan.tracking.labels.frame_labels`).
FRAME_NAMING = ("Frames are named 1, 2, … in the order the scan lists them; frames that "
                "refinement computed are named r1, r2, … in the order they were computed. "
                "A frame keeps its name when later refinement adds frames.")


def warning_table(scan: ScanView):
    """Early warnings as a table, or None when there are none."""
    warnings = scan.result.early_warnings
    if not warnings:
        return None
    rows = []
    for w in warnings:
        atoms = scan.labels(w.atoms) if w.atoms else "—"
        signs = ", ".join(INDICATORS.get(i, str(i).replace("_", " ")) for i in w.indicators or ())
        details = []
        if w.frames:
            details.append(f"frames {scan.frame_ranges(w.frames)}")
        if w.projected:
            zeros = [f"{scan.with_unit(fmt_sig(v, 4))} ({PROJECTED_FROM.get(k, k.replace('_', ' '))})"
                     for k, v in w.projected.items() if isinstance(v, (int, float))]
            if zeros:
                details.append("extrapolated to a change near " + ", ".join(zeros))
        if w.change_between:
            details.append("followed by the change between frames "
                           + " and ".join(scan.result.frame_name(x) for x in w.change_between))
        else:
            details.append("no change involving it inside the scan")
        rows.append((f"bond path {atoms}", signs or "—", "; ".join(details)))
    return Table("early_warnings", ("Bond path", "Signs", "Details"), tuple(rows),
                 "Bond paths whose properties point at a change ahead (whether or not a "
                 "change happens inside the scan).")


def settings_table(scan: ScanView, *, group: str = "settings", caption: str = "") -> Table | None:
    """Settings of one group with their value, unit and meaning (None when absent)."""
    values = scan.header.settings if group == "settings" else scan.header.tracking
    if not isinstance(values, dict) or not values:
        return None
    meanings = setting_meanings(group)
    rows = []
    for key in sorted(values):
        meaning, unit = meanings.get(key, ("", ""))
        rows.append((str(key), describe_value(values[key], 6), unit or "—", meaning or "—"))
    return Table(group, ("Setting", "Value", "Unit", "Meaning"), tuple(rows), caption)


# -- CSV ------------------------------------------------------------------------------


def _csv_number(x, digits: int = CSV_DIGITS) -> str:
    if x is None or isinstance(x, bool) or not isinstance(x, (int, float)) or \
            not math.isfinite(x):
        return ""
    if isinstance(x, int):
        return str(x)
    return f"{float(x):.{digits}g}"


def _csv_coord(x, decimals: int) -> str:
    if not isinstance(x, (int, float)) or isinstance(x, bool) or not math.isfinite(x):
        return ""
    return f"{float(x):.{decimals}f}"


def _csv_unit(scan: ScanView) -> str:
    c = scan.header.coordinate
    return (c.unit if c is not None and c.unit else "coordinate unit")


def change_csv(scan: ScanView) -> tuple:
    """Header and rows of changes.csv (one row per change; units in the header)."""
    u = _csv_unit(scan)
    header = ("change", "frame_before", "frame_after", f"bracket_low [{u}]",
              f"bracket_high [{u}]", f"estimate [{u}]", f"uncertainty [{u}]",
              "uncertainty_source", "estimate_method", "mechanism", "events", "new_frames",
              "bisection_new_frames", "resolved", "grid_spacing [angstrom]", "note")
    rows = []
    for k, change in enumerate(scan.changes, 1):
        q = scan.quoted(change)
        d = max(change_decimals(change), estimate_decimals(scan, change)) + 1
        info = change.refine if isinstance(change.refine, dict) else {}
        res = change.resolution
        spacing = max(res.spacing_bohr) if res is not None and res.spacing_bohr else None
        rows.append((
            str(k), *scan.result.frame_names(change),
            _csv_coord(change.bracket[0], d), _csv_coord(change.bracket[1], d),
            _csv_coord(scan.estimate(change), d), fmt_uncertainty(q.value) if q else "",
            UNCERTAINTY_SOURCES.get(q.source, q.source) if q else "",
            method_words(change), change.mechanism, change_words(scan, change),
            _csv_number(change.evaluations), _csv_number(info.get("bisection_evaluations")),
            "" if res is None or res.resolved is None else ("yes" if res.resolved else "no"),
            _csv_number(spacing * BOHR_IN_ANGSTROM if spacing else None, 4),
            str(change.note or "")))
    return header, rows


def critical_point_csv(scan: ScanView) -> tuple:
    """Header and rows of critical_points.csv: one row per CP per frame."""
    u = _csv_unit(scan)
    header = ("frame", f"coordinate [{u}]", "cp_id_in_frame", "track", "kind", "rank",
              "signature", "x [angstrom]", "y [angstrom]", "z [angstrom]", "rho [a.u.]",
              "laplacian [a.u.]", "lambda1 [a.u.]", "lambda2 [a.u.]", "lambda3 [a.u.]",
              "ellipticity", "atoms")
    d = coord_decimals(*[f.value for f in scan.frames]) + 1
    rows = []
    for f in scan.frames:
        for cp in f.critical_points:
            ev = list(cp.eigenvalues or ()) + [None] * 3
            atoms = " ".join(scan.label(a, f) for a in cp.atoms) if cp.kind != "cage" else ""
            pos = np.asarray(cp.position_bohr, float) * BOHR_IN_ANGSTROM
            rows.append((
                f.name, _csv_coord(f.value, d), cp.id, str(cp.track or ""), cp.kind,
                _csv_number(cp.rank), _csv_number(cp.signature),
                *(_csv_coord(float(x), POSITION_DECIMALS + 1) for x in pos),
                _csv_number(cp.rho), _csv_number(cp.laplacian), _csv_number(ev[0]),
                _csv_number(ev[1]), _csv_number(ev[2]), _csv_number(cp.ellipticity), atoms))
    return header, rows


def write_csv(path, header, rows) -> None:
    """Write a CSV file atomically (comma-separated, minimal quoting, ``\\n`` line ends)."""
    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\n")
    writer.writerow(header)
    writer.writerows(rows)
    write_text_atomic(path, buf.getvalue())
