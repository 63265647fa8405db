"""Topology of one density frame: ``analyze_frame(grid, settings) -> FrameTopology``.

Steps: fit the field (tricubic B-spline of the grid, core promolecule
subtracted), place the nuclear attractors, search all other critical points
(exhaustive grid seeds, Newton), check Poincare-Hopf and retry with denser
seeds if it fails, trace bond paths and ring/cage connections, number the
CPs deterministically and build the molecular graph.
"""

from __future__ import annotations

import logging
import time
from dataclasses import dataclass, field as dc_field
from functools import cached_property

import networkx as nx
import numpy as np

from trackscan.elements import symbol
from trackscan.errors import DegenerateDensityError
from trackscan.grid import DensityGrid
from trackscan.progress import report as progress_report
from trackscan.settings import AnalysisSettings
from trackscan.topology.connect import connect_points, end_key
from trackscan.topology.envelope import DensityEnvelope
from trackscan.topology.graph import molecular_graph
from trackscan.topology.limits import check_analysable, density_warnings
from trackscan.topology.newton import merge_points
from trackscan.topology.results import COUNT_KEYS, ID_PREFIX, KINDS, CriticalPoint, fix, sig
from trackscan.topology.retry import RETRY_SEED_FACTOR, targeted_seeds
from trackscan.topology.search import (Region, converge_seeds, describe_points,
                                       exclusion_radii, find_critical_points, nuclear_maxima,
                                       nuclear_points)
from trackscan.topology.seeds import atom_seeds, grid_seeds

__all__ = ["analyze_frame", "FrameTopology", "poincare_hopf"]

logger = logging.getLogger(__name__)

FIELD_LABEL = "tricubic B-spline of the grid"


