"""How critical points connect: bond paths, ring atoms, cage rings.

All gradient paths of a frame are integrated in two sets, together
(:func:`trackscan.topology.paths.trace_path_sets`): one uphill set holding
both halves of every bond path and the rays of every ring surface, one
downhill set from the ring CPs towards the cage CPs (then the added rays of
ring surfaces that did not close, :func:`_refine_rings`).

- Bond path [1]_: from the bond CP at ``+/- delta`` along the eigenvector of
  its positive eigenvalue, uphill to an attractor.  A half that does not
  reach one is kept with ``None`` as its end.
- Ring atoms: a ring CP's ring surface is spanned by the eigenvectors of its
  two positive eigenvalues; rays leaving the CP in that plane run uphill
  along the surface and end at the nuclei of the ring [1]_.  The atoms are
  listed in the cyclic order in which the rays meet them.  Rays start
  evenly spaced and along both principal directions.  Close to a fold the
  ring CP's smaller positive curvature ``lambda2`` tends to zero: a ray at
  angle ``a`` from ``e2`` grows like ``(cos a e^(lambda2 t), sin a
  e^(lambda3 t))``, so all but a sliver of rays about ``+/-e2`` turn towards
  ``+/-e3`` and an atom reached only through that sliver is missed.  A ring
  whose atoms are fewer than three, or whose cyclic neighbours are not all
  joined by a bond path (the boundary of a ring surface is made of bond
  paths), is therefore resampled: a ray is added halfway between every two
  neighbouring rays that end at different attractors, for up to
  ``RING_REFINE_ROUNDS`` rounds; if that does not close it, the rays are
  cast again from larger circles (``RING_RADII``), where the sliver is
  wider, keeping only starts that lie uphill of the CP.
- Cage rings: from a ring CP along +/- the eigenvector of its negative
  eigenvalue the density falls; the path ends at a cage CP (or leaves the
  molecule).  A cage lists the ring CPs whose paths end in it.

References
----------
.. [1] R. F. W. Bader, *Atoms in Molecules: A Quantum Theory*, Oxford
   University Press (1990), sections 2.4-2.5.
"""

from __future__ import annotations

import itertools

import numpy as np

from trackscan.topology.paths import trace_path_sets, trace_paths
from trackscan.topology.results import BondPath

__all__ = ["connect_points", "end_key", "RING_RAYS", "RING_REFINE_ROUNDS", "RING_RADII",
           "PATH_OFFSET"]

PATH_OFFSET = 0.02
"""Distance (bohr) from the CP at which each gradient path starts."""

RING_RAYS = 24
"""Evenly spaced rays per ring surface (four more run along +/-e2, +/-e3)."""

RING_REFINE_ROUNDS = 10
"""Rounds of ray bisection for a ring surface whose atoms do not close a
ring of bond paths (24 rays refined 10 times resolve 0.015 degrees)."""

RING_RADII = (0.05, 0.1, 0.2)
"""Larger start circles (bohr) for ring surfaces that bisection did not close."""


def _cyclic_sequence(labels):
    """Collapse a cyclic sequence of labels into the order of first visits."""
    seq = [x for x in labels if x is not None]
    if not seq:
        return []
    # rotate so the sequence starts at a change of label
    n = len(seq)
    start = next((i for i in range(n) if seq[i] != seq[i - 1]), 0)
    seq = seq[start:] + seq[:start]
    out = []
    for x in seq:
        if not out or out[-1] != x:
            out.append(x)
    if len(out) > 1 and out[0] == out[-1]:
        out.pop()
    # canonical: start at the smallest, go towards the smaller neighbour
    uniq = list(dict.fromkeys(out))
    if len(uniq) != len(out):
        return sorted(set(out), key=end_key)
    i = min(range(len(out)), key=lambda k: end_key(out[k]))
    out = out[i:] + out[:i]
    if len(out) > 2 and end_key(out[-1]) < end_key(out[1]):
        out = [out[0]] + out[1:][::-1]
    return out


def _ring_start(cp, angle, radius=PATH_OFFSET):
    """Start of the ring-surface ray at `angle` from e2 towards e3."""
    e2, e3 = cp.eigenvectors[1], cp.eigenvectors[2]
    return cp.position + radius * (np.cos(angle) * e2 + np.sin(angle) * e3)


