"""Structural changes between neighbouring frames: events and mechanism.

For every step k -> k+1 of the scan the matching (:mod:`.matching`) leaves
births, deaths and bond CPs whose paths changed ends.  This module turns
them into the events and mechanism of a change (DESIGN.md section 3):

* a fold (bifurcation) is a pair of points whose Morse indices differ by one,
  lost or born together close to each other (bond + ring CP, ring + cage CP,
  non-nuclear attractor + bond CP);
* a conflict is a bond CP that survives while its path switches one end to
  another attractor;
* ``mixed`` has both; ``unresolved`` is used when the evidence does not
  decide, and the change then carries a ``note`` saying why: a frame fails
  Poincaré–Hopf, a point is born or lost without a partner, or a pair
  flickers in a single frame with a density difference below
  ``significance`` times the floor (noise, not a change).  A fold pair whose
  density difference or separation lies below the frames' resolution floor
  (:mod:`.resolution`) keeps its mechanism, read from the frames of the
  approach, and the change is marked ``resolution_limited``.
"""

from __future__ import annotations

import math
from collections import Counter
from dataclasses import dataclass, field

import numpy as np

from trackscan.model import significant as sig
from trackscan.tracking.frames import displacement
from trackscan.tracking.matching import pair_folds
from trackscan.tracking.resolution import interpolation_floor, rho_floor, separation_floor
from trackscan.tracking.structures import end_label, same_structure_type, sort_ends

__all__ = ["StepEvents", "analyse_step", "find_changes"]

_LOST = {"bond": "bond_broken", "ring": "ring_lost", "cage": "cage_lost",
         "non_nuclear": "attractor_lost", "nuclear": "attractor_lost"}
_BORN = {"bond": "bond_formed", "ring": "ring_formed", "cage": "cage_formed",
         "non_nuclear": "attractor_formed", "nuclear": "attractor_formed"}
_EVENT_ORDER = ("bond_broken", "bond_formed", "bond_switched", "ring_lost", "ring_formed",
                "cage_lost", "cage_formed", "attractor_lost", "attractor_formed")


@dataclass
class StepEvents:
    """What happened between frame k and frame k+1.

    Attributes
    ----------
    k : int
    folds_lost, folds_born : list of (CPView, CPView, float)
        Fold pairs (lower Morse index first, separation in bohr); lost pairs
        are points of frame k, born pairs points of frame k+1.
    switches : list of (CPView, CPView, tuple, tuple, bool)
        Bond CP in k, its match in k+1, path ends before and after, and
        whether it was recovered from a death and a birth (a jump beyond the
        matching gate).
    lost, born : list of CPView
        Points lost or born without a partner.
    notes : list of str
    noise : list of str
        Why the step's births/deaths are judged noise (empty if they are not).
    open_paths : bool
        A bond path of either frame that changed did not reach an attractor.
    induced : list of int
        Indices of switches caused by a fold of a non-nuclear attractor.
    """

    k: int
    folds_lost: list = field(default_factory=list)
    folds_born: list = field(default_factory=list)
    switches: list = field(default_factory=list)
    lost: list = field(default_factory=list)
    born: list = field(default_factory=list)
    notes: list = field(default_factory=list)
    noise: list = field(default_factory=list)
    open_paths: bool = False
    induced: list = field(default_factory=list)

    @property
    def conflicts(self) -> list:
        """Switches that are not consequences of this step's folds."""
        return [sw for i, sw in enumerate(self.switches) if i not in self.induced]

    @property
    def has_events(self) -> bool:
        return bool(self.folds_lost or self.folds_born or self.switches or self.lost or self.born)


def _ends(view, cp, tracks):
    ends = view.bond_ends.get(cp.id, (None, None))
    if len(ends) != 2:
        ends = (None, None)
    return sort_ends([end_label(e, tracks) for e in ends])