@dataclass(eq=False)
class FrameTopology:
    """Everything found in one density frame.

    Attributes
    ----------
    critical_points : list of CriticalPoint
        Ordered by kind (nuclear, non_nuclear, bond, ring, cage,
        degenerate), then by id number.
    bond_paths : list of BondPath
        One per bond CP, in bond-CP order.
    graph : networkx.MultiGraph
        Molecular graph (see :mod:`trackscan.topology.graph`).
    numbers : (n,) int array
        Atomic numbers of all atoms of the grid.
    positions : (n, 3) float array, bohr
    grid_info : dict
        ``shape``, ``origin_bohr``, ``axes_bohr``, ``spacing_bohr``, ``periodic``.
    poincare_hopf : dict
        ``{"value", "expected", "holds"}`` with value = n - b + r - c.
    complete : bool
        False when Poincare-Hopf still fails after the retries.
    warnings : list of str
    source : str or None
        The file the grid came from.
    field : str
        Which field was analysed.
    seeding_level : int
        Seeding level at which the search stopped (0 = first pass).
    timings : dict
        Seconds per stage (not part of the JSON: it would break determinism).
    core_models : list of dict
        One per atom whose density has no core (an effective core
        potential): ``{"atom", "missing_electrons", "treatment", "evidence",
        "core_radius_bohr"}``; written into that atom's entry of ``atoms``
        as ``"core_model"``.
    seed_counts : dict
        Newton seeds run per attempt: ``first``, then ``targeted``, ``1``,
        ``2`` for the retries that ran (their sum is at most
        ``1 + RETRY_SEED_FACTOR`` times ``first``).
    """

    critical_points: list
    bond_paths: list
    numbers: np.ndarray
    positions: np.ndarray
    grid_info: dict
    poincare_hopf: dict
    complete: bool
    warnings: list
    source: str | None = None
    field: str = FIELD_LABEL
    seeding_level: int = 0
    timings: dict = dc_field(default_factory=dict)
    core_models: list = dc_field(default_factory=list)
    seed_counts: dict = dc_field(default_factory=dict)

    def to_frame(self):
        """The frame as a :class:`trackscan.model.Frame` (not yet placed in a scan)."""
        from trackscan.model import Frame

        return Frame.from_dict(self.to_dict(), self.source or "frame")

    @cached_property
    def graph(self) -> nx.MultiGraph:
        """Molecular graph (see :mod:`trackscan.topology.graph`)."""
        return molecular_graph(self.to_frame())

    @property
    def counts(self) -> dict:
        """Numbers of CPs per kind: nuclear, non_nuclear, bond, ring, cage (and degenerate)."""
        out = {k: 0 for k in KINDS}
        for cp in self.critical_points:
            out[cp.kind] += 1
        return out

    def __repr__(self) -> str:
        import os

        c = self.counts
        parts = ", ".join(f"{n} {k.replace('_', '-')}" for k, n in c.items() if n)
        where = os.path.basename(self.source) if self.source else "grid"
        ph = "holds" if self.poincare_hopf.get("holds") else (
            f"fails ({self.poincare_hopf.get('value')}, expected "
            f"{self.poincare_hopf.get('expected')})")
        warn = f", {len(self.warnings)} warning(s)" if self.warnings else ""
        return f"<FrameTopology {where}: {parts}; Poincaré–Hopf {ph}{warn}>"

    def by_kind(self, kind: str) -> list:
        """The critical points of one kind."""
        return [cp for cp in self.critical_points if cp.kind == kind]

    def cp(self, cp_id: str) -> CriticalPoint:
        """The critical point with this id (KeyError if none)."""
        for cp in self.critical_points:
            if cp.id == cp_id:
                return cp
        raise KeyError(cp_id)

    def to_dict(self, *, index=None, value=None) -> dict:
        """The frame object of the scan.json contract (DESIGN.md section 3).

        Parameters
        ----------
        index : int, optional
            Frame index in its scan.
        value : float, optional
            Scan coordinate value of the frame.
        """
        counts = self.counts
        c = {k: counts[k] for k in COUNT_KEYS}
        if counts["degenerate"]:
            c["degenerate"] = counts["degenerate"]
        return {
            "index": index,
            "value": None if value is None else sig(value),
            "source": self.source,
            "counts": c,
            "poincare_hopf": dict(self.poincare_hopf),
            "complete": bool(self.complete),
            "warnings": list(self.warnings),
            "critical_points": [cp.to_dict() for cp in self.critical_points],
            "bond_paths": [bp.to_dict() for bp in self.bond_paths],
            "atoms": self._atoms_dict(),
            "grid": dict(self.grid_info),
            "field": self.field,
        }


    def _atoms_dict(self) -> list:
        cores = {m["atom"]: m for m in self.core_models}
        out = []
        for i, (z, p) in enumerate(zip(self.numbers, self.positions)):
            entry = {"number": i + 1, "element": symbol(z), "Z": int(z), "position_bohr": fix(p)}
            if i + 1 in cores:
                entry["core_model"] = dict(cores[i + 1])
            out.append(entry)
        return out


CORE_TREATMENT = ("model core restored: the innermost {n} electrons of the free atom "
                  "(trackscan.promolecule) added to the density; the core sphere of "
                  "{r:.2f} bohr is the atom's own (one attractor at the nucleus, no critical "
                  "points inside, paths entering it end at the nucleus)")
"""How a valence-only (ECP) atom is analysed, as written into the frame."""


def core_models(field) -> list:
    """The ``core_model`` records of the valence-only atoms of a GridField."""
    out = []
    for a in getattr(field, "valence_only", ()):
        r = float(field.core_radii[a.index])
        out.append({"atom": a.index + 1, "element": symbol(a.Z),
                    "missing_electrons": int(a.missing_electrons),
                    "treatment": CORE_TREATMENT.format(n=int(a.missing_electrons), r=r),
                    "evidence": list(a.evidence), "core_radius_bohr": sig(r),
                    "note": a.describe()})
    return out


def poincare_hopf(counts: dict, periodic: bool) -> dict:
    """n - b + r - c against its expected value (1 isolated, 0 periodic).

    References
    ----------
    .. [1] R. F. W. Bader, *Atoms in Molecules: A Quantum Theory*, Oxford
       University Press (1990), section 2.4.
    """
    value = (counts["nuclear"] + counts["non_nuclear"] - counts["bond"] + counts["ring"]
             - counts["cage"])
    expected = 0 if periodic else 1
    return {"value": int(value), "expected": expected,
            "holds": bool(value == expected and counts.get("degenerate", 0) == 0)}