def _ring_closed(labels, bonded):
    """True when the cyclic atom sequence is a ring of bond paths (>= 3 atoms)."""
    seq = _cyclic_sequence(labels)
    if len(seq) < 3 or len(set(seq)) != len(seq):
        return False
    return all(frozenset((seq[k - 1], seq[k])) in bonded for k in range(len(seq)))


def _labels(hits):
    return [hits[a] for a in sorted(hits)]


def _uphill_start(field, cp, angle, radius, samples=8):
    """True when rho rises all the way from the ring CP to the ray's start.

    A start beyond a nearby bond CP (the density falls again past it) would
    no longer lie on the ring surface.
    """
    t = np.linspace(0.0, 1.0, samples + 1)[:, None]
    v = field.evaluate(cp.position + t * (_ring_start(cp, angle, radius) - cp.position), 0)[0]
    return bool(np.all(np.diff(v) > 0))


def _refine_rings(field, rings, hits, bonded, *, angles, trace, label):
    """Resample the ring surfaces whose rays do not close a ring of bond paths.

    For each such ring: bisect between neighbouring rays that end at
    different attractors (``RING_REFINE_ROUNDS`` rounds); if the ring is
    still open, cast the rays again from circles of larger radius
    (``RING_RADII``; the sliver's angle grows as
    ``radius^(lambda3/lambda2 - 1)``), keeping only starts reached uphill from
    the CP, and bisect again.  `hits[i]` (angle -> end label) is replaced by
    the first sampling that closes the ring, else by the one that reaches
    the most attractors.

    Parameters
    ----------
    angles : sequence of float
        The ray angles of the first sampling (reused on the larger circles).
    trace : callable
        ``trace(starts, firsts) -> PathBundle``.
    label : callable
        ``label(target index) -> attractor label or None``.
    """
    def run(batch):
        if not batch:
            return
        bundle = trace(np.array([x for _, _, _, x in batch]),
                       np.array([rings[i].position for i, _, _, _ in batch]))
        for k, (i, a, h, _) in enumerate(batch):
            h[a] = label(int(bundle.target[k]))

    def bisect(samples, radius):
        for _ in range(RING_REFINE_ROUNDS):
            batch = []
            for i, h in samples.items():
                angles = sorted(h)
                labels = [h[a] for a in angles]
                if _ring_closed(labels, bonded):
                    continue
                for k in range(len(angles)):
                    if labels[k - 1] == labels[k]:
                        continue
                    a0 = angles[k - 1] - (2.0 * np.pi if k == 0 else 0.0)
                    mid = float(np.mod(0.5 * (a0 + angles[k]), 2.0 * np.pi))
                    if mid not in h:
                        batch.append((i, mid, h, _ring_start(rings[i], mid, radius)))
            if not batch:
                return
            run(batch)

    def score(h):
        return len(set(x for x in _labels(h) if x is not None))

    todo = {i: h for i, h in hits.items() if not _ring_closed(_labels(h), bonded)}
    if not todo:
        return
    bisect(todo, PATH_OFFSET)
    for radius in RING_RADII:
        todo = {i: h for i, h in todo.items() if not _ring_closed(_labels(h), bonded)}
        if not todo:
            return
        fresh = {i: {} for i in todo}
        batch = [(i, a, fresh[i], _ring_start(rings[i], a, radius))
                 for i in todo for a in angles if _uphill_start(field, rings[i], a, radius)]
        run(batch)
        bisect({i: h for i, h in fresh.items() if h}, radius)
        for i, h in fresh.items():
            if _ring_closed(_labels(h), bonded) or score(h) > score(todo[i]):
                hits[i] = todo[i] = h


def end_key(label):
    """Sort key of an attractor label: atom numbers first, then NNA ids."""
    return (0, label, "") if isinstance(label, int) else (1, 0, str(label))


