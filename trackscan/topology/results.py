"""Result types of a frame analysis and their JSON form.

Numbers in the JSON form are rounded so that numerical noise far below any
meaningful digit cannot change the bytes between runs: lengths and vector
components to 8 decimals (1e-8 bohr), other quantities to 10 significant
digits.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from trackscan.model import KINDS
from trackscan.model import significant as sig

__all__ = ["CriticalPoint", "BondPath", "KINDS", "COUNT_KEYS", "sig", "fix"]

ID_PREFIX = {"nuclear": "n", "non_nuclear": "a", "bond": "b", "ring": "r", "cage": "c",
             "degenerate": "d"}

COUNT_KEYS = ("nuclear", "non_nuclear", "bond", "ring", "cage")


def fix(x, decimals: int = 8):
    """`x` (scalar or array) rounded to `decimals` decimals, as nested lists."""
    if x is None:
        return None
    a = np.round(np.asarray(x, dtype=np.float64), decimals) + 0.0
    return a.tolist()


def _json_float(x):
    if x is None:
        return None
    x = float(x)
    return sig(x) if math.isfinite(x) else None


@dataclass(eq=False)
class CriticalPoint:
    """One critical point of the density.

    Attributes
    ----------
    kind : str
        One of :data:`KINDS`.
    position : (3,) float array, bohr
    rho : float, e/bohr^3
    rank, signature : int
        (3, -3) for nuclear attractors by convention.
    laplacian : float or None
        None at nuclear CPs (the cusp: the Laplacian is not defined there).
    eigenvalues : (3,) float array or None
        Hessian eigenvalues, ascending; None at nuclear CPs.
    eigenvectors : (3, 3) float array or None
        Rows are the unit eigenvectors matching `eigenvalues`.
    gradient_norm : float
        |grad rho| at the converged point.
    ellipticity : float or None
        ``l1 / l2 - 1`` at bond CPs.
    atoms : list
        Nuclear CP: ``[atom number]``; bond CP: the two ends of its bond path
        (atom numbers, non-nuclear attractor ids, ``None`` for an open end);
        ring CP: the ring atoms in cyclic order; otherwise empty.
    rings : list of str
        Cage CPs: ids of the ring CPs whose paths descend into the cage.
    energy_densities : dict or None
        Bond CPs: ``{"G", "V", "H", "approximate"}``.
    below_floor : bool
        rho is below the density floor, and the point was kept because it
        lies inside the molecule (a cage interior: see
        :mod:`trackscan.topology.envelope`).  In JSON as
        ``"below_density_floor": true``, only when set.
    id : str
        ``n1``, ``a1``, ``b1``, ``r1``, ``c1``, ``d1``... assigned per frame.
    """

    kind: str
    position: np.ndarray
    rho: float
    rank: int = 3
    signature: int = -3
    laplacian: float | None = None
    eigenvalues: np.ndarray | None = None
    eigenvectors: np.ndarray | None = None
    gradient_norm: float = 0.0
    ellipticity: float | None = None
    atoms: list = field(default_factory=list)
    rings: list = field(default_factory=list)
    energy_densities: dict | None = None
    id: str = ""
    below_floor: bool = False

    def to_dict(self) -> dict:
        """The contract's critical-point object."""
        d = {
            "id": self.id,
            "kind": self.kind,
            "rank": int(self.rank),
            "signature": int(self.signature),
            "position_bohr": fix(self.position),
            "rho": sig(self.rho),
            "laplacian": _json_float(self.laplacian),
            "eigenvalues": None if self.eigenvalues is None else [sig(x) for x in self.eigenvalues],
            "eigenvectors": None if self.eigenvectors is None else fix(self.eigenvectors),
            "ellipticity": _json_float(self.ellipticity),
            "atoms": list(self.atoms),
        }
        if self.kind == "cage":
            d["rings"] = list(self.rings)
        if self.below_floor:
            d["below_density_floor"] = True
        if self.energy_densities is not None:
            e = self.energy_densities
            d["energy_densities"] = {"G": sig(e["G"]), "V": sig(e["V"]), "H": sig(e["H"]),
                                     "approximate": e["approximate"]}
        return d


@dataclass(eq=False)
class BondPath:
    """The two gradient paths from one bond CP.

    Attributes
    ----------
    cp : CriticalPoint
        The bond CP.
    atoms : list of two
        Ends: atom numbers (int), non-nuclear attractor ids (str) or None
        when that path did not reach an attractor.
    points : (M, 3) float array, bohr
        Polyline from one end through the CP to the other.
    length : float, bohr
        Length of the polyline.
    internuclear : float or None, bohr
        Distance between the two end nuclei (None unless both ends are atoms).
    complete : bool
        Both ends reached attractors.
    reasons : tuple of str
        How each half ended (``target``, ``outside``, ``floor``, ``stalled``,
        ``steps``).
    """

    cp: CriticalPoint
    atoms: list
    points: np.ndarray
    length: float
    internuclear: float | None
    complete: bool
    reasons: tuple = ()

    def to_dict(self) -> dict:
        """The contract's bond-path object."""
        return {
            "cp": self.cp.id,
            "atoms": list(self.atoms),
            "length_bohr": sig(self.length),
            "internuclear_bohr": _json_float(self.internuclear),
            "complete": bool(self.complete),
            "points_bohr": fix(self.points, 6),
        }
