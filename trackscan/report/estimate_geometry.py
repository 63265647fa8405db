"""The geometry at each change's estimate: the driven coordinate, key distances, an XYZ file.

The geometry comes from the scan's own generator when its manifest can be
read and has a geometry section (the same drive that made the frames, so
the coordinate is exactly the estimate); otherwise it is interpolated
linearly between the two frames of the bracket (the nuclei move little
across a refined bracket).  The report says which.
"""

from __future__ import annotations

import logging
from dataclasses import dataclass

import numpy as np

from trackscan.coordinates import measure
from trackscan.errors import TrackscanError
from trackscan.io.xyz import XYZFrame, format_xyz
from trackscan.report.change_geometry import involved_atoms
from trackscan.report.scan_view import ScanView
from trackscan.units import BOHR_IN_ANGSTROM

__all__ = ["EstimateGeometry", "estimate_geometry", "xyz_name", "COORDINATE_KINDS"]

logger = logging.getLogger(__name__)

#: Keys of the scan header's coordinate that define a measured coordinate.
COORDINATE_KINDS = ("distance", "angle", "dihedral")


@dataclass(frozen=True)
class EstimateGeometry:
    """Nuclear positions at a change's estimate.

    Attributes
    ----------
    value : float
        The estimate (coordinate units).
    numbers : (n,) int array
    positions : (n, 3) array, bohr
    origin : str
        How the geometry was obtained (generator or interpolation).
    measured : float or None
        The driven coordinate measured on this geometry (coordinate units).
    distances : list of (str, float, float, float)
        ``(atoms, before, at estimate, after)`` distances in Å between the
        atoms the change involves.
    """

    value: float
    numbers: np.ndarray
    positions: np.ndarray
    origin: str
    measured: float | None
    distances: list

    def xyz_text(self, comment: str) -> str:
        return format_xyz(XYZFrame(self.numbers, self.positions, comment))


def xyz_name(number: int) -> str:
    """File name of the geometry at change `number`'s estimate."""
    return f"geometry_change{number}.xyz"


def _generator_geometry(scan: ScanView, value: float):
    path = scan.manifest_path()
    if path is None:
        return None
    try:
        from trackscan.generators import make_generator
        from trackscan.io.manifest import load_manifest

        manifest = load_manifest(path)
        if manifest.generator is None:
            return None
        gen = make_generator(manifest.generator, coordinate=manifest.coordinate)
        if not gen.has_geometry:
            return None
        return gen.geometry(value).positions
    except (TrackscanError, OSError, ValueError) as exc:
        logger.info("no generator geometry from %s: %s", path, exc)
        return None


def _measure(scan: ScanView, positions):
    coord = scan.header.coordinate
    if coord is None:
        return None
    for kind in COORDINATE_KINDS:
        atoms = coord.extra.get(kind)
        if atoms:
            x = measure(kind, list(atoms), positions)
            if kind == "distance":
                unit = scan.unit_symbol
                return x if unit == "bohr" else x * BOHR_IN_ANGSTROM
            return x if scan.unit_symbol != "rad" else float(np.radians(x))
    return None


def estimate_geometry(scan: ScanView, change) -> EstimateGeometry | None:
    """The geometry at a change's estimate, or None when the frames carry no atoms."""
    before, after = scan.change_frames(change)
    if before is None or after is None or not before.atoms or not after.atoms:
        return None
    value = scan.estimate(change)
    numbers = before.numbers
    positions = _generator_geometry(scan, value)
    if positions is not None and len(positions) == len(numbers):
        origin = "the scan's generator (the same drive that made the frames)"
    else:
        v0, v1 = float(before.value), float(after.value)
        t = 0.0 if v1 == v0 else (value - v0) / (v1 - v0)
        positions = (1 - t) * before.positions + t * after.positions
        origin = ("linear interpolation between the two frames of the bracket "
                  f"(t = {t:.3f})")
    nums = [n for n in involved_atoms(scan, change)]
    named = set()
    for e in change.events:
        for atoms in (e.atoms, e.atoms_before, e.atoms_after):
            if atoms and len(atoms) == 2:
                named.add(tuple(sorted(a for a in atoms if isinstance(a, int))))
    pairs = sorted(p for p in named if len(p) == 2)
    if not pairs:
        pairs = [(a, b) for i, a in enumerate(nums) for b in nums[i + 1:]]
    distances = []
    for a, b in pairs:
        row = []
        for pos in (before.positions, positions, after.positions):
            row.append(float(np.linalg.norm(pos[a - 1] - pos[b - 1])) * BOHR_IN_ANGSTROM)
        distances.append((scan.labels((a, b), before), *row))
    return EstimateGeometry(value, numbers, np.asarray(positions, float), origin,
                            _measure(scan, positions), distances)
