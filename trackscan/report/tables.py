"""Tables of the report: change summary, resolution limits, per-frame table, CSV files.

The display tables (:class:`~trackscan.report.document.Table`) hold strings at
a stated precision; the CSV files hold the numbers of scan.json unrounded
(positions converted to Å), one row per change (``changes.csv``) and one row
per critical point per frame (``critical_points.csv``).
"""

from __future__ import annotations

import csv
import io
import json

import numpy as np

from trackscan.io.atomic import write_text_atomic
from trackscan.report.change_geometry import coalescing_pair
from trackscan.report.document import Table
from trackscan.report.scan_data import CP_KINDS, ScanData, frame_energy
from trackscan.report.wording import (change_decimals, change_words, coord_decimals,
                                      estimate_decimals, describe_value, fmt_coord,
                                      fmt_sig, fmt_uncertainty, resolution_words,
                                      uncertainties, uncertainty_of)
from trackscan.units import BOHR_IN_ANGSTROM

__all__ = ["summary_table", "pair_table", "resolution_table", "frame_table", "warning_table",
           "settings_table", "change_csv_rows", "critical_point_csv_rows", "write_csv",
           "CHANGES_CSV_HEADER", "CRITICAL_POINTS_CSV_HEADER"]

CHANGES_CSV_HEADER = ("change", "frame_before", "frame_after", "bracket_low", "bracket_high",
                      "estimate", "uncertainty", "uncertainty_origin", "half_bracket",
                      "estimate_method", "mechanism", "events", "evaluations",
                      "bisection_evaluations", "structure_type_changed", "resolution", "note")

CRITICAL_POINTS_CSV_HEADER = ("frame", "coordinate", "id", "track", "kind", "rank", "signature",
                              "x_angstrom", "y_angstrom", "z_angstrom", "rho", "laplacian",
                              "lambda1", "lambda2", "lambda3", "ellipticity", "atoms")


def _unit(scan: ScanData) -> str:
    return f" ({scan.unit_symbol})" if scan.unit_symbol else ""


def summary_table(scan: ScanData) -> Table:
    """One row per change: bracket, estimate ± uncertainty, mechanism, events, evaluations."""
    u = _unit(scan)
    header = ("#", f"Bracket{u}", f"Estimate ± uncertainty{u}", "Estimate method",
              "Mechanism", "Events", "Evaluations")
    rows = []
    for k, change in enumerate(scan.changes, 1):
        d = change_decimals(change)
        bracket = change.get("bracket")
        btxt = (f"{fmt_coord(bracket[0], d)} → {fmt_coord(bracket[1], d)}"
                if bracket else "—")
        est = change.get("estimate")
        etxt = fmt_coord(est, estimate_decimals(change))
        spread = uncertainties(change)
        if etxt != "—" and spread:
            etxt += " " + "; ".join(f"± {fmt_uncertainty(unc)} ({label})"
                                    for unc, label in spread)
        mech = str(change.get("mechanism") or "—")
        if change.get("mechanism_candidate") and change["mechanism_candidate"] != mech:
            mech += f" (looks like {change['mechanism_candidate']})"
        evals = describe_value(change.get("evaluations"))
        bis = (change.get("refine") or {}).get("bisection_evaluations") \
            if isinstance(change.get("refine"), dict) else None
        if isinstance(bis, int) and evals != "—":
            evals += f" (bisection: {bis})"
        rows.append((str(k), btxt, etxt, str(change.get("estimate_method") or "—"),
                     mech, change_words(change, scan), evals))
    return Table("summary", header, tuple(rows),
                 "Structural changes along the scan. The bracket runs from the last frame "
                 "with the old structure to the first frame with the new one.")


def resolution_table(scan: ScanData) -> Table:
    """Per change: what limits how close to the catastrophe the grid can see."""
    header = ("#", "Resolution limit (from scan.json)", "Structure type changed", "Note")
    rows = []
    for k, change in enumerate(scan.changes, 1):
        rtxt = resolution_words(change, scan)
        stc = change.get("structure_type_changed")
        rows.append((str(k), rtxt, describe_value(stc) if stc is not None else "—",
                     str(change.get("note") or "—")))
    return Table("resolution", header, tuple(rows),
                 "Grid spacing and printed precision limit how close to a catastrophe "
                 "a grid can see; the limit of each change as estimated by the analysis.")