def _pos_key(cp):
    return tuple(np.round(cp.position, 4).tolist())


def _without_nuclear_maxima(cps, maxima, tol):
    """Drop maxima that are a nucleus's own (off-nucleus) maximum, not non-nuclear attractors."""
    if len(maxima) == 0:
        return cps
    return [cp for cp in cps if cp.kind != "non_nuclear"
            or np.min(np.linalg.norm(maxima - cp.position, axis=1)) > tol]


def _grid_info(grid):
    from trackscan.promolecule import HEAVY_LABEL, MODEL_LABEL

    comments = [str(c).strip() for c in grid.comments]
    info = {"shape": [int(n) for n in grid.shape], "origin_bohr": fix(grid.origin),
            "axes_bohr": fix(grid.axes), "spacing_bohr": fix(grid.spacing),
            "periodic": bool(grid.periodic), "comments": comments}
    if comments and comments[0].startswith(MODEL_LABEL):
        # written by trackscan's promolecule generator: say so wherever it is shown
        info["density_model"] = comments[0] if comments[0].startswith(HEAVY_LABEL) \
            else MODEL_LABEL
    return info


def _search_with_retries(field, grid, settings, region, envelope, nuclear, maxima) -> dict:
    """All non-nuclear CPs: a first pass, then bounded retries while Poincare-Hopf fails.

    The retries (:mod:`trackscan.topology.retry`): seeds where the missing
    points should be, then the seeds grid levels 1 and 2 add, together at
    most ``RETRY_SEED_FACTOR`` times the first pass's seeds.  Degenerate CPs
    stop the retries (their index is undefined; seeds cannot mend that).

    Returns
    -------
    dict
        ``cps`` (classified, nuclear maxima removed), ``poincare_hopf``,
        ``level`` (highest grid seeding level run), ``seeds`` per attempt.
    """
    tol = max(10.0 * settings.xtol, 0.02)
    found = np.zeros((0, 3))
    kept = envelope.kept()
    out = {"seeds": {}}

    def add(pts):
        nonlocal found
        allp = np.concatenate([found, pts])
        g = np.linalg.norm(field.evaluate(allp, 1)[1], axis=1) if len(allp) else np.zeros(0)
        found = allp[merge_points(allp, g, settings.xtol, cell=region.cell)]
        cps = _without_nuclear_maxima(describe_points(field, found, settings, envelope=envelope),
                                      maxima, tol)
        counts = {k: 0 for k in KINDS}
        for cp in nuclear + cps:
            counts[cp.kind] += 1
        return cps, counts, poincare_hopf(counts, grid.periodic)

    pts, n_first = find_critical_points(field, grid, settings, region, level=0,
                                        envelope=envelope)
    cps, counts, ph = add(pts)
    out["seeds"]["first"] = n_first
    logger.debug("first pass: %d seeds, counts %s, PH %s", n_first, counts, ph)
    budget = int(RETRY_SEED_FACTOR * max(n_first, 1))
    retries = max(0, min(settings.seed_retries, 2))
    attempts = (["targeted"] if retries else []) + list(range(1, retries + 1))
    level = 0
    for attempt in attempts:
        if ph["holds"] or counts["degenerate"] or budget <= 0:
            break
        logger.info("%s: Poincare-Hopf gives %d (expected %d); retrying (%s seeds)",
                    grid.source or "grid", ph["value"], ph["expected"],
                    attempt if attempt == "targeted" else f"level {attempt}")
        if attempt == "targeted":
            x = targeted_seeds(cps, grid, kept)
        else:
            level = attempt
            u = grid_seeds(grid.values, floor=settings.density_floor, lo=region.lo,
                           hi=region.hi, periodic=region.periodic, level=attempt, kept=kept,
                           only_new=True)
            x = np.concatenate([grid.position(u),
                                atom_seeds(grid.positions[grid.numbers > 0], level=attempt)])
        pts, n = converge_seeds(field, grid, settings, region, x, envelope=envelope,
                                max_seeds=budget)
        budget -= n
        out["seeds"][str(attempt)] = n
        cps, counts, ph = add(pts)
        logger.debug("retry %s: %d seeds, counts %s, PH %s", attempt, n, counts, ph)
    out.update(cps=cps, poincare_hopf=ph, level=level)
    return out