def analyse_step(k, a, b, ta, tb, match, *, settings) -> StepEvents:
    """Births, deaths, folds and switches between frames k and k+1.

    Parameters
    ----------
    k : int
        Index of the earlier frame (scan order).
    a, b : FrameView
    ta, tb : dict
        CP id -> track of each frame.
    match : StepMatch
    settings : TrackingSettings
    """
    out = StepEvents(k)
    by_a, by_b = a.cp_by_id(), b.cp_by_id()
    deaths = [by_a[i] for i in match.deaths]
    births = [by_b[i] for i in match.births]
    for frame, group, tracks in ((a.label, deaths, ta), (b.label, births, tb)):
        for cp in group:
            if cp.kind == "degenerate":
                out.notes.append(f"frame {frame} has a degenerate critical point "
                                 f"({tracks.get(cp.id, cp.id)}), "
                                 f"the catastrophe itself or close to it")
    deaths = [cp for cp in deaths if cp.kind != "degenerate"]
    births = [cp for cp in births if cp.kind != "degenerate"]
    out.folds_lost, lost = pair_folds(deaths, gate=settings.fold_gate, cell=a.cell)
    out.folds_born, born = pair_folds(births, gate=settings.fold_gate, cell=b.cell)
    for ida, idb, _ in match.pairs:
        cpa, cpb = by_a[ida], by_b[idb]
        if cpa.kind != "bond":
            continue
        ea, eb = _ends(a, cpa, ta), _ends(b, cpb, tb)
        if ea == eb:
            continue
        if None in ea or None in eb:
            # an open path is an incomplete analysis, not a switch of partner
            which = [f"{t[cp.id]} in frame {f}" for cp, e, f, t in ((cpa, ea, a.label, ta),
                                                                     (cpb, eb, b.label, tb))
                     if None in e]
            out.notes.append(f"the bond path of {' and '.join(which)} does not reach an "
                             f"attractor at both ends")
            out.open_paths = True
            continue
        out.switches.append((cpa, cpb, ea, eb, False))
    # A bond CP that moved beyond the gate shows as a death and a birth of two
    # bond CPs sharing one end: read it as a switch, not as two unpaired events.
    lb = [cp for cp in lost if cp.kind == "bond"]
    bb = [cp for cp in born if cp.kind == "bond"]
    used_b = set()
    for cpa in lb:
        ea = _ends(a, cpa, ta)
        for cpb in bb:
            if cpb.id in used_b:
                continue
            eb = _ends(b, cpb, tb)
            if len(set(ea) & set(eb)) == 1 and None not in ea + eb:
                out.switches.append((cpa, cpb, ea, eb, True))
                used_b.add(cpb.id)
                lost = [cp for cp in lost if cp.id != cpa.id]
                break
    born = [cp for cp in born if cp.id not in used_b]
    out.lost, out.born = lost, born
    # A path end that moves off a non-nuclear attractor lost in a fold of this
    # step (or onto one born in it) follows from that fold: not a conflict.
    gone = {ta[cp.id] for pair in out.folds_lost for cp in pair[:2] if cp.kind == "non_nuclear"}
    new = {tb[cp.id] for pair in out.folds_born for cp in pair[:2] if cp.kind == "non_nuclear"}
    out.induced = [i for i, sw in enumerate(out.switches)
                   if set(sw[2]) & gone or set(sw[3]) & new]
    return out


def _event(cp, view, tracks, lost, partner=None):
    ev = {"kind": (_LOST if lost else _BORN)[cp.kind], "cp": cp.id, "track": tracks[cp.id]}
    if cp.kind == "bond":
        ev["atoms"] = list(_ends(view, cp, tracks))
    elif cp.kind in ("ring", "cage", "nuclear") and cp.atoms:
        ev["atoms"] = list(cp.atoms)
    if cp.kind == "non_nuclear":
        ev["position_bohr"] = [sig(x) for x in cp.position]
    if partner is not None:
        ev["fold_with"] = tracks[partner.id]
    return ev


def _step_event_list(st, a, b, ta, tb):
    events = []
    for lo, hi, _ in st.folds_lost:
        events.append(_event(lo, a, ta, True, hi))
        events.append(_event(hi, a, ta, True, lo))
    for lo, hi, _ in st.folds_born:
        events.append(_event(lo, b, tb, False, hi))
        events.append(_event(hi, b, tb, False, lo))
    for cp in st.lost:
        events.append(_event(cp, a, ta, True))
    for cp in st.born:
        events.append(_event(cp, b, tb, False))
    for i, (cpa, cpb, ea, eb, _) in enumerate(st.switches):
        ev = {"kind": "bond_switched", "cp": cpb.id, "cp_before": cpa.id,
              "track": tb[cpb.id], "atoms_before": list(ea), "atoms_after": list(eb)}
        if i in st.induced:
            ev["by_fold"] = True
        events.append(ev)
    events.sort(key=lambda e: (_EVENT_ORDER.index(e["kind"]), e["track"]))
    return events


def _digits(view, settings):
    return view.significant_digits or settings.printed_digits


