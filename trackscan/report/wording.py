"""How the report says things: numbers at a stated precision, events in the shared words.

Every table cell of the report is made here or in :mod:`trackscan.report.tables`,
so the HTML and the Markdown show the same strings.  The words themselves
come from :mod:`trackscan.vocabulary`.
"""

from __future__ import annotations

import math

from trackscan.model import Change, Event
from trackscan.report.scan_view import ScanView, cp_by_track
from trackscan.vocabulary import (ESTIMATE_METHODS, MECHANISMS, UNCERTAINTY_SOURCES,
                                  event_phrase, events_phrase, plural)

__all__ = ["fmt_coord", "coord_decimals", "change_decimals", "estimate_decimals", "fmt_sig",
           "fmt_uncertainty", "event_words", "change_words", "resolution_words",
           "describe_value", "refine_words", "estimate_text", "method_words", "SIG_DIGITS"]

#: Significant digits of densities, Laplacians and eigenvalues in tables and CSV files.
SIG_DIGITS = 4

_MORSE = {"nuclear": 0, "non_nuclear": 0, "bond": 1, "ring": 2, "cage": 3,
          "attractor": 0}


def _finite(x) -> bool:
    return isinstance(x, (int, float)) and not isinstance(x, bool) and math.isfinite(x)


def coord_decimals(*values, width=None) -> int:
    """Decimals needed to show coordinate values so a bracket's ends stay distinct.

    Between 3 and 10: two more than the decade of `width` (the smallest
    difference that must stay visible; by default the smallest gap between
    the `values`).
    """
    if width is None:
        finite = sorted(float(v) for v in values if _finite(v))
        diffs = [b - a for a, b in zip(finite, finite[1:]) if b > a]
        width = min(diffs) if diffs else None
    if not width or not _finite(width) or width <= 0:
        return 4
    return int(min(10, max(3, math.ceil(-math.log10(width)) + 2)))


def change_decimals(change: Change) -> int:
    """Decimals for the coordinate values of one change (bracket ends stay distinct)."""
    return coord_decimals(*change.bracket, width=change.width or None)


def estimate_decimals(scan: ScanView, change: Change) -> int:
    """Decimals of an estimate: those of its ±'s second significant digit, at least 2."""
    q = scan.quoted(change)
    if q is not None and q.value > 0:
        return int(min(10, max(2, 1 - math.floor(math.log10(q.value)))))
    return change_decimals(change)


def fmt_coord(x, decimals: int = 4) -> str:
    """A coordinate value with fixed decimals (``"—"`` when missing)."""
    if not _finite(x):
        return "—"
    text = f"{float(x):.{decimals}f}"
    return text[1:] if text.startswith("-") and not text.strip("-0.") else text


def fmt_sig(x, digits: int = SIG_DIGITS) -> str:
    """A number with `digits` significant digits (``"—"`` if missing)."""
    if isinstance(x, bool) or not _finite(x):
        return "—"
    if isinstance(x, int):
        return str(x)
    return f"{float(x):.{digits}g}"


def fmt_uncertainty(u) -> str:
    """An uncertainty with two significant digits."""
    return f"{float(u):.2g}" if _finite(u) else "—"


def estimate_text(scan: ScanView, change: Change, *, unit: bool = True) -> str:
    """``"65.86 ± 0.047°"``: the estimate and the one quoted ±."""
    q = scan.quoted(change)
    d = estimate_decimals(scan, change)
    text = fmt_coord(scan.estimate(change), d)
    if q is not None:
        text += f" ± {fmt_uncertainty(q.value)}"
    return scan.with_unit(text) if unit else text


def method_words(change: Change) -> str:
    m = change.estimate_method
    return ESTIMATE_METHODS.get(m, m or "—")


def uncertainty_words(scan: ScanView, change: Change) -> str:
    q = scan.quoted(change)
    if q is None:
        return "—"
    text = UNCERTAINTY_SOURCES.get(q.source, q.source)
    if q.resolution_limited:
        text += "; the frames beside the bracket are below the grid's resolution"
    return text


def describe_value(value, digits: int = 5) -> str:
    """A short text for any JSON value (numbers at `digits` significant digits)."""
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, (int, float)):
        return fmt_sig(value, digits)
    if value is None:
        return "—"
    if isinstance(value, str):
        return value
    if isinstance(value, (list, tuple)):
        return ", ".join(describe_value(v, digits) for v in value)
    return str(value)


def _partner_words(scan: ScanView, change: Change, event: Event, frame) -> str:
    """What a CP folded with, for the higher-index member of a fold pair only."""
    if event.fold_with is None:
        return ""
    partner = next((e for e in change.events if e.track == event.fold_with), None)
    kind = event.kind.partition("_")[0]
    pkind = partner.kind.partition("_")[0] if partner is not None else None
    cp = cp_by_track(frame, event.fold_with)
    if pkind is None and cp is not None:
        pkind = cp.kind
    if pkind is None or _MORSE.get(pkind, 0) >= _MORSE.get(kind, 0):
        return ""
    if pkind == "bond":
        atoms = partner.atoms if partner is not None and partner.atoms else \
            (cp.atoms if cp is not None else ())
        return f"bond CP of {scan.labels(atoms, frame)}" if atoms else "bond CP"
    return f"{pkind} CP"