def analyze_frame(grid: DensityGrid, settings: AnalysisSettings | None = None, *, field=None,
                  progress=None) -> FrameTopology:
    """Critical points, bond paths and molecular graph of one density grid.

    Parameters
    ----------
    grid : DensityGrid
        The frame.  Its samples seed the search; its atoms give the nuclear
        attractors.
    settings : AnalysisSettings, optional
        Defaults to ``AnalysisSettings()``.
    field : Field, optional
        Analyse this field instead of the interpolated grid (e.g. an
        analytic model sampled into `grid` for the seeds).
    progress : callable, optional
        Receives :class:`trackscan.progress.ProgressEvent` (task
        ``"analyse frame"``, 3 steps: critical points, paths, done).

    Returns
    -------
    FrameTopology

    Notes
    -----
    If Poincare-Hopf fails, the search is repeated with denser seeds (up to
    ``settings.seed_retries`` times); if it still fails the frame is
    returned with ``complete = False`` and a warning is logged.  A frame
    with degenerate CPs is also incomplete (their index is undefined), but
    is not re-seeded.
    """
    from trackscan.fields.grid_field import GridField

    settings = settings or AnalysisSettings()
    t0 = time.perf_counter()
    timings = {}
    warnings = []

    def warn(msg):
        """Keep a warning with the frame's result and log it (never silently)."""
        warnings.append(msg)
        logger.warning("%s: %s", grid.source or "grid", msg)

    stages = ("field", "critical points", "paths", "done")

    def report(stage, frac=None):
        progress_report(progress, "analyse frame", stages.index(stage), len(stages) - 1, stage)

    report("field")
    label = FIELD_LABEL
    doubts = []
    if field is None:
        check_analysable(grid)       # too few points, or a plateau: refused, not traced
        field = GridField(grid, subtract_promolecule=settings.subtract_promolecule)
        if field.model is not None and settings.subtract_promolecule:
            label = FIELD_LABEL + ", core promolecule subtracted"
        elif np.any(field.core_radii > 0):
            label = FIELD_LABEL + ", core samples smoothed"
        cores = core_models(field)
        if cores:
            label += ", model core restored at " + ", ".join(
                f"{m['element']}{m['atom']}" for m in cores)
        doubts = density_warnings(grid, field)   # said once the search is known to be bounded
    else:
        label = type(field).__name__
        cores = []
    # said with the density warnings, once the search is known to be bounded
    doubts = [f"{m['note']}: the topology near it follows the model core "
              f"({m['missing_electrons']} electrons restored, no critical points within "
              f"{float(m['core_radius_bohr']):.2f} bohr)" for m in cores] + doubts
    timings["field"] = time.perf_counter() - t0
    region = Region(grid, settings.boundary_margin)
    nuclear, skipped = nuclear_points(field, grid, region)
    if skipped:
        msg = f"atoms {skipped} are ghosts or outside the grid: no nuclear attractor placed"
        warn(msg)
    # the maximum each nucleus belongs to (off the nucleus in cusp-free densities)
    maxima, is_max = nuclear_maxima(field, np.array([cp.position for cp in nuclear]),
                                    gtol=settings.gtol)
    if not np.all(is_max):
        msg = (f"atoms {[cp.atoms[0] for cp, m in zip(nuclear, is_max) if not m]} are no "
               f"maxima of the density (it rises from the nucleus towards a neighbour)")
        warn(msg)

    report("critical points")
    t1 = time.perf_counter()
    envelope = DensityEnvelope(grid, settings.density_floor)
    search = _search_with_retries(field, grid, settings, region, envelope, nuclear,
                                  region.wrap(maxima))
    cps, ph, level = search["cps"], search["poincare_hopf"], search["level"]
    timings["critical_points"] = time.perf_counter() - t1
    for msg in doubts:
        warn(msg)
    complete = bool(ph["holds"])
    n_deg = sum(cp.kind == "degenerate" for cp in cps)
    if not complete and n_deg:
        msg = (f"Poincare-Hopf cannot be confirmed: {n_deg} degenerate critical point(s) "
               f"(an eigenvalue below {settings.degenerate_tol:g}); n - b + r - c of the "
               f"others = {ph['value']}, expected {ph['expected']}")
        warn(msg)
    elif not complete:
        msg = (f"Poincare-Hopf fails: n - b + r - c = {ph['value']}, expected {ph['expected']} "
               f"(after {len(search['seeds']) - 1} retries); critical points may be missing")
        warn(msg)
    low = [cp for cp in cps if cp.below_floor]
    if low:
        kinds = sorted({cp.kind for cp in low}, key=KINDS.index)
        warn(f"{len(low)} {'/'.join(kinds)} critical point(s) inside the molecule have rho "
             f"below the density floor {settings.density_floor:g} (lowest "
             f"{min(cp.rho for cp in low):.3g}); kept, marked below_density_floor")

    report("paths")
    t2 = time.perf_counter()
    by = {k: [cp for cp in cps if cp.kind == k] for k in KINDS}
    attractors = sorted(by["non_nuclear"], key=_pos_key)
    for i, cp in enumerate(attractors, 1):
        cp.id = f"a{i}"
    for cp in nuclear:
        cp.id = f"n{cp.atoms[0]}"

    def label_of(cp):
        return cp.atoms[0] if cp.kind == "nuclear" else cp.id

    # a path reaching a smoothed core sphere has reached its nucleus; half a grid
    # step more, because the fit inside the sphere need not match its shell exactly
    # (a path once stalled 0.005 bohr outside one)
    excl = exclusion_radii(field, grid, settings)
    core = getattr(field, "core_radii", None)
    if core is not None and len(core) == grid.n_atoms:
        excl = excl + np.where(core > 0, 0.5 * float(np.min(grid.spacing)), 0.0)
    try:
        paths = connect_points(field, nuclear, attractors, by["bond"], by["ring"], by["cage"],
                               region=region, settings=settings, label_of=label_of,
                               nuclear_radii=[excl[cp.atoms[0] - 1] for cp in nuclear],
                               nuclear_maxima=maxima)
    except DegenerateDensityError as exc:   # the path-step cap (limits.py): name the file
        if exc.path is None and grid.source:
            raise DegenerateDensityError(exc.message, grid.source) from None
        raise
    timings["paths"] = time.perf_counter() - t2
    # deterministic ids
    order = sorted(range(len(by["bond"])),
                   key=lambda i: (tuple(end_key(a) if a is not None else (2, 0, "")
                                        for a in by["bond"][i].atoms), _pos_key(by["bond"][i])))
    bonds = [by["bond"][i] for i in order]
    paths = [paths[i] for i in order]
    for i, cp in enumerate(bonds, 1):
        cp.id = f"b{i}"
    rings_sorted = sorted(by["ring"], key=lambda cp: (tuple(sorted(end_key(a) for a in cp.atoms)),
                                                      _pos_key(cp)))
    for i, cp in enumerate(rings_sorted, 1):
        cp.id = f"r{i}"
    cages = sorted(by["cage"], key=_pos_key)
    for i, cp in enumerate(cages, 1):
        cp.id = f"c{i}"
        cp.rings = sorted((by["ring"][k].id for k in cp.rings), key=lambda s: int(s[1:]))
    degenerate = sorted(by["degenerate"], key=_pos_key)
    for i, cp in enumerate(degenerate, 1):
        cp.id = f"{ID_PREFIX['degenerate']}{i}"
    open_paths = [bp for bp in paths if not bp.complete]
    if open_paths:
        msg = (f"{len(open_paths)} bond path(s) do not reach an attractor at both ends: "
               + ", ".join(bp.cp.id for bp in open_paths))
        warn(msg)
    all_cps = nuclear + attractors + bonds + rings_sorted + cages + degenerate
    timings["total"] = time.perf_counter() - t0
    report("done")
    return FrameTopology(critical_points=all_cps, bond_paths=paths,
                         numbers=np.array(grid.numbers), positions=np.array(grid.positions),
                         grid_info=_grid_info(grid), poincare_hopf=ph, complete=complete,
                         warnings=warnings, source=grid.source, field=label,
                         seeding_level=level, timings=timings, core_models=cores,
                         seed_counts=dict(search["seeds"]))