def _pair_record(lo, hi, d, frame, view, tracks, settings):
    """Resolution of one fold pair at the bracket end where it exists.

    ``margin`` is the smaller of (density difference / density floor) and
    (separation / separation floor): below 1 the frame cannot resolve the
    pair.
    """
    drho = abs(hi.rho - lo.rho)
    floor = rho_floor(max(lo.rho, hi.rho), view.spacing, _digits(view, settings))
    dfloor = separation_floor(view.spacing)
    ratios = [x for x in (drho / floor if floor > 0 else None,
                          d / dfloor if dfloor > 0 else None) if x is not None]
    return {"cps": [lo.id, hi.id], "tracks": [tracks[lo.id], tracks[hi.id]], "frame": frame,
            "separation_bohr": sig(d), "separation_floor_bohr": sig(dfloor),
            "rho_difference": sig(drho), "rho_floor": sig(floor),
            "margin": sig(min(ratios)) if ratios else None}


def _mark_noise(steps, views, tracks, aligned, settings):
    """Mark fold pairs that exist (or are missing) in a single frame only."""
    for k in range(len(steps) - 1):
        s1, s2 = steps[k], steps[k + 1]
        mid = views[k + 1]
        for lo, hi, d in s1.folds_born:
            pair = (tracks[k + 1][lo.id], tracks[k + 1][hi.id])
            for lo2, hi2, _ in s2.folds_lost:
                if (tracks[k + 1][lo2.id], tracks[k + 1][hi2.id]) != pair:
                    continue
                drho = abs(hi.rho - lo.rho)
                floor = rho_floor(max(lo.rho, hi.rho), mid.spacing, _digits(mid, settings))
                if drho < settings.significance * floor:
                    note = (f"the pair {pair[0]}/{pair[1]} exists only in frame {mid.label}, "
                            f"with a density difference {drho:.2g} below {settings.significance:g} x the "
                            f"frame's resolution floor {floor:.2g}: noise, not a structural change")
                    s1.noise.append(note)
                    s2.noise.append(note)
        for lo, hi, _ in s1.folds_lost:
            c1 = aligned[k][lo.id] + 0.5 * displacement(aligned[k][lo.id], aligned[k][hi.id],
                                                        views[k].cell)
            for lo2, hi2, _ in s2.folds_born:
                if (lo2.kind, hi2.kind) != (lo.kind, hi.kind):
                    continue
                c2 = aligned[k + 2][lo2.id] + 0.5 * displacement(
                    aligned[k + 2][lo2.id], aligned[k + 2][hi2.id], views[k + 2].cell)
                if np.linalg.norm(displacement(c1, c2, views[k + 2].cell)) > settings.fold_gate:
                    continue
                before, after = views[k], views[k + 2]
                small = True
                for p, q, v in ((lo, hi, before), (lo2, hi2, after)):
                    floor = rho_floor(max(p.rho, q.rho), v.spacing, _digits(v, settings))
                    small &= abs(q.rho - p.rho) < settings.significance * floor
                if small:
                    note = (f"a {lo.kind}/{hi.kind} pair is missing only from frame {mid.label} "
                            f"and its density difference on both sides is below "
                            f"{settings.significance:g} x the resolution floor: noise, not a "
                            f"structural change")
                    s1.noise.append(note)
                    s2.noise.append(note)