def event_words(scan: ScanView, change: Change, event: Event) -> str:
    """One event in the shared words, e.g. ``"bond path C1–C2 broken"``."""
    before, after = scan.change_frames(change)
    frame = after if event.is_birth else before
    if event.kind == "bond_switched":
        return event_phrase(event.kind,
                            atoms=scan.labels(event.atoms_before or event.atoms, before),
                            atoms_after=scan.labels(event.atoms_after, after))
    kind = event.kind.partition("_")[0]
    sep = ", " if kind == "attractor" else "–"
    atoms = scan.labels(event.atoms, frame, sep=sep) if event.atoms else ""
    if kind == "cage":
        atoms = ""
    return event_phrase(event.kind, atoms=atoms,
                        partner=_partner_words(scan, change, event, frame))


def change_words(scan: ScanView, change: Change) -> str:
    """All events of a change, joined by ``"; "``."""
    return events_phrase(event_words(scan, change, e) for e in change.events)


def mechanism_words(change: Change) -> str:
    return MECHANISMS.get(change.mechanism, change.mechanism)


def resolution_words(scan: ScanView, change: Change) -> str:
    """The grid's resolution limit for one change, in words.

    For each fold pair it also gives how close to the fold the grid can
    follow the pair, from the fold normal form (METHODS.md section 2):
    Δρ ∝ d³ and d² ∝ |s − s*|, so the pair stays above the floor down to
    ``d_min = d · margin^(-1/3)``, that is to within
    ``|s_k − s*| · margin^(-2/3)`` of the estimate s*.
    """
    from trackscan.units import BOHR_IN_ANGSTROM

    res = change.resolution
    if res is None:
        return "not given by the analysis"
    parts = []
    spacing = [s for s in res.spacing_bohr or () if _finite(s)]
    if spacing:
        parts.append(f"grid spacing {fmt_sig(max(spacing) * BOHR_IN_ANGSTROM, 3)} Å")
    estimate = scan.estimate(change)
    for pair in res.pairs:
        frame = scan.frame(pair.frame)
        who = " and ".join(_cp_name(scan, frame, t) for t in pair.tracks or ())
        text = f"{who} in frame {scan.result.frame_name(pair.frame)}"
        sep, drho, floor = pair.separation_bohr, pair.rho_difference, pair.rho_floor
        if _finite(sep):
            text += f": {fmt_sig(sep * BOHR_IN_ANGSTROM, 3)} Å apart"
        if _finite(drho) and _finite(floor):
            text += (f", their ρ differ by {fmt_sig(drho, 3)} a.u. against a noise floor of "
                     f"{fmt_sig(floor, 3)} a.u.")
        margin = pair.margin
        if _finite(margin) and margin > 0 and _finite(sep):
            d_min = fmt_sig(sep * margin ** (-1 / 3) * BOHR_IN_ANGSTROM, 2)
            reach = None
            if frame is not None and _finite(frame.value):
                reach = fmt_sig(abs(frame.value - estimate) * margin ** (-2 / 3), 2)
            if margin >= 1:
                text += f"; resolvable down to d ≈ {d_min} Å"
                if reach is not None:
                    text += (f", i.e. to within ≈ {scan.with_unit(reach)} of the estimate "
                             "(fold normal form)")
            else:
                text += f"; already below the floor: the grid follows the pair only while d ≳ {d_min} Å"
                if reach is not None:
                    text += (f", i.e. until ≈ {scan.with_unit(reach)} from the estimate (fold "
                             "normal form); closer frames cannot tell the pair from noise")
        parts.append(text)
    if not res.pairs:
        floors = [f for f in res.rho_floor or () if _finite(f)]
        if floors:
            parts.append(f"density noise floor {fmt_sig(max(floors), 2)} a.u.")
        parts.append("no fold pair: the bracket itself is the limit")
    if res.resolved is not None:
        parts.append("resolved" if res.resolved else "NOT resolved: below the noise floor")
    return "; ".join(parts)


def _cp_name(scan: ScanView, frame, track) -> str:
    cp = cp_by_track(frame, track)
    if cp is None:
        return f"CP {track}"
    if cp.kind == "bond" and cp.atoms:
        return f"bond CP of {scan.labels(cp.atoms, frame)}"
    return f"{cp.kind.replace('_', '-')} CP"


def refine_words(scan: ScanView, change: Change) -> str:
    """What refinement did for a change, in one sentence (empty when it did nothing)."""
    info = change.refine if isinstance(change.refine, dict) else None
    if not info:
        return ""
    d = change_decimals(change)
    parts = []
    base = info.get("initial_bracket")
    n = change.evaluations
    if isinstance(base, (list, tuple)) and len(base) == 2:
        text = (f"Refinement narrowed the bracket from {fmt_coord(base[0], d)}–"
                f"{scan.with_unit(fmt_coord(base[1], d))} to {fmt_coord(change.bracket[0], d)}–"
                f"{scan.with_unit(fmt_coord(change.bracket[1], d))}")
        if isinstance(n, int):
            text += f" with {plural(n, 'new frame')}"
        parts.append(text)
    bis = info.get("bisection_evaluations")
    if isinstance(bis, int) and _finite(info.get("tolerance")):
        parts.append(f"plain bisection would need {plural(bis, 'new frame')} for the "
                     f"tolerance {scan.with_unit(fmt_sig(info['tolerance'], 3))}")
    lim = info.get("resolution_limit")
    if _finite(lim):
        parts.append(f"refinement stopped where the grids cannot narrow the change further "
                     f"(limited by grid resolution: ± {scan.with_unit(fmt_uncertainty(lim))})")
    elif "converged" in info:
        parts.append("tolerance reached" if info["converged"] else "tolerance NOT reached")
    fit = change.fit
    if isinstance(fit, dict) and fit.get("outside_bracket"):
        parts.append("the fold extrapolation fell outside the bracket and was not used")
    return ("; ".join(parts) + ".") if parts else ""
