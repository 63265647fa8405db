"""Read-only views of frame dicts, as tracking needs them.

A frame dict is one element of ``frames`` in scan.json (DESIGN.md section 3,
DEVELOPERS.md "Internal contracts").  Tracking reads only a few of its keys;
this module pulls them out once, checks them, and gives them fixed types, so
the matching and change code never digs in raw dicts.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from trackscan.errors import ConsistencyError, InputError

__all__ = ["CPView", "FrameView", "view_frame", "displacement", "KINDS", "ATTRACTOR_KINDS"]

#: Critical-point kinds of the contract, in order of the Morse index.
KINDS = ("nuclear", "non_nuclear", "bond", "ring", "cage", "degenerate")

#: Kinds that are nodes of the molecular graph.
ATTRACTOR_KINDS = ("nuclear", "non_nuclear")

#: Morse index (number of positive curvatures) of each nondegenerate kind.
MORSE_INDEX = {"nuclear": 0, "non_nuclear": 0, "bond": 1, "ring": 2, "cage": 3}


@dataclass(frozen=True, eq=False)
class CPView:
    """One critical point of a frame.

    Attributes
    ----------
    id : str
        The frame's own id (``"b3"``).
    kind : str
        One of :data:`KINDS`.
    position : (3,) ndarray, bohr
        Position in the frame's own coordinates.
    rho, laplacian : float
        Density (e/bohr^3) and its Laplacian (a.u.).
    eigenvalues : tuple of float
        Hessian eigenvalues, ascending.
    ellipticity : float or None
        ``lambda1/lambda2 - 1`` at bond CPs.
    atoms : tuple
        Bond CPs: the two attractors (atom numbers, or CP ids of non-nuclear
        attractors); ring CPs: ring atoms; nuclear CPs: the atom.
    order : int
        Position of the CP in the frame's list (for deterministic ties).
    """

    id: str
    kind: str
    position: np.ndarray
    rho: float
    laplacian: float
    eigenvalues: tuple
    ellipticity: float | None
    atoms: tuple
    order: int

    @property
    def min_abs_eigenvalue(self) -> float:
        """Smallest |lambda| (a.u.); nan if eigenvalues are missing."""
        if not self.eigenvalues:
            return math.nan
        return float(min(abs(x) for x in self.eigenvalues))


@dataclass(frozen=True, eq=False)
class FrameView:
    """What tracking needs of one frame.

    Attributes
    ----------
    listed : int
        Position of the frame in the list given to tracking.
    value : float
        Scan-coordinate value.
    numbers : (n,) int ndarray
        Atomic numbers, in atom order.
    elements : tuple of str
        Element symbols.
    positions : (n, 3) ndarray, bohr
        Nuclear positions.
    cps : tuple of CPView
        Critical points.
    bond_ends : dict
        Bond CP id -> tuple of the two path ends (atom number, CP id of a
        non-nuclear attractor, or None for an open end).
    complete : bool
        False when the frame's search did not close (Poincaré–Hopf failed).
    poincare_hopf_holds : bool or None
        As reported by the frame.
    spacing : float, bohr
        Largest grid spacing of the frame (nan when unknown).
    significant_digits : int or None
        Printed precision of the density values, when the frame records it.
    cell : (3, 3) ndarray or None, bohr
        Periodic cell (rows: cell vectors) when the frame is periodic.
    """

    listed: int
    value: float
    numbers: np.ndarray
    elements: tuple
    positions: np.ndarray
    cps: tuple
    bond_ends: dict
    complete: bool
    poincare_hopf_holds: bool | None
    spacing: float
    significant_digits: int | None
    cell: np.ndarray | None = None

    def of_kind(self, kind: str) -> list:
        """Critical points of one kind, in frame order."""
        return [cp for cp in self.cps if cp.kind == kind]

    def cp_by_id(self) -> dict:
        """Map of CP id -> CPView."""
        return {cp.id: cp for cp in self.cps}


def _float(x, default=math.nan) -> float:
    if x is None:
        return default
    try:
        return float(x)
    except (TypeError, ValueError):
        return default


def _end(x):
    if x is None:
        return None
    if isinstance(x, bool):
        raise InputError(f"bond path end must be an atom number or CP id, got {x!r}")
    if isinstance(x, (int, np.integer)):
        return int(x)
    if isinstance(x, float) and x.is_integer():
        return int(x)
    return str(x)


def view_frame(frame: dict, listed: int) -> FrameView:
    """Build the :class:`FrameView` of a frame dict.

    Parameters
    ----------
    frame : dict
        Frame dict per the contract.
    listed : int
        Its position in the input list (for messages).

    Returns
    -------
    FrameView

    Raises
    ------
    InputError
        A key tracking needs is missing or malformed.
    """
    where = f"frame {listed}"
    if not isinstance(frame, dict):
        raise InputError(f"{where}: expected a dict, got {type(frame).__name__}")
    if "value" not in frame or _float(frame.get("value")) != _float(frame.get("value")):
        raise InputError(f"{where}: missing or non-numeric 'value'")
    atoms = frame.get("atoms")
    if not isinstance(atoms, list) or not atoms:
        raise InputError(f"{where}: missing 'atoms'")
    try:
        numbers = np.array([int(a["Z"]) for a in atoms], dtype=np.int64)
        elements = tuple(str(a.get("element", "X")) for a in atoms)
        positions = np.array([a["position_bohr"] for a in atoms], dtype=np.float64)
    except (KeyError, TypeError, ValueError) as exc:
        raise InputError(f"{where}: malformed 'atoms' ({exc})") from None
    if positions.shape != (len(atoms), 3):
        raise InputError(f"{where}: atom positions must be 3-vectors")
    cps = []
    for i, cp in enumerate(frame.get("critical_points") or []):
        try:
            kind = str(cp["kind"])
            pos = np.array(cp["position_bohr"], dtype=np.float64).reshape(3)
            cid = str(cp["id"])
        except (KeyError, TypeError, ValueError) as exc:
            raise InputError(f"{where}: malformed critical point {i} ({exc})") from None
        if kind not in KINDS:
            raise InputError(f"{where}: critical point {cid} has unknown kind {kind!r}")
        eig = tuple(sorted(_float(x) for x in (cp.get("eigenvalues") or [])))
        ell = cp.get("ellipticity")
        atoms_of = cp.get("atoms") or ()
        cps.append(CPView(
            id=cid, kind=kind, position=pos,
            rho=_float(cp.get("rho")), laplacian=_float(cp.get("laplacian")),
            eigenvalues=eig, ellipticity=None if ell is None else _float(ell),
            atoms=tuple(_end(a) for a in atoms_of), order=i))
    ids = [cp.id for cp in cps]
    if len(set(ids)) != len(ids):
        raise InputError(f"{where}: critical point ids are not unique")
    bond_ends = {}
    for path in frame.get("bond_paths") or []:
        cid = str(path.get("cp"))
        ends = tuple(_end(a) for a in (path.get("atoms") or (None, None)))
        bond_ends[cid] = ends
    for cp in cps:
        if cp.kind == "bond" and cp.id not in bond_ends:
            bond_ends[cp.id] = cp.atoms if len(cp.atoms) == 2 else (None, None)
    grid = frame.get("grid") or {}
    spacing = grid.get("spacing_bohr")
    if isinstance(spacing, (list, tuple)) and spacing:
        spacing = max(_float(s) for s in spacing)
    spacing = _float(spacing)
    digits = grid.get("significant_digits")
    cell = None
    if grid.get("periodic"):
        try:
            cell = np.asarray(grid["axes_bohr"], dtype=np.float64).reshape(3, 3) * \
                np.asarray(grid["shape"], dtype=np.float64).reshape(3, 1)
        except (KeyError, TypeError, ValueError):
            raise InputError(f"{where}: a periodic frame needs grid axes_bohr and shape") from None
        if abs(np.linalg.det(cell)) < 1e-12:
            raise InputError(f"{where}: the periodic cell is degenerate")
    ph = frame.get("poincare_hopf") or {}
    holds = ph.get("holds")
    return FrameView(
        listed=listed, value=_float(frame["value"]), numbers=numbers, elements=elements,
        positions=positions, cps=tuple(cps), bond_ends=bond_ends,
        complete=bool(frame.get("complete", True)) and holds is not False,
        poincare_hopf_holds=None if holds is None else bool(holds),
        spacing=spacing, significant_digits=None if digits is None else int(digits),
        cell=cell)


def displacement(a, b, cell=None) -> np.ndarray:
    """``b - a`` (broadcasting), by the minimum image when `cell` is given."""
    d = np.asarray(b, dtype=np.float64) - np.asarray(a, dtype=np.float64)
    if cell is None:
        return d
    f = d @ np.linalg.inv(cell)
    return (f - np.round(f)) @ cell


def check_same_atoms(views) -> None:
    """Raise ConsistencyError unless all frames have the same atoms in order."""
    first = views[0]
    for v in views[1:]:
        if len(v.numbers) != len(first.numbers) or np.any(v.numbers != first.numbers):
            raise ConsistencyError(
                f"frame {v.listed} (value {v.value:g}) has other atoms than frame "
                f"{first.listed}: the frames of a scan must list the same atoms in the same order")