def pair_table(scan: ScanData, change, number: int):
    """The two CPs that coalesce in a fold, in the last frame where both exist.

    Returns None when the change has no coalescing pair.
    """
    pair = coalescing_pair(scan, change)
    if pair is None:
        return None
    a, b, side = pair
    frame = scan.change_frames(change)[0 if side == "before" else 1]
    header = ("CP", "Track", "Atoms", "x (Å)", "y (Å)", "z (Å)", "ρ (a.u.)", "∇²ρ (a.u.)",
              "λ1 (a.u.)", "λ2 (a.u.)", "λ3 (a.u.)", "ε")
    rows = []
    for cp in (a, b):
        pos = cp.get("position_bohr") or [None] * 3
        ev = list(cp.get("eigenvalues") or []) + [None] * 3
        atoms = scan.labels(cp.get("atoms"), frame) if cp.get("kind") != "cage" else "—"
        rows.append((f"{cp.get('kind')} CP {cp.get('id')}", describe_value(cp.get("track")),
                     atoms or "—",
                     *(fmt_coord(None if x is None else x * BOHR_IN_ANGSTROM, 4)
                       for x in pos[:3]),
                     fmt_sig(cp.get("rho")), fmt_sig(cp.get("laplacian")),
                     fmt_sig(ev[0]), fmt_sig(ev[1]), fmt_sig(ev[2]),
                     fmt_sig(cp.get("ellipticity"))))
    d = np.linalg.norm(np.subtract(a["position_bohr"], b["position_bohr"])) * BOHR_IN_ANGSTROM
    where = "last frame before" if side == "before" else "first frame after"
    return Table(f"pair{number}", header, tuple(rows),
                 f"Change {number}: the pair that coalesces, in frame {frame.get('index')} "
                 f"(the {where} the change), {fmt_sig(d, 3)} Å apart.")


def _frame_warnings(frame, scan: ScanData) -> list:
    out = [str(w) for w in frame.get("warnings") or []]
    if frame.get("complete") is False:
        out.insert(0, "incomplete: critical-point search did not satisfy Poincaré–Hopf")
    for k, change in enumerate(scan.changes, 1):
        if change.get("mechanism") != "unresolved":
            continue
        between = change.get("between") or []
        if frame.get("index") in between:
            note = change.get("note") or "no note"
            out.append(f"change {k} unresolved: {note}")
    return out


def _spacing(frame):
    """Grid spacing (bohr) of a frame: one number, or the three axes when they differ."""
    h = (frame.get("resolution") or {}).get("spacing_bohr")
    if h is None:
        h = (frame.get("grid") or {}).get("spacing_bohr")
    if isinstance(h, (list, tuple)) and h and all(isinstance(x, (int, float)) for x in h):
        return h[0] if max(h) - min(h) <= 1e-9 * max(abs(x) for x in h) else list(h)
    return h if isinstance(h, (int, float)) else None


def frame_table(scan: ScanData) -> Table:
    """One row per frame: counts, Poincaré–Hopf, energy, warnings."""
    frames = scan.frames
    values = [f.get("value") for f in frames]
    d = coord_decimals(*values)
    has_energy = any(frame_energy(f) is not None for f in frames)
    has_spacing = any(_spacing(f) is not None for f in frames)
    header = ["Frame", f"Coordinate{_unit(scan)}", "Structure", "n", "nna", "b", "r", "c",
              "deg.", "n − b + r − c", "Expected", "Holds"]
    if has_spacing:
        header.append("Grid spacing (bohr)")
    has_refined = any(isinstance(f.get("refine"), dict) for f in frames)
    if has_refined:
        header.append("Added by")
    if has_energy:
        header.append("Energy (hartree)")
    header.append("Warnings")
    rows = []
    for f in frames:
        counts = f.get("counts") or {}
        ph = f.get("poincare_hopf") or {}
        row = [describe_value(f.get("index")), fmt_coord(f.get("value"), d),
               describe_value(f.get("structure"))]
        row += [describe_value(counts.get(k, 0 if counts else None)) for k in CP_KINDS]
        row += [describe_value(ph.get("value")), describe_value(ph.get("expected")),
                describe_value(ph.get("holds"))]
        if has_spacing:
            row.append(describe_value(_spacing(f), 4))
        if has_refined:
            info = f.get("refine")
            row.append(f"refinement, round {info.get('round', '?')}" if isinstance(info, dict)
                       else "scan")
        if has_energy:
            row.append(fmt_sig(frame_energy(f), 10))
        row.append("; ".join(_frame_warnings(f, scan)) or "—")
        rows.append(tuple(row))
    return Table("frames", tuple(header), tuple(rows),
                 "Per-frame results: critical points by kind (n nuclear, nna non-nuclear "
                 "attractors, b bond, r ring, c cage, deg. degenerate) and the "
                 "Poincaré–Hopf relation.")


