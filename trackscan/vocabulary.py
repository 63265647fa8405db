"""The words trackscan uses for what it finds: one table, shared by every output.

The CLI, the report (HTML, Markdown), the CSV files and the descriptions in
JSON all name things with the words below, so a reader meets one name per
thing: a *change* (a structural change between two frames), a bond path
*broken* / *formed* / *switched*, a ring CP *lost* / *formed*, *new frames*
(the calculations refinement adds), ρ in *a.u.*, lengths in *Å* in reports.

Nothing here imports more than the standard library, so every layer may use it.
Unit names and symbols live in :mod:`trackscan.units` (``unit_symbol``).
"""

from __future__ import annotations

__all__ = ["CHANGE", "CHANGES", "NEW_FRAMES", "DENSITY_UNIT", "LENGTH_UNIT", "EVENT_VERBS",
           "EVENT_SUBJECTS", "MECHANISMS", "ESTIMATE_METHODS", "UNCERTAINTY_SOURCES",
           "CP_KIND_NAMES", "CP_KIND_SHORT", "event_phrase", "events_phrase",
           "plural", "INDICATORS"]

#: A structural change between two neighbouring frames (never "change point" or
#: "structural change" in running text).
CHANGE = "change"
CHANGES = "changes"
#: The quantum-chemistry calculations refinement adds.
NEW_FRAMES = "new frames"
#: Unit of ρ, ∇²ρ, eigenvalues and energy densities everywhere in reports.
DENSITY_UNIT = "a.u."
#: Unit of positions and distances in reports.
LENGTH_UNIT = "Å"

#: Past participle of each event kind (``bond_broken`` -> "broken").
EVENT_VERBS = {
    "bond_formed": "formed", "bond_broken": "broken", "bond_switched": "switched",
    "ring_formed": "formed", "ring_lost": "lost",
    "cage_formed": "formed", "cage_lost": "lost",
    "attractor_formed": "formed", "attractor_lost": "lost",
}
#: What each event kind is about.
EVENT_SUBJECTS = {
    "bond": "bond path", "ring": "ring CP", "cage": "cage CP",
    "attractor": "non-nuclear attractor",
}

#: Mechanism names and their one-line meaning.
MECHANISMS = {
    "fold": "fold (a pair of CPs is born or annihilated)",
    "conflict": "conflict (a bond path switches one of its ends, CP counts unchanged)",
    "mixed": "mixed (fold and conflict in the same step)",
    "unresolved": "unresolved (the frames cannot decide the mechanism)",
}

#: How an estimate was obtained.
ESTIMATE_METHODS = {
    "fold-extrapolation": "fold extrapolation of d²",
    "path-offset-interpolation": "interpolation of the bond-path offset",
    "bisection-midpoint": "midpoint of the bracket after bisection",
    "bracket-midpoint": "midpoint of the bracket",
}

#: Where the ± of an estimate comes from.
UNCERTAINTY_SOURCES = {
    "bracket": "half the bracket",
    "model": "error of the model estimate",
    "resolution": "limit of the grid's resolution",
}

#: Names of critical-point kinds (singular) as the report writes them.
CP_KIND_NAMES = {
    "nuclear": "nucleus", "non_nuclear": "non-nuclear attractor", "bond": "bond CP",
    "ring": "ring CP", "cage": "cage CP", "degenerate": "degenerate CP",
}
#: Column abbreviations of the kinds in tables.
CP_KIND_SHORT = {
    "nuclear": "n", "non_nuclear": "nna", "bond": "b", "ring": "r", "cage": "c",
    "degenerate": "deg.",
}

def plural(n: int, word: str, many: str | None = None) -> str:
    """``"1 new frame"``, ``"3 new frames"``."""
    return f"{n} {word if n == 1 else (many or word + 's')}"


def event_phrase(kind: str, *, atoms: str = "", atoms_after: str = "",
                 partner: str = "") -> str:
    """One event in the shared words.

    Parameters
    ----------
    kind : str
        Event kind of the contract (``bond_broken``, ``ring_lost``, ...).
    atoms : str
        Atom labels already joined (``"C1–C2"``); for ``bond_switched`` the
        ends before.
    atoms_after : str
        ``bond_switched``: the ends after.
    partner : str
        For a fold: what the CP was born or annihilated with (``"bond CP of C1–C2"``).

    Examples
    --------
    >>> event_phrase("bond_broken", atoms="C1–C2")
    'bond path C1–C2 broken'
    >>> event_phrase("bond_switched", atoms="C1–H4", atoms_after="C2–H4")
    'bond path C1–H4 switched to C2–H4'
    >>> event_phrase("ring_lost", partner="bond CP of C1–C2")
    'ring CP lost (fold with the bond CP of C1–C2)'
    """
    what, _, _ = kind.partition("_")
    subject = EVENT_SUBJECTS.get(what, what.replace("_", " "))
    verb = EVENT_VERBS.get(kind, kind.replace("_", " "))
    if kind == "bond_switched":
        text = f"{subject} {atoms} switched to {atoms_after}" if atoms_after else \
            f"{subject} {atoms} switched"
    elif what == "attractor" and atoms:
        text = f"{subject} between {atoms} {verb}"
    elif what == "ring" and atoms:
        text = f"{subject} of {atoms} {verb}"
    else:
        text = f"{subject} {atoms} {verb}" if atoms else f"{subject} {verb}"
    if partner:
        text += f" (fold with the {partner})"
    return text


def events_phrase(phrases) -> str:
    """Events joined with ``"; "`` (``"no events recorded"`` when there are none)."""
    phrases = [p for p in phrases if p]
    return "; ".join(phrases) if phrases else "no events recorded"

#: Early-warning indicators of a bond track, in words.
INDICATORS = {
    "ellipticity": "ellipticity rising",
    "min_abs_eigenvalue": "smallest curvature |λ| falling to zero",
    "nearest_ring_bohr": "a ring CP closing in",
    "rho": "ρ falling",
}