def connect_points(field, nuclear, attractors, bonds, rings, cages, *, region, settings,
                   label_of, nuclear_radii=None, nuclear_maxima=None) -> tuple:
    """Trace bond paths, ring surfaces and ring-to-cage paths.

    Parameters
    ----------
    field : Field
    nuclear : list of CriticalPoint
        Nuclear attractors (``atoms[0]`` is the atom number).
    attractors : list of CriticalPoint
        Non-nuclear attractors.
    bonds, rings, cages : lists of CriticalPoint
        Modified in place: ``bonds[i].atoms``, ``rings[i].atoms``,
        ``cages[i].rings`` (as indices into `rings`; the caller turns them
        into ids).
    region : Region
    settings : AnalysisSettings
    label_of : callable
        ``label_of(cp)`` for an attractor: its atom number or id.
    nuclear_radii : (len(nuclear),) float array, optional
        Capture radius of each nucleus (default: the larger of
        ``settings.capture_radius`` and ``settings.nuclear_radius``).
    nuclear_maxima : (len(nuclear), 3) float array, optional
        The density maximum each nucleus owns when it lies off the nucleus
        (:func:`trackscan.topology.search.nuclear_maxima`): a path coming
        within ``settings.capture_radius`` of it has reached that nucleus,
        and its polyline is closed at the nucleus.

    Returns
    -------
    list of BondPath
        In the order of `bonds`.
    """
    ends = nuclear + attractors
    targets = np.array([cp.position for cp in ends]).reshape(-1, 3)
    owner = np.arange(len(ends))
    # a path that enters the sphere in which Newton does not look for CPs
    # (settings.nuclear_radius) has reached that nucleus
    if nuclear_radii is None:
        nuclear_radii = [max(settings.capture_radius, settings.nuclear_radius)] * len(nuclear)
    radii = np.concatenate([np.maximum(np.asarray(nuclear_radii, dtype=float),
                                       settings.capture_radius),
                            np.full(len(attractors), settings.capture_radius)])
    anchors = targets.copy()       # where a path that reached each target ends
    if nuclear_maxima is not None and len(nuclear):
        m = np.asarray(nuclear_maxima, dtype=float).reshape(-1, 3)
        off = np.nonzero(np.linalg.norm(m - targets[:len(nuclear)], axis=1) > 1e-3)[0]
        targets = np.concatenate([targets, m[off]])
        anchors = np.concatenate([anchors, anchors[off]])
        radii = np.concatenate([radii, np.full(len(off), settings.capture_radius)])
        owner = np.concatenate([owner, off])
    cell = region.cell
    if cell is not None and len(targets):
        # periodic: a path may run to an image of an attractor
        shifts = np.array(list(itertools.product((-1, 0, 1), repeat=3)), dtype=float) @ cell
        targets = (targets[None, :, :] + shifts[:, None, :]).reshape(-1, 3)
        anchors = (anchors[None, :, :] + shifts[:, None, :]).reshape(-1, 3)
        radii = np.tile(radii, len(shifts))
        owner = np.tile(owner, len(shifts))
    starts, firsts, owners = [], [], []
    for i, cp in enumerate(bonds):
        e3 = cp.eigenvectors[2]
        for s in (-1.0, 1.0):
            starts.append(cp.position + s * PATH_OFFSET * e3)
            firsts.append(cp.position)
            owners.append(("b", i))
    ang = np.sort(np.concatenate([2.0 * np.pi * (np.arange(RING_RAYS) + 0.5) / RING_RAYS,
                                  0.5 * np.pi * np.arange(4)]))
    for i, cp in enumerate(rings):
        for a in ang:
            starts.append(_ring_start(cp, a))
            firsts.append(cp.position)
            owners.append(("r", i, a))
    halves = {}
    ring_hits = {i: {} for i in range(len(rings))}      # angle -> end label
    sets = []
    if starts:
        sets.append(dict(starts=np.array(starts), uphill=True, targets=targets, radii=radii,
                         inside=region.in_grid, first_points=np.array(firsts)))
    cage_set = _cage_paths(rings, cages, region=region, settings=settings)
    if cage_set is not None:
        sets.append(cage_set)
    # the uphill paths and those down into the cages in one integration
    bundles = trace_path_sets(field, sets)
    cage_bundle = bundles.pop() if cage_set is not None else None
    if starts:
        bundle = bundles[0]
        for k, (what, i, *a) in enumerate(owners):
            t = int(bundle.target[k])
            pts = bundle.points[k]
            if t >= 0 and np.any(anchors[t] != targets[t]):
                pts = np.concatenate([pts, anchors[t][None]])    # on to the nucleus
            t = int(owner[t]) if t >= 0 else -1
            end = label_of(ends[t]) if t >= 0 else None
            if what == "b":
                halves.setdefault(i, []).append((end, pts, bundle.reason[k], t))
            else:
                ring_hits[i][a[0]] = end
    paths = []
    for i, cp in enumerate(bonds):
        (e1, p1, r1, t1), (e2, p2, r2, t2) = halves[i]
        pts = np.concatenate([p1[::-1], p2[1:]])
        length = float(np.linalg.norm(np.diff(pts, axis=0), axis=1).sum())
        atoms = [e1, e2]
        reasons = (r1, r2)
        both_atoms = (t1 >= 0 and t2 >= 0 and t1 < len(nuclear) and t2 < len(nuclear))
        internuclear = (float(np.linalg.norm(p1[-1] - p2[-1])) if both_atoms else None)
        if (e1 is not None and e2 is not None and end_key(e2) < end_key(e1)) or \
                (e1 is None and e2 is not None):
            atoms, reasons, pts = [e2, e1], (r2, r1), pts[::-1]
        cp.atoms = list(atoms)
        paths.append(BondPath(cp=cp, atoms=list(atoms), points=pts, length=length,
                              internuclear=internuclear,
                              complete=(e1 is not None and e2 is not None), reasons=reasons))
    bonded = {frozenset(bp.atoms) for bp in paths if bp.complete}

    def trace(x, firsts):
        return trace_paths(field, x, uphill=True, targets=targets, radii=radii,
                           inside=region.in_grid, first_points=firsts)

    def label(t):
        return label_of(ends[int(owner[t])]) if t >= 0 else None

    _refine_rings(field, rings, ring_hits, bonded, angles=[float(a) for a in ang], trace=trace,
                  label=label)
    for i, cp in enumerate(rings):
        cp.atoms = _cyclic_sequence([ring_hits[i][a] for a in sorted(ring_hits[i])])
    if cage_bundle is not None:
        _cage_rings(cage_bundle, rings, cages, cage_set["targets"])
    return paths


