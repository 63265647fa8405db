"""Changes in words, for tables and reports: "bond path C1–C2 broken; ring CP lost".

The words are those of :mod:`trackscan.vocabulary`, which the report uses too.
"""

from __future__ import annotations

from trackscan.tracking.labels import TRACK_WORD
from trackscan.vocabulary import event_phrase, events_phrase

__all__ = ["atom_label", "describe_event", "describe_change"]

_DASH = "\u2013"


def atom_label(end, elements) -> str:
    """``C1`` for atom 1 when it is carbon; ``nna-1`` for an attractor track; open ends as words."""
    if end is None:
        return "(open end)"
    if isinstance(end, int) and 1 <= end <= len(elements):
        return f"{elements[end - 1]}{end}"
    if str(end).startswith(TRACK_WORD["non_nuclear"] + "-"):
        return str(end)
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
    if kind == "bond_switched":
        return event_phrase(kind, atoms=_path(event.atoms_before or (), elements),
                            atoms_after=_path(event.atoms_after or (), elements))
    if kind.partition("_")[0] == "bond":
        return event_phrase(kind, atoms=_path(atoms, elements))
    return event_phrase(kind)


def describe_change(change, elements) -> str:
    """All events of a change (a trackscan.model.Change) in words, joined by "; "."""
    return events_phrase(describe_event(e, elements) for e in change.events)
