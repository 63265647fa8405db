"""How the report says things: numbers at a stated precision, events in plain words.

Every table cell of the report is made here or in :mod:`trackscan.report.tables`,
so the HTML and the Markdown show the same strings.
"""

from __future__ import annotations

import math

from trackscan.report.scan_data import ScanData, cp_by_id

__all__ = ["fmt_coord", "coord_decimals", "change_decimals", "estimate_decimals",
           "fmt_sig", "fmt_uncertainty", "event_words",
           "change_words", "resolution_words", "describe_value", "pretty_key", "uncertainty_of",
           "uncertainties", "refine_words"]

def coord_decimals(*values, width=None) -> int:
    """Decimals needed to show coordinate values so a bracket's ends stay distinct.

    Parameters
    ----------
    *values : float
        Values that will be shown together (e.g. bracket ends and estimate).
    width : float, optional
        Smallest difference that must remain visible (e.g. bracket width).

    Returns
    -------
    int
        Between 3 and 10: two more than the decade of `width`.
    """
    if width is None:
        finite = sorted(float(v) for v in values if _finite(v))
        diffs = [b - a for a, b in zip(finite, finite[1:]) if b > a]
        width = min(diffs) if diffs else None
    if not width or not _finite(width) or width <= 0:
        return 4
    return int(min(10, max(3, math.ceil(-math.log10(width)) + 2)))


def change_decimals(change) -> int:
    """Decimals used for the coordinate values of one change (bracket ends stay distinct)."""
    bracket = change.get("bracket") or []
    width = abs(bracket[1] - bracket[0]) if len(bracket) == 2 else None
    return coord_decimals(*bracket, width=width)


def estimate_decimals(change) -> int:
    """Decimals for a change's estimate: enough for its bracket and its uncertainty."""
    d = change_decimals(change)
    for unc, _ in uncertainties(change):
        if unc > 0:
            d = max(d, min(10, 1 - math.floor(math.log10(unc))))
    return d


def fmt_coord(x, decimals: int = 4) -> str:
    """A coordinate value with fixed decimals (``"—"`` when missing)."""
    if not _finite(x):
        return "—"
    text = f"{float(x):.{decimals}f}"
    return text[1:] if text.startswith("-") and not text.strip("-0.") else text


def fmt_sig(x, digits: int = 5) -> str:
    """A quantity in atomic units with `digits` significant digits (``"—"`` if missing)."""
    if isinstance(x, bool) or not _finite(x):
        return "—"
    if isinstance(x, int):
        return str(x)
    return f"{float(x):.{digits}g}"


def fmt_uncertainty(u) -> str:
    """An uncertainty with two significant digits."""
    if not _finite(u):
        return "—"
    return f"{float(u):.2g}"


_UNCERTAINTY_LABELS = {"model_error": "model", "half_width": "half bracket"}


def uncertainties(change) -> list:
    """Uncertainties of a change's estimate: ``[(value, label), ...]``, primary first.

    A number in ``uncertainty`` is one ("estimated"); a dict (refinement:
    ``model_error``, ``half_width``) gives one entry per finite value, the
    model's own error first.  Without any, half the bracket width.
    """
    u = change.get("uncertainty")
    out = []
    if isinstance(u, dict):
        keys = sorted((k for k in u if _finite(u[k])),
                      key=lambda k: (k != "model_error", k != "half_width", str(k)))
        out = [(abs(float(u[k])), _UNCERTAINTY_LABELS.get(k, pretty_key(k))) for k in keys]
    elif _finite(u):
        out = [(abs(float(u)), "estimated")]
    if not out:
        bracket = change.get("bracket")
        if isinstance(bracket, (list, tuple)) and len(bracket) == 2 and all(map(_finite, bracket)):
            out = [(abs(float(bracket[1]) - float(bracket[0])) / 2.0, "half bracket")]
    return out


def uncertainty_of(change):
    """(uncertainty, origin) of a change's estimate, the primary one, or (None, "")."""
    u = uncertainties(change)
    return u[0] if u else (None, "")


def pretty_key(key) -> str:
    """``"spacing_bohr"`` -> ``"spacing (bohr)"``."""
    key = str(key)
    for suffix, unit in (("_bohr", "bohr"), ("_angstrom", "Å"), ("_au", "a.u."),
                         ("_hartree", "hartree"), ("_kcal_per_mol", "kcal/mol")):
        if key.endswith(suffix):
            return f"{key[: -len(suffix)].replace('_', ' ')} ({unit})"
    return key.replace("_", " ")


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
    if isinstance(value, dict):
        return "; ".join(f"{pretty_key(k)}: {describe_value(v, digits)}"
                         for k, v in sorted(value.items()))
    return str(value)