def _warning_details(w: dict) -> str:
    parts = []
    if w.get("frames"):
        parts.append("frames " + ", ".join(str(x) for x in w["frames"]))
    if w.get("indicators"):
        parts.append("indicators: " + ", ".join(str(x).replace("_", " ") for x in w["indicators"]))
    if isinstance(w.get("projected"), dict) and w["projected"]:
        parts.append("projected zero: " + ", ".join(
            f"{str(k).replace('_', ' ')} at {fmt_sig(v, 5)}"
            for k, v in sorted(w["projected"].items())))
    if w.get("change_between"):
        parts.append("followed by the change between frames "
                     + " and ".join(str(x) for x in w["change_between"]))
    known = {"message", "note", "text", "frames", "indicators", "projected", "change_between",
             "atoms"}
    rest = {k: v for k, v in w.items() if k not in known}
    if rest:
        parts.append(describe_value(rest))
    return "; ".join(parts) or "—"


def warning_table(scan: ScanData):
    """Early warnings of the scan as a table, or None when there are none."""
    warnings = scan.early_warnings
    if not warnings:
        return None
    rows = []
    for w in warnings:
        if isinstance(w, dict):
            text = w.get("message") or w.get("note") or w.get("text") or describe_value(w)
            atoms = scan.labels(w["atoms"]) if w.get("atoms") else "—"
            rows.append((str(text), atoms, _warning_details(w)))
        else:
            rows.append((describe_value(w), "—", "—"))
    return Table("early_warnings", ("Warning", "Atoms", "Details"), tuple(rows),
                 "Signs that the structure is about to change (whether or not a change "
                 "happens inside the scan).")


def settings_table(scan: ScanData, *, key: str = "settings", caption: str = "Analysis settings."):
    """Settings ``scan.KEY`` as key/value rows, or None when scan.json has none."""
    settings = scan.scan.get(key)
    if not isinstance(settings, dict) or not settings:
        return None
    rows = tuple((str(k), describe_value(v, 6)) for k, v in sorted(settings.items()))
    return Table(key, ("Setting", "Value"), rows, caption)


def _csv_value(x):
    if x is None:
        return ""
    if isinstance(x, bool):
        return "true" if x else "false"
    if isinstance(x, float):
        return repr(x)
    return str(x)


def change_csv_rows(scan: ScanData) -> list:
    """Rows of changes.csv (numbers as in scan.json)."""
    rows = []
    for k, change in enumerate(scan.changes, 1):
        between = change.get("between") or [None, None]
        bracket = change.get("bracket") or [None, None]
        unc, origin = uncertainty_of(change)
        half = (abs(bracket[1] - bracket[0]) / 2.0
                if all(isinstance(b, (int, float)) for b in bracket) else None)
        info = change.get("refine") if isinstance(change.get("refine"), dict) else {}
        res = change.get("resolution")
        rows.append(tuple(_csv_value(v) for v in (
            k, between[0], between[1], bracket[0], bracket[1], change.get("estimate"),
            unc, origin, half, change.get("estimate_method"), change.get("mechanism"),
            change_words(change, scan), change.get("evaluations"),
            info.get("bisection_evaluations"), change.get("structure_type_changed"),
            None if res is None else json.dumps(res, sort_keys=True, ensure_ascii=False),
            change.get("note"))))
    return rows


def critical_point_csv_rows(scan: ScanData) -> list:
    """Rows of critical_points.csv: one per CP per frame, positions in Å."""
    rows = []
    for f in scan.frames:
        for cp in f.get("critical_points") or []:
            pos = cp.get("position_bohr") or [None] * 3
            ev = list(cp.get("eigenvalues") or []) + [None] * 3
            atoms = " ".join(scan.label(a, f) for a in cp.get("atoms") or []) \
                if cp.get("kind") != "cage" else ""
            rows.append(tuple(_csv_value(v) for v in (
                f.get("index"), f.get("value"), cp.get("id"), cp.get("track"), cp.get("kind"),
                cp.get("rank"), cp.get("signature"),
                *(None if p is None else p * BOHR_IN_ANGSTROM for p in pos[:3]),
                cp.get("rho"), cp.get("laplacian"), ev[0], ev[1], ev[2],
                cp.get("ellipticity"), atoms)))
    return rows


def write_csv(path, header, rows) -> None:
    """Write a CSV file atomically (comma-separated, minimal quoting, ``\\n`` line ends)."""
    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\n")
    writer.writerow(header)
    writer.writerows(rows)
    write_text_atomic(path, buf.getvalue())
