"""How critical points connect: bond paths, ring atoms, cage rings.

All gradient paths of a frame are integrated in two batches
(:func:`trackscan.topology.paths.trace_paths`): one uphill batch holding both
halves of every bond path and the rays of every ring surface, one downhill
batch from the ring CPs towards the cage CPs.

- Bond path [1]_: from the bond CP at ``+/- delta`` along the eigenvector of
  its positive eigenvalue, uphill to an attractor.  A half that does not
  reach one is kept with ``None`` as its end.
- Ring atoms: a ring CP's ring surface is spanned by the eigenvectors of its
  two positive eigenvalues; rays leaving the CP in that plane run uphill
  along the surface and end at the nuclei of the ring [1]_.  The atoms are
  listed in the cyclic order in which the rays meet them.
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

from trackscan.topology.paths import trace_paths
from trackscan.topology.results import BondPath

__all__ = ["connect_points", "end_key", "RING_RAYS", "PATH_OFFSET"]

PATH_OFFSET = 0.02
"""Distance (bohr) from the CP at which each gradient path starts."""

RING_RAYS = 24
"""Rays per ring surface."""


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


def end_key(label):
    """Sort key of an attractor label: atom numbers first, then NNA ids."""
    return (0, label, "") if isinstance(label, int) else (1, 0, str(label))


def connect_points(field, nuclear, attractors, bonds, rings, cages, *, region, settings,
                   label_of, nuclear_radii=None) -> tuple:
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
    cell = region.cell
    if cell is not None and len(targets):
        # periodic: a path may run to an image of an attractor
        shifts = np.array(list(itertools.product((-1, 0, 1), repeat=3)), dtype=float) @ cell
        targets = (targets[None, :, :] + shifts[:, None, :]).reshape(-1, 3)
        radii = np.tile(radii, len(shifts))
        owner = np.tile(owner, len(shifts))
    starts, firsts, owners = [], [], []
    for i, cp in enumerate(bonds):
        e3 = cp.eigenvectors[2]
        for s in (-1.0, 1.0):
            starts.append(cp.position + s * PATH_OFFSET * e3)
            firsts.append(cp.position)
            owners.append(("b", i))
    ang = 2.0 * np.pi * (np.arange(RING_RAYS) + 0.5) / RING_RAYS
    for i, cp in enumerate(rings):
        e2, e3 = cp.eigenvectors[1], cp.eigenvectors[2]
        for a in ang:
            starts.append(cp.position + PATH_OFFSET * (np.cos(a) * e2 + np.sin(a) * e3))
            firsts.append(cp.position)
            owners.append(("r", i))
    halves = {}
    ring_hits = {i: [] for i in range(len(rings))}
    if starts:
        bundle = trace_paths(field, np.array(starts), uphill=True, targets=targets, radii=radii,
                             inside=region.in_grid, first_points=np.array(firsts))
        for k, (what, i) in enumerate(owners):
            t = int(bundle.target[k])
            t = int(owner[t]) if t >= 0 else -1
            end = label_of(ends[t]) if t >= 0 else None
            if what == "b":
                halves.setdefault(i, []).append((end, bundle.points[k], bundle.reason[k], t))
            else:
                ring_hits[i].append(end)
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
    for i, cp in enumerate(rings):
        cp.atoms = _cyclic_sequence(ring_hits[i])
    if cages and rings:
        starts, owners = [], []
        for i, cp in enumerate(rings):
            e1 = cp.eigenvectors[0]
            for s in (-1.0, 1.0):
                starts.append(cp.position + s * PATH_OFFSET * e1)
                owners.append(i)
        ctargets = np.array([cp.position for cp in cages])
        bundle = trace_paths(field, np.array(starts), uphill=False, targets=ctargets,
                             radii=np.full(len(cages), 2 * settings.capture_radius),
                             inside=region.in_grid, floor=settings.density_floor)
        for k, i in enumerate(owners):
            t = int(bundle.target[k])
            if t < 0 and bundle.reason[k] == "stalled":
                # converged towards a minimum: take the nearest cage within 0.5 bohr
                d = np.linalg.norm(ctargets - bundle.points[k][-1], axis=1)
                if d.min() < 0.5:
                    t = int(np.argmin(d))
            if t >= 0 and i not in cages[t].rings:
                cages[t].rings.append(i)
    return paths