def _cage_paths(rings, cages, *, region, settings):
    """The set of paths from each ring CP down to the cages (options of trace_paths), or None.

    From a ring CP along +/- the eigenvector of its negative eigenvalue;
    path ``2 i`` and ``2 i + 1`` leave ring ``i``.
    """
    if not (cages and rings):
        return None
    starts = []
    for cp in rings:
        e1 = cp.eigenvectors[0]
        for s in (-1.0, 1.0):
            starts.append(cp.position + s * PATH_OFFSET * e1)
    return dict(starts=np.array(starts), uphill=False,
                targets=np.array([cp.position for cp in cages]),
                radii=np.full(len(cages), 2 * settings.capture_radius),
                inside=region.in_grid, floor=_cage_path_floor(cages, settings))


def _cage_rings(bundle, rings, cages, ctargets):
    """Add to each cage's ``rings`` the rings whose paths (:func:`_cage_paths`) end in it."""
    for k in range(2 * len(rings)):
        i = k // 2
        t = int(bundle.target[k])
        if t < 0 and bundle.reason[k] == "stalled":
            # converged towards a minimum: take the nearest cage within 0.5 bohr
            d = np.linalg.norm(ctargets - bundle.points[k][-1], axis=1)
            if d.min() < 0.5:
                t = int(np.argmin(d))
        if t >= 0 and i not in cages[t].rings:
            cages[t].rings.append(i)


def _cage_path_floor(cages, settings) -> float:
    """Density floor for paths descending from rings into cages.

    A cage inside the molecule may lie below the density floor (the floor
    does not apply there: :mod:`trackscan.topology.envelope`); the paths
    must be allowed to reach it.
    """
    lowest = min((cp.rho for cp in cages), default=np.inf)
    return float(min(settings.density_floor, 0.5 * lowest))
