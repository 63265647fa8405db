"""Changes in words, for tables and reports: "bond path C1–C2 broken; ring CP lost"."""

from __future__ import annotations

__all__ = ["atom_label", "describe_event", "describe_change"]

_DASH = "\u2013"


def atom_label(end, elements) -> str:
    """``C1`` for atom 1 when it is carbon; NNA tracks and open ends as words."""
    if end is None:
        return "(open end)"
    if isinstance(end, int) and 1 <= end <= len(elements):
        return f"{elements[end - 1]}{end}"
    return f"NNA {end}"


def _path(atoms, elements) -> str:
    return _DASH.join(atom_label(a, elements) for a in atoms)


def describe_event(event, elements) -> str:
    """One event in words.

    Parameters
    ----------
    event : trackscan.model.Event
    elements : sequence of str
        Element symbols of the atoms, in atom order.

    Examples
    --------
    >>> from trackscan.model import Event
    >>> describe_event(Event(kind="bond_broken", atoms=(1, 2)), ["C", "C", "H"])
    'bond path C1–C2 broken'
    >>> describe_event(Event(kind="bond_switched", atoms_before=(1, 3),
    ...                      atoms_after=(2, 3)), ["C", "C", "H"])
    'bond path C1–H3 switched to C2–H3'
    """
    kind = event.kind
    atoms = event.atoms or ()
    if kind in ("bond_broken", "bond_formed"):
        return f"bond path {_path(atoms, elements)} {kind.split('_')[1]}"
    if kind == "bond_switched":
        return (f"bond path {_path(event.atoms_before or (), elements)} switched to "
                f"{_path(event.atoms_after or (), elements)}")
    what, _, how = kind.partition("_")
    if what in ("ring", "cage"):
        return f"{what} CP {how}"
    if what == "attractor":
        return f"non-nuclear attractor {how}"
    return kind.replace("_", " ")


def describe_change(change, elements) -> str:
    """All events of a change (a trackscan.model.Change) in words, joined by "; "."""
    return "; ".join(describe_event(e, elements) for e in change.events) or "(no events)"