def find_changes(views, tracks, matches, aligned, keys, graphs, structures, *, settings):
    """All changes of the scan, and the per-step analysis behind them.

    Parameters
    ----------
    views : list of FrameView
        In scan order.
    tracks : list of dict
        Per frame, CP id -> track.
    matches : list of StepMatch
    aligned : list of dict
        Per frame, CP id -> aligned position.
    keys, graphs, structures : list
        Per frame structure key, molecular graph and structure number.
    settings : TrackingSettings

    Returns
    -------
    changes : list of dict
        One per step whose two frames have different structures.
    steps : list of StepEvents
    """
    steps = [analyse_step(k, views[k], views[k + 1], tracks[k], tracks[k + 1], matches[k],
                          settings=settings) for k in range(len(views) - 1)]
    _mark_noise(steps, views, tracks, aligned, settings)
    changes = []
    for st in steps:
        k = st.k
        if keys[k] == keys[k + 1]:
            continue
        a, b = views[k], views[k + 1]
        events = _step_event_list(st, a, b, tracks[k], tracks[k + 1])
        notes = list(st.notes)
        n_fold = len(st.folds_lost) + len(st.folds_born)
        if not st.has_events and st.open_paths:
            candidate = "unresolved"
        elif not st.has_events:
            events = _diff_events(keys[k], keys[k + 1])
            candidate = "unresolved"
            notes.append("the molecular graphs differ but no critical point was born, lost or "
                         "switched: the matching could not follow this change")
        elif st.lost or st.born:
            candidate = "unresolved"
            names = ", ".join(f"{cp.kind} CP {tracks[k][cp.id]} lost" for cp in st.lost)
            names2 = ", ".join(f"{cp.kind} CP {tracks[k + 1][cp.id]} born" for cp in st.born)
            notes.append("without a fold partner: " + "; ".join(x for x in (names, names2) if x))
        elif n_fold and st.conflicts:
            candidate = "mixed"
        elif n_fold:
            candidate = "fold"
        else:
            candidate = "conflict"
        if any(sw[4] for sw in st.switches):
            notes.append("a bond CP moved farther than the matching gate; read as a switch")
        pairs = [_pair_record(lo, hi, d, k, a, tracks[k], settings) for lo, hi, d in st.folds_lost]
        pairs += [_pair_record(lo, hi, d, k + 1, b, tracks[k + 1], settings)
                  for lo, hi, d in st.folds_born]
        margins = [p["margin"] for p in pairs if p["margin"] is not None]
        margin = min(margins) if margins else None
        ref_rho = max((max(lo.rho, hi.rho) for lo, hi, _ in st.folds_lost + st.folds_born),
                      default=float("nan"))
        resolution = {
            "spacing_bohr": [sig(a.spacing), sig(b.spacing)],
            "rho_floor": [sig(rho_floor(ref_rho, v.spacing, _digits(v, settings))) for v in (a, b)],
            "interpolation_floor": [sig(interpolation_floor(v.spacing)) for v in (a, b)],
            "pairs": pairs,
            "margin": margin,
            "resolved": margin is None or margin >= 1.0,
        }
        mechanism = candidate
        for v in (a, b):
            if not v.complete:
                notes.append(f"frame {v.label} fails Poincaré–Hopf or is incomplete")
                mechanism = "unresolved"
        if not resolution["resolved"]:
            worst = min((p for p in pairs if p["margin"] is not None), key=lambda p: p["margin"])
            notes.append(f"the pair {worst['tracks'][0]}/{worst['tracks'][1]} (density difference "
                         f"{worst['rho_difference']:.2g}, separation "
                         f"{worst['separation_bohr']:.2g} bohr) is below the resolution floor of "
                         f"frame {views[worst['frame']].label} (density "
                         f"{worst['rho_floor']:.2g}, separation "
                         f"{worst['separation_floor_bohr']:.2g} bohr); the mechanism "
                         "is read from the approach to the change")
        if st.noise:
            notes.extend(st.noise)
            mechanism = "unresolved"
        if st.open_paths:
            mechanism = "unresolved"
        va, vb = a.value, b.value
        change = {
            "between": [k, k + 1],
            "bracket": [va, vb],
            "estimate": 0.5 * (va + vb),
            "estimate_method": "bracket-midpoint",
            "evaluations": 0,
            "structures": [structures[k], structures[k + 1]],
            "mechanism": mechanism,
            "events": events,
            "structure_type_changed": not same_structure_type(graphs[k], graphs[k + 1]),
            "resolution": resolution,
        }
        if not resolution["resolved"]:
            # below the floor the grid cannot see the last steps of the
            # approach, but the pairing of the frames before still decides
            # the mechanism: it is kept, and the change says it is limited
            change["resolution_limited"] = True
        if mechanism != candidate:
            change["mechanism_candidate"] = candidate
        if notes:
            change["note"] = "; ".join(dict.fromkeys(notes))
        changes.append(change)
    return changes, steps


def _diff_events(key_a, key_b):
    """Events read from the difference of two structure keys alone."""
    ea, eb = Counter(key_a[0]), Counter(key_b[0])
    events = [{"kind": "bond_broken", "atoms": list(e)} for e in sorted((ea - eb).elements(), key=str)]
    events += [{"kind": "bond_formed", "atoms": list(e)} for e in sorted((eb - ea).elements(), key=str)]
    for n_a, n_b, lost, born in ((key_a[2], key_b[2], "ring_lost", "ring_formed"),
                                 (key_a[3], key_b[3], "cage_lost", "cage_formed")):
        events += [{"kind": lost}] * max(n_a - n_b, 0) + [{"kind": born}] * max(n_b - n_a, 0)
    return [dict(e) for e in events]