def event_words(event, change, scan: ScanData) -> str:
    """One event of a change in plain words, e.g. ``"bond path C1–C2 breaks"``.

    Parameters
    ----------
    event : dict
        An element of the change's ``events``.
    change : dict
        The change (its mechanism and other events decide the fold wording).
    scan : ScanData
    """
    before, after = scan.change_frames(change)
    kind = str(event.get("kind", "event"))
    frame = after if kind.endswith("_formed") else before
    if kind in ("bond_formed", "bond_broken"):
        verb = "forms" if kind == "bond_formed" else "breaks"
        return f"bond path {scan.labels(event.get('atoms'), frame)} {verb}"
    if kind == "bond_switched":
        old = scan.labels(event.get("atoms_before") or event.get("atoms"), before)
        new = scan.labels(event.get("atoms_after"), after)
        return f"bond path {old} switches to {new}"
    if kind in ("ring_formed", "ring_lost", "cage_formed", "cage_lost"):
        what, _, how = kind.partition("_")
        text = f"{what} CP"
        cp = cp_by_id(frame, event.get("cp")) if event.get("cp") is not None else None
        atoms = event.get("atoms") or (cp or {}).get("atoms")
        if what == "ring" and atoms:
            text += f" (ring {scan.labels(atoms, frame)})"
        partner = _fold_partner(event, change, frame, what, scan)
        if partner is not None:
            verb = "is born together with" if how == "formed" else "annihilates with"
            return f"{text} {verb} the {partner} (fold)"
        return f"{text} {'appears' if how == 'formed' else 'disappears'}"
    if kind in ("attractor_formed", "attractor_lost"):
        verb = "appears" if kind == "attractor_formed" else "disappears"
        where = ""
        if event.get("atoms"):
            where = f" between {scan.labels(event['atoms'], frame, sep=', ')}"
        return f"non-nuclear attractor{where} {verb}"
    extra = f" ({scan.labels(event['atoms'], frame)})" if event.get("atoms") else ""
    return kind.replace("_", " ") + extra


def _fold_partner(event, change, frame, what, scan):
    """Words for the lower-index CP a ring or cage CP coalesces with, or None.

    The partner is the CP whose track is the event's ``fold_with`` (looked
    up in the frame, then among the change's events); without it, in a fold
    change, the partner kind implied by the other events.  Only the
    higher-index member of a pair names its partner (a ring names its bond
    CP, a cage its ring CP), so a pair is told once.
    """
    lower = "bond" if what == "ring" else "ring"
    track = event.get("fold_with")
    partner_kind, partner_atoms = None, None
    if track is not None:
        for cp in (frame or {}).get("critical_points") or []:
            if cp.get("track") == track:
                partner_kind, partner_atoms = cp.get("kind"), cp.get("atoms")
                break
        else:
            for e in change.get("events") or []:
                if e.get("track") == track:
                    partner_kind = str(e.get("kind", "")).partition("_")[0]
                    partner_atoms = e.get("atoms")
                    break
    if partner_kind is None:
        kinds = {str(e.get("kind")).partition("_")[0] for e in change.get("events") or []}
        if change.get("mechanism") != "fold" and track is None:
            return None
        higher = "cage" if what == "ring" else None
        if higher in kinds:
            return None
        partner_kind = lower if (lower in kinds or track is not None) else None
    if partner_kind != lower:
        return None
    if lower == "bond" and partner_atoms:
        return f"bond CP of {scan.labels(partner_atoms, frame)}"
    return f"{lower} CP"


