"""Matching critical points of neighbouring frames and following them as tracks.

Each kind is matched separately by an optimal assignment on distances
between aligned positions, under a distance gate.  Critical points left over
are births (in the later frame) or deaths (in the earlier one).  Births (or
deaths) of two points whose Morse indices differ by one, at the same step and
close together, are paired: that is a fold.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy.optimize import linear_sum_assignment

from trackscan.tracking.frames import KINDS, MORSE_INDEX, displacement
from trackscan.tracking.labels import nuclear_track_label, track_label

__all__ = ["StepMatch", "match_step", "assign_tracks", "pair_folds"]

#: Prefix of persistent track ids per kind; nuclear tracks are ``N<atom>``.

_FORBIDDEN = 1.0e6


@dataclass(frozen=True)
class StepMatch:
    """Correspondence of the critical points of frame k and frame k+1.

    Attributes
    ----------
    pairs : list of (str, str, float)
        ``(id in k, id in k+1, distance in bohr)`` of matched points.
    deaths : list of str
        Ids in frame k with no partner in k+1.
    births : list of str
        Ids in frame k+1 with no partner in k.
    gate : float, bohr
        Distance gate used at this step.
    """

    pairs: list = field(default_factory=list)
    deaths: list = field(default_factory=list)
    births: list = field(default_factory=list)
    gate: float = 0.0


def _nuclear_atom(cp, positions):
    if cp.atoms and isinstance(cp.atoms[0], int):
        return cp.atoms[0]
    d = np.linalg.norm(positions - cp.position, axis=1)
    return int(np.argmin(d)) + 1


def _bond_key(ends):
    return tuple(sorted(ends, key=lambda e: (e is None, str(type(e)), e if e is not None else 0)))


def match_step(a, b, aligned_a, aligned_b, *, settings):
    """Match the critical points of two neighbouring frames.

    Parameters
    ----------
    a, b : FrameView
        Frames k and k+1 in scan order.
    aligned_a, aligned_b : dict
        CP id -> (3,) position (bohr) in a common frame (after alignment);
        also key ``"__nuclei__"`` -> (n, 3) aligned nuclear positions.
    settings : TrackingSettings

    Returns
    -------
    StepMatch

    Notes
    -----
    Nuclear attractors are matched by their atom.  Periodic frames measure
    distances by the minimum image.  Every other kind is
    matched by the Hungarian method on the distance matrix (scipy
    ``linear_sum_assignment``) [1]_; pairs beyond the gate cost a large
    constant, so the assignment first minimises the number of such pairs and
    those are then dropped.  O(m^3) per kind for m points.

    References
    ----------
    .. [1] H. W. Kuhn, "The Hungarian method for the assignment problem",
       Naval Res. Logist. Q. 2, 83-97 (1955). :DOI:`10.1002/nav.3800020109`
    """
    cell = b.cell if (a.cell is not None and b.cell is not None) else None
    disp = np.linalg.norm(displacement(aligned_a["__nuclei__"], aligned_b["__nuclei__"], cell),
                          axis=1)
    gate = float(settings.match_gate + (disp.max() if len(disp) else 0.0))
    out = StepMatch(gate=gate)
    for kind in KINDS:
        ca, cb = a.of_kind(kind), b.of_kind(kind)
        if kind == "nuclear":
            by_atom_b = {}
            for cp in cb:
                by_atom_b.setdefault(_nuclear_atom(cp, b.positions), cp)
            used = set()
            for cp in ca:
                atom = _nuclear_atom(cp, a.positions)
                other = by_atom_b.get(atom)
                if other is not None and other.id not in used:
                    used.add(other.id)
                    dist = float(np.linalg.norm(displacement(aligned_a[cp.id],
                                                             aligned_b[other.id], cell)))
                    out.pairs.append((cp.id, other.id, dist))
                else:
                    out.deaths.append(cp.id)
            out.births.extend(cp.id for cp in cb if cp.id not in used)
            continue
        if not ca or not cb:
            out.deaths.extend(cp.id for cp in ca)
            out.births.extend(cp.id for cp in cb)
            continue
        pa = np.array([aligned_a[cp.id] for cp in ca])
        pb = np.array([aligned_b[cp.id] for cp in cb])
        dist = np.linalg.norm(displacement(pa[:, None, :], pb[None, :, :], cell), axis=2)
        cost = dist.copy()
        if kind == "bond":
            ka = [_bond_key(a.bond_ends.get(cp.id, ())) for cp in ca]
            kb = [_bond_key(b.bond_ends.get(cp.id, ())) for cp in cb]
            differ = np.array([[x != y for y in kb] for x in ka])
            cost = cost + settings.switch_penalty * differ
        cost[dist > gate] = _FORBIDDEN
        rows, cols = linear_sum_assignment(cost)
        used_a, used_b = set(), set()
        for i, j in zip(rows, cols):
            if dist[i, j] <= gate:
                out.pairs.append((ca[i].id, cb[j].id, float(dist[i, j])))
                used_a.add(i)
                used_b.add(j)
        out.deaths.extend(cp.id for i, cp in enumerate(ca) if i not in used_a)
        out.births.extend(cp.id for j, cp in enumerate(cb) if j not in used_b)
    return out


def assign_tracks(views, matches):
    """Persistent track ids for every critical point of every frame.

    Parameters
    ----------
    views : list of FrameView
        Frames in scan order.
    matches : list of StepMatch
        ``matches[k]`` links frame k to frame k+1.

    Returns
    -------
    list of dict
        Per frame: CP id -> track id.  Labels follow :mod:`trackscan.tracking.labels`:
        nuclear tracks are ``nucleus-<atom>``; other tracks are numbered
        per kind in order of first appearance (``bond-1``, ``ring-1``,
        ...), ties broken by the frame's CP order.
    """
    counters = {}
    tracks = []
    for k, v in enumerate(views):
        inherited = {}
        if k > 0:
            prev = tracks[k - 1]
            for ida, idb, _ in matches[k - 1].pairs:
                inherited[idb] = prev[ida]
        cur = {}
        for cp in v.cps:
            if cp.kind == "nuclear":
                cur[cp.id] = nuclear_track_label(_nuclear_atom(cp, v.positions))
            elif cp.id in inherited:
                cur[cp.id] = inherited[cp.id]
            else:
                counters[cp.kind] = counters.get(cp.kind, 0) + 1
                cur[cp.id] = track_label(cp.kind, counters[cp.kind])
        tracks.append(cur)
    return tracks


def pair_folds(cps, *, gate, cell=None):
    """Pair critical points born (or lost) together into folds.

    Parameters
    ----------
    cps : list of CPView
        Points born at one step (all from the later frame), or lost at one
        step (all from the earlier frame).
    gate : float, bohr
        Largest distance between the two members of a pair.
    cell : (3, 3) ndarray, optional
        Periodic cell: distances by the minimum image.

    Returns
    -------
    pairs : list of (CPView, CPView, float)
        Pairs whose Morse indices differ by one (non-nuclear attractor with
        bond, bond with ring, ring with cage), lower index first, with their
        separation; closest pairs are taken first.
    unpaired : list of CPView
    """
    cand = []
    for i, p in enumerate(cps):
        for j, q in enumerate(cps):
            if j <= i or p.kind not in MORSE_INDEX or q.kind not in MORSE_INDEX:
                continue
            if "nuclear" in (p.kind, q.kind):
                continue
            if abs(MORSE_INDEX[p.kind] - MORSE_INDEX[q.kind]) != 1:
                continue
            d = float(np.linalg.norm(displacement(p.position, q.position, cell)))
            if d <= gate:
                lo, hi = (p, q) if MORSE_INDEX[p.kind] < MORSE_INDEX[q.kind] else (q, p)
                cand.append((d, lo.id, hi.id, lo, hi))
    cand.sort(key=lambda c: (c[0], c[1], c[2]))
    used, pairs = set(), []
    for d, ida, idb, lo, hi in cand:
        if ida in used or idb in used:
            continue
        used.update((ida, idb))
        pairs.append((lo, hi, d))
    unpaired = [cp for cp in cps if cp.id not in used]
    return pairs, unpaired