def resolution_words(change, scan: ScanData) -> str:
    """The grid's resolution limit for one change, in words.

    Reads the change's ``resolution`` (tracking: ``spacing_bohr``,
    ``rho_floor``, ``pairs`` with ``separation_bohr``, ``rho_difference``,
    ``rho_floor``, ``margin``; ``resolved``).  For each coalescing pair it
    also gives how close to the fold the grid can follow the pair, from the
    fold normal form (METHODS.md section 2): Δρ ∝ d³ and d² ∝ |s − s*|, so
    the pair stays above the floor down to ``d_min = d · margin^(-1/3)``,
    that is to within ``|s_k − s*| · margin^(-2/3)`` of the estimate s*.
    """
    res = change.get("resolution")
    if res in (None, {}, ""):
        return "not given by the analysis"
    if not isinstance(res, dict):
        return describe_value(res)
    parts = []
    spacing = res.get("spacing_bohr")
    if spacing is not None:
        parts.append(f"grid spacing {describe_value(spacing, 3)} bohr (frames before, after)")
    estimate = change.get("estimate")
    d = change_decimals(change)
    for pair in res.get("pairs") or []:
        if not isinstance(pair, dict):
            continue
        who = "/".join(str(t) for t in pair.get("tracks") or pair.get("cps") or [])
        frame = scan.frame(pair.get("frame"))
        text = f"pair {who} in frame {pair.get('frame')}"
        sep, drho, floor = (pair.get("separation_bohr"), pair.get("rho_difference"),
                            pair.get("rho_floor"))
        if _finite(sep):
            text += f": {fmt_sig(sep, 3)} bohr apart"
        if _finite(drho) and _finite(floor):
            text += f", Δρ = {fmt_sig(drho, 3)} a.u. against a floor of {fmt_sig(floor, 3)} a.u."
        margin = pair.get("margin")
        if _finite(margin) and margin > 0:
            text += f" (margin {fmt_sig(margin, 3)})"
            if _finite(sep):
                d_min = fmt_sig(sep * margin ** (-1 / 3), 2)
                reach = None
                if frame is not None and _finite(frame.get("value")) and _finite(estimate):
                    reach = fmt_sig(abs(frame["value"] - estimate) * margin ** (-2 / 3), 2)
                unit = f" {scan.unit_symbol}" if scan.unit_symbol else ""
                if margin >= 1:
                    text += f"; resolvable down to d ≈ {d_min} bohr"
                    if reach is not None:
                        text += (f", i.e. to within ≈ {reach}{unit} of the fold taken at the "
                                 "estimate (fold normal form)")
                else:
                    text += (f"; already below the floor: the grid follows the pair only while "
                             f"d ≳ {d_min} bohr")
                    if reach is not None:
                        text += (f", i.e. until ≈ {reach}{unit} from the fold taken at the "
                                 "estimate (fold normal form); frames closer than that cannot "
                                 "tell the pair from noise")
        parts.append(text)
    if not res.get("pairs"):
        floors = res.get("rho_floor")
        if floors is not None:
            parts.append(f"density floor {describe_value(floors, 2)} a.u.")
        parts.append("no coalescing pair: the bracket itself is the limit")
    if "resolved" in res:
        parts.append("resolved" if res["resolved"] else "NOT resolved: below the floor")
    known = {"spacing_bohr", "pairs", "resolved", "rho_floor", "margin", "interpolation_floor"}
    rest = {k: v for k, v in res.items() if k not in known}
    if rest:
        parts.append(describe_value(rest, 4))
    return "; ".join(parts)


def refine_words(change, scan: ScanData) -> str:
    """What refinement did for a change, in one sentence (empty when it did nothing)."""
    info = change.get("refine")
    if not isinstance(info, dict):
        return ""
    unit = f" {scan.unit_symbol}" if scan.unit_symbol else ""
    d = change_decimals(change)
    parts = []
    base = info.get("initial_bracket")
    bracket = change.get("bracket")
    n = change.get("evaluations")
    if isinstance(base, (list, tuple)) and len(base) == 2 and bracket:
        text = (f"Refinement narrowed the bracket from {fmt_coord(base[0], d)} → "
                f"{fmt_coord(base[1], d)} to {fmt_coord(bracket[0], d)} → "
                f"{fmt_coord(bracket[1], d)}{unit}")
        if isinstance(n, int):
            text += f" with {n} new frame{'s' if n != 1 else ''}"
        parts.append(text)
    if isinstance(info.get("bisection_evaluations"), int) and _finite(info.get("tolerance")):
        parts.append(f"plain bisection needs {info['bisection_evaluations']} for the "
                     f"tolerance {fmt_sig(info['tolerance'], 3)}{unit}")
    if "converged" in info:
        parts.append("tolerance reached" if info["converged"] else "tolerance NOT reached")
    fit = change.get("fit")
    if isinstance(fit, dict) and fit.get("outside_bracket"):
        parts.append("the fold extrapolation fell outside the bracket and was not used")
    return ("; ".join(parts) + ".") if parts else ""


def change_words(change, scan: ScanData) -> str:
    """All events of a change in plain words, joined by ``"; "``."""
    events = change.get("events") or []
    if not events:
        return "no events recorded"
    return "; ".join(event_words(e, change, scan) for e in events)


def _finite(x) -> bool:
    if isinstance(x, bool) or not isinstance(x, (int, float)):
        return False
    return math.isfinite(x)
