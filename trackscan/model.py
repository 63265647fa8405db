"""The typed scan model: the one code that writes and reads the JSON contract.

Every stage passes these objects: the frame analysis returns a
:class:`Frame`, tracking returns :class:`Frame`, :class:`Change`,
:class:`Structure`, ... objects, refinement returns new :class:`Change`
objects (``dataclasses.replace``), and the report loads a
:class:`ScanResult`.  ``to_dict`` gives the contract of ``shared/DESIGN.md``
section 3 (plus the extensions listed in DEVELOPERS.md); ``from_dict`` reads
it back and names the key path of anything malformed
(``frames[3].critical_points[2].kind: expected one of ...``).

Keys that a later contract version adds and this code does not model are
kept in each object's ``extra`` mapping and written back unchanged, so a
round trip never loses data.

The classes are frozen dataclasses.  Sequences are tuples; numeric vectors
are tuples of floats (``position`` properties give numpy arrays).  Optional
keys are ``None`` when absent and are then left out of ``to_dict``; keys that
the contract always writes (even as ``null``) are written always.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass, field
from functools import cached_property
from typing import Mapping

import numpy as np

from trackscan.errors import ScanFormatError

__all__ = [
    "KINDS", "ATTRACTOR_KINDS", "MORSE_INDEX", "SCHEMA", "ScanFormatError",
    "round_value", "significant",
    "Atom", "CriticalPoint", "BondPath", "GridInfo", "Frame", "Event", "Change",
    "Uncertainty", "Resolution", "ResolutionPair", "Structure", "BondTrack",
    "EarlyWarning", "Coordinate", "ScanHeader", "ScanResult",
]

SCHEMA = "trackscan.scan/1"

#: Critical-point kinds of the contract, in order of the Morse index.
KINDS = ("nuclear", "non_nuclear", "bond", "ring", "cage", "degenerate")

#: Kinds that are nodes of the molecular graph.
ATTRACTOR_KINDS = ("nuclear", "non_nuclear")

#: Morse index (number of positive curvatures) of each nondegenerate kind.
MORSE_INDEX = {"nuclear": 0, "non_nuclear": 0, "bond": 1, "ring": 2, "cage": 3}

#: Decimals kept of a coordinate value in frame names, records and brackets
#: (1e-6 of a degree or an angstrom is far below any scan step).
VALUE_DECIMALS = 6

#: Decimals kept of a total energy (hartree) in scan.json: 1e-9 hartree is
#: below any SCF convergence threshold in use, and the last bits of an SCF
#: energy differ between BLAS builds, which would break byte-identical output.
ENERGY_DECIMALS = 9


def round_value(x: float) -> float:
    """A coordinate value rounded to :data:`VALUE_DECIMALS` decimals."""
    return round(float(x), VALUE_DECIMALS)


def round_energy(x):
    """A total energy (hartree) rounded to :data:`ENERGY_DECIMALS`; None stays None."""
    return None if x is None else round(float(x), ENERGY_DECIMALS)


def significant(x, digits: int = 10):
    """`x` (a number or nested sequence) rounded to `digits` significant digits.

    None and non-finite numbers become None (JSON ``null``, which is how
    scan.json writes them anyway); ``-0.0`` becomes ``0.0``.  This is the one
    rounding rule of the frame and tracking output, so that noise far below
    any meaningful digit (e.g. from a rigid rotation) cannot change the
    output and identical input gives identical bytes.

    Examples
    --------
    >>> significant(0.123456789012345)
    0.123456789
    >>> significant(float("nan")) is None
    True
    """
    if x is None:
        return None
    if isinstance(x, (list, tuple, np.ndarray)):
        return [significant(v, digits) for v in x]
    x = float(x)
    if not math.isfinite(x):
        return None
    return float(f"{x:.{digits}g}") + 0.0


# -- the declarative core -------------------------------------------------------------

_ALWAYS = "always"      # written even when None
_OPTIONAL = "optional"  # left out when None


def _key(name: str, *, json_key: str | None = None, mode: str = _ALWAYS, kind=None,
         default=None, many: bool = False):
    """A model field: its JSON key, whether it is optional, its nested type."""
    meta = {"json": json_key or name, "mode": mode, "kind": kind, "many": many}
    if isinstance(default, (list, dict)):
        raise TypeError("mutable default")
    return field(default=default, metadata=meta)


def _extra():
    return field(default_factory=dict, metadata={"json": None})


def _fail(path: str, message: str):
    raise ScanFormatError(f"{path}: {message}" if path else message)


def _to_json(value):
    if isinstance(value, _Model):
        return value.to_dict()
    if isinstance(value, (list, tuple)):
        return [_to_json(v) for v in value]
    if isinstance(value, Mapping):
        return {k: _to_json(v) for k, v in value.items()}
    if isinstance(value, np.ndarray):
        return value.tolist()
    return value


def _freeze(value):
    """Lists become tuples (recursively); mappings stay (copied) dicts."""
    if isinstance(value, list):
        return tuple(_freeze(v) for v in value)
    if isinstance(value, dict):
        return {k: _freeze(v) for k, v in value.items()}
    return value


class _Model:
    """Mixin: ``to_dict`` / ``from_dict`` driven by the field metadata.

    Two objects are equal when their contract dicts are (objects hold
    tuples and arrays, which the dataclass equality would compare badly).
    """

    __hash__ = None

    def __eq__(self, other):
        if type(other) is not type(self):
            return NotImplemented
        return self.to_dict() == other.to_dict()

    def to_dict(self) -> dict:
        """The contract dict of this object (JSON-ready; new lists and dicts)."""
        out = {}
        for f in dataclasses.fields(self):
            key = f.metadata.get("json")
            value = getattr(self, f.name)
            if key is None:          # the extra keys
                for k, v in value.items():
                    out[k] = _to_json(v)
                continue
            if value is None and f.metadata.get("mode") == _OPTIONAL:
                continue
            out[key] = _to_json(value)
        return out

    @classmethod
    def from_dict(cls, data, path: str = ""):
        """Build the object from its contract dict.

        Parameters
        ----------
        data : dict
        path : str
            Key path of `data` in the whole document, for messages.

        Raises
        ------
        ScanFormatError
            A required key is missing or has the wrong type; the message
            names the key path.
        """
        if not isinstance(data, Mapping):
            _fail(path, f"expected an object, got {type(data).__name__}")
        kwargs = {}
        known = set()
        extra_name = None
        for f in dataclasses.fields(cls):
            key = f.metadata.get("json")
            if key is None:
                extra_name = f.name
                continue
            known.add(key)
            where = f"{path}.{key}" if path else key
            required = f.metadata.get("mode") == _ALWAYS and f.default is dataclasses.MISSING
            if key not in data:
                if required:
                    _fail(where, "missing")
                continue
            kwargs[f.name] = cls._read(f, data[key], where)
        if extra_name is not None:
            kwargs[extra_name] = {k: _freeze(v) for k, v in data.items() if k not in known}
        obj = cls(**kwargs)
        obj._check(path)
        return obj

    @classmethod
    def _read(cls, f, value, where):
        kind = f.metadata.get("kind")
        if value is None or kind is None:
            return _freeze(value)
        if f.metadata.get("many"):
            if not isinstance(value, (list, tuple)):
                _fail(where, f"expected a list, got {type(value).__name__}")
            return tuple(kind.from_dict(v, f"{where}[{i}]") for i, v in enumerate(value))
        return kind.from_dict(value, where)

    def _check(self, path: str) -> None:
        """Checks beyond the shape (overridden where a class has rules)."""


def _num(value, where, *, allow_none=True):
    if value is None and allow_none:
        return None
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        _fail(where, f"expected a number, got {value!r}")
    return value


def _vector(value) -> np.ndarray:
    return np.asarray(value, dtype=np.float64)


# -- one frame ------------------------------------------------------------------------


@dataclass(frozen=True, eq=False)
class Atom(_Model):
    """A nucleus of a frame.

    Attributes
    ----------
    number : int
        1-based, in the order of the cube file.
    element : str
    Z : int
        Atomic number.
    position_bohr : (3,) tuple of float, bohr
    """

    number: int = _key("number", default=dataclasses.MISSING)
    element: str = _key("element", default=dataclasses.MISSING)
    Z: int = _key("Z", default=dataclasses.MISSING)
    position_bohr: tuple = _key("position_bohr", default=dataclasses.MISSING)
    extra: dict = _extra()

    @property
    def label(self) -> str:
        """``"C1"``: element symbol and number."""
        return f"{self.element}{self.number}"

    def _check(self, path):
        if isinstance(self.Z, bool) or not isinstance(self.Z, int):
            _fail(f"{path}.Z", f"expected an integer, got {self.Z!r}")
        if not isinstance(self.position_bohr, tuple) or len(self.position_bohr) != 3:
            _fail(f"{path}.position_bohr", "expected 3 numbers")


@dataclass(frozen=True, eq=False)
class CriticalPoint(_Model):
    """A critical point of one frame's density.

    Attributes
    ----------
    id : str
        The frame's own id (``"b3"``; ``n<atom>`` for nuclei).
    kind : str
        One of :data:`KINDS`.
    rank, signature : int or None
    position_bohr : (3,) tuple of float, bohr
    rho : float, e/bohr^3
    laplacian : float or None, a.u.
        None at nuclei (the cusp has no Hessian).
    eigenvalues : tuple of float or None
        Hessian eigenvalues, ascending, a.u.
    eigenvectors : tuple of tuple or None
        Rows matching `eigenvalues`.
    ellipticity : float or None
        ``lambda1/lambda2 - 1`` at bond CPs.
    atoms : tuple
        Bond CPs: the two attractors (atom numbers, or ids of non-nuclear
        attractors); ring CPs: ring atoms; nuclear CPs: the atom.
    rings : tuple of str or None
        Cage CPs: the ring CPs of the cage.
    energy_densities : dict or None
        Bond CPs: ``G``, ``V``, ``H`` (a.u.) and how they were approximated.
    track : str or None
        The persistent track label given by tracking.
    """

    id: str = _key("id", default=dataclasses.MISSING)
    kind: str = _key("kind", default=dataclasses.MISSING)
    position_bohr: tuple = _key("position_bohr", default=dataclasses.MISSING)
    rho: float = _key("rho", default=dataclasses.MISSING)
    rank: int | None = _key("rank")
    signature: int | None = _key("signature")
    laplacian: float | None = _key("laplacian")
    eigenvalues: tuple | None = _key("eigenvalues")
    eigenvectors: tuple | None = _key("eigenvectors")
    ellipticity: float | None = _key("ellipticity")
    atoms: tuple = _key("atoms", default=())
    rings: tuple | None = _key("rings", mode=_OPTIONAL)
    energy_densities: dict | None = _key("energy_densities", mode=_OPTIONAL)
    track: str | None = _key("track", mode=_OPTIONAL)
    extra: dict = _extra()

    def _check(self, path):
        if self.kind not in KINDS:
            _fail(f"{path}.kind", f"expected one of {', '.join(KINDS)}, got {self.kind!r}")
        if not isinstance(self.position_bohr, tuple) or len(self.position_bohr) != 3:
            _fail(f"{path}.position_bohr", "expected 3 numbers")
        _num(self.rho, f"{path}.rho")
        if self.atoms is None:
            object.__setattr__(self, "atoms", ())

    @cached_property
    def position(self) -> np.ndarray:
        """Position as a (3,) array, bohr."""
        return _vector(self.position_bohr)

    @property
    def is_attractor(self) -> bool:
        return self.kind in ATTRACTOR_KINDS

    @property
    def sorted_eigenvalues(self) -> tuple:
        """Eigenvalues ascending as floats (empty when unknown; nan kept)."""
        if not self.eigenvalues:
            return ()
        return tuple(sorted(math.nan if x is None else float(x) for x in self.eigenvalues))

    @property
    def min_abs_eigenvalue(self) -> float:
        """Smallest |lambda| (a.u.); nan if eigenvalues are missing."""
        eig = self.sorted_eigenvalues
        if not eig:
            return math.nan
        return float(min(abs(x) for x in eig))

    @property
    def ends(self) -> tuple:
        """The attractors a bond CP links (atom numbers or attractor ids; None if open)."""
        return tuple(_end(a) for a in self.atoms)


def _end(x):
    """A bond-path end: atom number (int), attractor id (str) or None."""
    if x is None:
        return None
    if isinstance(x, bool):
        raise ScanFormatError(f"bond path end must be an atom number or CP id, got {x!r}")
    if isinstance(x, (int, np.integer)):
        return int(x)
    if isinstance(x, float) and x.is_integer():
        return int(x)
    return str(x)


@dataclass(frozen=True, eq=False)
class BondPath(_Model):
    """The two gradient paths from a bond CP to the attractors it links.

    Attributes
    ----------
    cp : str
        Id of the bond CP.
    atoms : tuple
        The two ends (atom numbers or attractor ids; None for an open end).
    length_bohr, internuclear_bohr : float or None, bohr
    points_bohr : tuple of (3,) tuples, bohr
        The polyline.
    complete : bool
        False when a path did not reach an attractor.
    """

    cp: str = _key("cp", default=dataclasses.MISSING)
    atoms: tuple = _key("atoms", default=(None, None))
    length_bohr: float | None = _key("length_bohr")
    internuclear_bohr: float | None = _key("internuclear_bohr")
    points_bohr: tuple | None = _key("points_bohr", mode=_OPTIONAL)
    complete: bool | None = _key("complete", mode=_OPTIONAL)
    extra: dict = _extra()

    @property
    def ends(self) -> tuple:
        return tuple(_end(a) for a in (self.atoms or (None, None)))


@dataclass(frozen=True, eq=False)
class GridInfo(_Model):
    """Where a frame's grid lies.

    Attributes
    ----------
    shape : tuple of int
    origin_bohr : (3,) tuple, bohr
    axes_bohr : (3, 3) tuple, bohr
        Voxel vectors (rows).
    spacing_bohr : tuple of float, bohr
        Length of each voxel vector.
    periodic : bool
    comments : tuple of str or None
        The cube's comment lines.
    density_model : str or None
        Set when the density is trackscan's built-in model, not data: the
        one model-density flag of a frame.
    significant_digits : int or None
        Digits with which the values were printed.
    """

    shape: tuple | None = _key("shape")
    origin_bohr: tuple | None = _key("origin_bohr")
    axes_bohr: tuple | None = _key("axes_bohr")
    spacing_bohr: tuple | None = _key("spacing_bohr")
    periodic: bool = _key("periodic", default=False)
    comments: tuple | None = _key("comments", mode=_OPTIONAL)
    density_model: str | None = _key("density_model", mode=_OPTIONAL)
    significant_digits: int | None = _key("significant_digits", mode=_OPTIONAL)
    extra: dict = _extra()

    @property
    def max_spacing(self) -> float:
        """Largest voxel step, bohr (nan when unknown)."""
        s = self.spacing_bohr
        if isinstance(s, tuple) and s:
            return max(float(x) for x in s)
        if isinstance(s, (int, float)) and not isinstance(s, bool):
            return float(s)
        return math.nan

    def cell(self, path: str = "grid") -> np.ndarray | None:
        """The periodic cell (rows: cell vectors, bohr), or None when not periodic."""
        if not self.periodic:
            return None
        try:
            cell = _vector(self.axes_bohr).reshape(3, 3) * \
                np.asarray(self.shape, dtype=np.float64).reshape(3, 1)
        except (TypeError, ValueError):
            _fail(path, "a periodic frame needs grid axes_bohr and shape")
        if abs(np.linalg.det(cell)) < 1e-12:
            _fail(path, "the periodic cell is degenerate")
        return cell


@dataclass(frozen=True, eq=False)
class PoincareHopf(_Model):
    """``n - b + r - c`` of the frame against the value expected (1, or 0 periodic)."""

    value: int | None = _key("value")
    expected: int | None = _key("expected")
    holds: bool | None = _key("holds")
    extra: dict = _extra()


@dataclass(frozen=True, eq=False)
class FrameResolution(_Model):
    """What a frame's grid can resolve (set by tracking).

    Attributes
    ----------
    spacing_bohr : float, bohr
    interpolation_floor : float, e/bohr^3
    printed_digits : int
    """

    spacing_bohr: float | None = _key("spacing_bohr")
    interpolation_floor: float | None = _key("interpolation_floor")
    printed_digits: int | None = _key("printed_digits")
    extra: dict = _extra()


@dataclass(frozen=True, eq=False)
class ProbeRecord(_Model):
    """Why refinement computed a frame (its ``refine`` record).

    Attributes
    ----------
    round : int
    method : str
        Proposal scheme (``bisection``, ``fold-extrapolation``, ...).
    bracket : (2,) tuple
        The bracket the probe was placed in.
    expected : str or None
        Which side the probe was expected to fall on.
    model_estimate, delta : float or None
    tolerance : float or None
        The refine tolerance the probe was made for.
    """

    round: int | None = _key("round")
    method: str | None = _key("method")
    bracket: tuple | None = _key("bracket")
    expected: str | None = _key("expected", mode=_OPTIONAL)
    model_estimate: float | None = _key("model_estimate", mode=_OPTIONAL)
    delta: float | None = _key("delta", mode=_OPTIONAL)
    tolerance: float | None = _key("tolerance", mode=_OPTIONAL)
    extra: dict = _extra()


@dataclass(frozen=True, eq=False)
class Frame(_Model):
    """One frame of a scan: its density's topology and where it sits in the scan.

    Attributes
    ----------
    atoms : tuple of Atom
    critical_points : tuple of CriticalPoint
    bond_paths : tuple of BondPath
    counts : dict
        Number of CPs per kind.
    poincare_hopf : PoincareHopf
    complete : bool
        False when Poincaré–Hopf failed after every retry.
    grid : GridInfo
    field : str or None
        Which field was analysed.
    warnings : tuple of str
    value : float or None
        Scan-coordinate value (coordinate units); None before the scan
        places the frame.
    source : str or None
        Cube file, relative to the manifest's folder.
    energy_hartree : float or None
    index : int or None
        Position in scan order (set by tracking; shifts when refinement
        adds frames).
    label : str or None
        Stable name of the frame (set by tracking,
        :func:`trackscan.tracking.labels.frame_labels`): ``"1"``, ``"2"``,
        ... for listed frames, ``"r1"``, ... for refined ones.
    structure : int or None
        Structure number (set by tracking).
    resolution : FrameResolution or None
    refine : ProbeRecord or None
        Present on frames that refinement computed.
    """

    atoms: tuple = _key("atoms", kind=Atom, many=True, default=dataclasses.MISSING)
    critical_points: tuple = _key("critical_points", kind=CriticalPoint, many=True, default=())
    bond_paths: tuple = _key("bond_paths", kind=BondPath, many=True, default=())
    counts: dict | None = _key("counts")
    poincare_hopf: PoincareHopf | None = _key("poincare_hopf", kind=PoincareHopf)
    complete: bool = _key("complete", default=True)
    grid: GridInfo | None = _key("grid", kind=GridInfo, mode=_OPTIONAL)
    field: str | None = _key("field", mode=_OPTIONAL)
    warnings: tuple = _key("warnings", default=())
    value: float | None = _key("value", mode=_OPTIONAL)
    source: str | None = _key("source", mode=_OPTIONAL)
    energy_hartree: float | None = _key("energy_hartree", mode=_OPTIONAL)
    index: int | None = _key("index", mode=_OPTIONAL)
    label: str | None = _key("label", mode=_OPTIONAL)
    structure: int | None = _key("structure", mode=_OPTIONAL)
    resolution: FrameResolution | None = _key("resolution", kind=FrameResolution,
                                              mode=_OPTIONAL)
    refine: ProbeRecord | None = _key("refine", kind=ProbeRecord, mode=_OPTIONAL)
    extra: dict = _extra()

    def _check(self, path):
        if not self.atoms:
            _fail(f"{path}.atoms", "missing")
        if self.value is not None:
            v = _num(self.value, f"{path}.value")
            if not math.isfinite(v):
                _fail(f"{path}.value", f"expected a finite number, got {v!r}")
        ids = [cp.id for cp in self.critical_points]
        if len(set(ids)) != len(ids):
            _fail(f"{path}.critical_points", "critical point ids are not unique")
        if self.grid is not None:
            self.grid.cell(f"{path}.grid")

    # -- derived views ------------------------------------------------------------------
    @property
    def numbers(self) -> np.ndarray:
        """Atomic numbers, (n,) int array."""
        return np.array([a.Z for a in self.atoms], dtype=np.int64)

    @property
    def elements(self) -> tuple:
        return tuple(a.element for a in self.atoms)

    @property
    def positions(self) -> np.ndarray:
        """Nuclear positions, (n, 3) array, bohr."""
        return _vector([a.position_bohr for a in self.atoms]).reshape(len(self.atoms), 3)

    @property
    def is_model_density(self) -> bool:
        """True when the density is trackscan's built-in model, not data."""
        return self.grid is not None and bool(self.grid.density_model)

    @property
    def is_refined(self) -> bool:
        """True for frames that refinement computed."""
        return self.refine is not None

    @property
    def holds_poincare_hopf(self) -> bool | None:
        return None if self.poincare_hopf is None else self.poincare_hopf.holds

    @property
    def usable(self) -> bool:
        """The search closed: complete and Poincaré–Hopf not failed."""
        return bool(self.complete) and self.holds_poincare_hopf is not False

    def of_kind(self, kind: str) -> list:
        """Critical points of one kind, in frame order."""
        return [cp for cp in self.critical_points if cp.kind == kind]

    def cp(self, cp_id: str) -> CriticalPoint | None:
        """The critical point with this id, or None."""
        for cp in self.critical_points:
            if cp.id == cp_id:
                return cp
        return None

    def bond_ends(self) -> dict:
        """Bond CP id -> its two path ends (atom numbers, attractor ids, None if open)."""
        ends = {bp.cp: bp.ends for bp in self.bond_paths}
        for cp in self.critical_points:
            if cp.kind == "bond" and cp.id not in ends:
                ends[cp.id] = cp.ends if len(cp.atoms) == 2 else (None, None)
        return ends

    @property
    def name(self) -> str:
        """How the frame is named to a reader: its stable label, else its index."""
        if self.label is not None:
            return self.label
        return "?" if self.index is None else str(self.index)

    def atom_label(self, number) -> str:
        """``"C1"`` for an atom number; attractor ids and None as written."""
        if isinstance(number, int) and 1 <= number <= len(self.atoms):
            return self.atoms[number - 1].label
        return "?" if number is None else str(number)


# -- changes ----------------------------------------------------------------------------


@dataclass(frozen=True, eq=False)
class Event(_Model):
    """One thing that happened at a change.

    Attributes
    ----------
    kind : str
        ``bond_formed``, ``bond_broken``, ``bond_switched``, ``ring_formed``,
        ``ring_lost``, ``cage_formed``, ``cage_lost``, ``attractor_formed``,
        ``attractor_lost``.
    cp : str or None
        Frame-local id of the CP (in the frame on its side of the change).
    track : str or None
        Track label of the CP.
    atoms : tuple or None
        Bond paths: the two atoms; rings: the ring atoms.
    fold_with : str or None
        Track of the partner it was born or annihilated with (a fold).
    atoms_before, atoms_after : tuple or None
        ``bond_switched``: the ends before and after.
    cp_before : str or None
        ``bond_switched``: the CP id in the frame before.
    """

    kind: str = _key("kind", default=dataclasses.MISSING)
    cp: str | None = _key("cp", mode=_OPTIONAL)
    track: str | None = _key("track", mode=_OPTIONAL)
    atoms: tuple | None = _key("atoms", mode=_OPTIONAL)
    fold_with: str | None = _key("fold_with", mode=_OPTIONAL)
    atoms_before: tuple | None = _key("atoms_before", mode=_OPTIONAL)
    atoms_after: tuple | None = _key("atoms_after", mode=_OPTIONAL)
    cp_before: str | None = _key("cp_before", mode=_OPTIONAL)
    extra: dict = _extra()

    EVENT_KINDS = ("bond_formed", "bond_broken", "bond_switched", "ring_formed", "ring_lost",
                   "cage_formed", "cage_lost", "attractor_formed", "attractor_lost")

    def _check(self, path):
        if self.kind not in self.EVENT_KINDS:
            _fail(f"{path}.kind", f"unknown event kind {self.kind!r}")

    @property
    def is_birth(self) -> bool:
        return self.kind.endswith("_formed")

    @property
    def is_death(self) -> bool:
        return self.kind.endswith(("_broken", "_lost"))


@dataclass(frozen=True, eq=False)
class ResolutionPair(_Model):
    """How close to the grid's limit one coalescing pair came (a fold)."""

    tracks: tuple | None = _key("tracks")
    cps: tuple | None = _key("cps")
    frame: int | None = _key("frame")
    separation_bohr: float | None = _key("separation_bohr")
    separation_floor_bohr: float | None = _key("separation_floor_bohr")
    rho_difference: float | None = _key("rho_difference")
    rho_floor: float | None = _key("rho_floor")
    margin: float | None = _key("margin")
    extra: dict = _extra()


@dataclass(frozen=True, eq=False)
class Resolution(_Model):
    """Whether the frames beside a change are above what their grids resolve."""

    resolved: bool | None = _key("resolved")
    margin: float | None = _key("margin")
    spacing_bohr: tuple | None = _key("spacing_bohr")
    interpolation_floor: tuple | None = _key("interpolation_floor")
    rho_floor: tuple | None = _key("rho_floor")
    pairs: tuple = _key("pairs", kind=ResolutionPair, many=True, default=())
    extra: dict = _extra()


@dataclass(frozen=True, eq=False)
class Uncertainty(_Model):
    """The ± to quote with a change's estimate, coordinate units.

    Attributes
    ----------
    value : float or None
        The ± a researcher quotes; never more than `half_width`.
    source : str or None
        What sets it: ``bracket`` (half the bracket: the frames alone),
        ``model`` (the calibrated error of the fold extrapolation or the
        conflict interpolation) or ``resolution`` (how far the grid's own
        catastrophe can lie from the true one).
    half_width : float
        Half the bracket: the estimate cannot be further off than this.
    model_error : float or None
        Calibrated error of the model estimate, when there is one.
    resolution : float or None
        The resolution term, converted into the coordinate.
    """

    half_width: float | None = _key("half_width")
    model_error: float | None = _key("model_error")
    value: float | None = _key("value", mode=_OPTIONAL)
    source: str | None = _key("source", mode=_OPTIONAL)
    resolution: float | None = _key("resolution", mode=_OPTIONAL)
    extra: dict = _extra()

    SOURCES = ("bracket", "model", "resolution")


@dataclass(frozen=True, eq=False)
class Change(_Model):
    """A structural change between two neighbouring frames.

    Attributes
    ----------
    between : (2,) tuple of int
        Indices of the last frame with the old structure and the first with
        the new one (positions in scan order; they shift when refinement
        adds frames).
    between_labels : (2,) tuple of str or None
        The same two frames by their stable labels (``Frame.label``).
    bracket : (2,) tuple of float
        Their coordinate values, in scan order.
    estimate : float or None
    estimate_method : str or None
    mechanism : str
        ``fold``, ``conflict``, ``mixed`` or ``unresolved``.
    events : tuple of Event
    structures : (2,) tuple of int
    structure_type_changed : bool or None
    resolution : Resolution or None
    uncertainty : Uncertainty or None
    evaluations : int or None
        New frames refinement computed for this change.
    refine : dict or None
        The refinement record (initial bracket, tolerance, convergence),
        only on changes refinement touched.
    fit : dict or None
        The model fit behind the estimate: ``indicator`` (``d2`` for a
        fold, the signed path offset for a conflict), its estimate, error
        parts and samples.
    note : str or None
    mechanism_candidate : str or None
        What the events point to when `mechanism` is ``unresolved``.
    resolution_limited : bool or None
        True when the frames next to the bracket are below what their grids
        resolve (the mechanism is kept, read from the approach).
    """

    between: tuple = _key("between", default=dataclasses.MISSING)
    bracket: tuple = _key("bracket", default=dataclasses.MISSING)
    mechanism: str = _key("mechanism", default=dataclasses.MISSING)
    events: tuple = _key("events", kind=Event, many=True, default=())
    between_labels: tuple | None = _key("between_labels", mode=_OPTIONAL)
    estimate: float | None = _key("estimate", mode=_OPTIONAL)
    estimate_method: str | None = _key("estimate_method", mode=_OPTIONAL)
    structures: tuple | None = _key("structures", mode=_OPTIONAL)
    structure_type_changed: bool | None = _key("structure_type_changed", mode=_OPTIONAL)
    resolution: Resolution | None = _key("resolution", kind=Resolution, mode=_OPTIONAL)
    uncertainty: Uncertainty | None = _key("uncertainty", kind=Uncertainty, mode=_OPTIONAL)
    evaluations: int | None = _key("evaluations", mode=_OPTIONAL)
    refine: dict | None = _key("refine", mode=_OPTIONAL)
    fit: dict | None = _key("fit", mode=_OPTIONAL)
    note: str | None = _key("note", mode=_OPTIONAL)
    mechanism_candidate: str | None = _key("mechanism_candidate", mode=_OPTIONAL)
    resolution_limited: bool | None = _key("resolution_limited", mode=_OPTIONAL)
    extra: dict = _extra()

    MECHANISMS = ("fold", "conflict", "mixed", "unresolved")

    def _check(self, path):
        if self.mechanism not in self.MECHANISMS:
            _fail(f"{path}.mechanism", f"expected one of {', '.join(self.MECHANISMS)}, "
                                       f"got {self.mechanism!r}")
        if not isinstance(self.bracket, tuple) or len(self.bracket) != 2:
            _fail(f"{path}.bracket", "expected two values")
        if not isinstance(self.between, tuple) or len(self.between) != 2:
            _fail(f"{path}.between", "expected two frame indices")

    @property
    def mechanism_evidence(self) -> str:
        """The mechanism the events point to, even where it was judged unresolved."""
        if self.mechanism == "unresolved" and self.mechanism_candidate:
            return self.mechanism_candidate
        return self.mechanism

    @property
    def width(self) -> float:
        """|bracket|, coordinate units."""
        return abs(float(self.bracket[1]) - float(self.bracket[0]))

    def fold_pairs(self) -> list:
        """``(death_or_birth_event, partner_event)`` pairs of the folds of this change."""
        by_track = {e.track: e for e in self.events if e.track is not None}
        pairs, seen = [], set()
        for e in self.events:
            if e.fold_with is None or e.track in seen:
                continue
            partner = by_track.get(e.fold_with)
            if partner is None:
                continue
            seen.update({e.track, partner.track})
            pairs.append((e, partner))
        return pairs


# -- scan-wide tables ---------------------------------------------------------------------


@dataclass(frozen=True, eq=False)
class Structure(_Model):
    """One structure (class of molecular graphs) and the frames that have it."""

    number: int = _key("number", default=dataclasses.MISSING)
    frames: tuple = _key("frames", default=())
    bond_paths: tuple = _key("bond_paths", default=())
    non_nuclear: tuple = _key("non_nuclear", default=())
    rings: int = _key("rings", default=0)
    cages: int = _key("cages", default=0)
    extra: dict = _extra()


@dataclass(frozen=True, eq=False)
class BondTrack(_Model):
    """Indicator series of one bond-CP track along the scan."""

    track: str = _key("track", default=dataclasses.MISSING)
    atoms: tuple | None = _key("atoms")
    frames: tuple = _key("frames", default=())
    value: tuple = _key("value", default=())
    rho: tuple = _key("rho", default=())
    laplacian: tuple = _key("laplacian", default=())
    ellipticity: tuple = _key("ellipticity", default=())
    min_abs_eigenvalue: tuple = _key("min_abs_eigenvalue", default=())
    nearest_ring_bohr: tuple = _key("nearest_ring_bohr", default=())
    extra: dict = _extra()


@dataclass(frozen=True, eq=False)
class EarlyWarning(_Model):
    """A bond track whose indicators point at a change ahead."""

    track: str | None = _key("track")
    atoms: tuple | None = _key("atoms")
    frames: tuple | None = _key("frames")
    indicators: tuple | None = _key("indicators")
    projected: dict | None = _key("projected")
    change_between: tuple | None = _key("change_between")
    message: str | None = _key("message")
    extra: dict = _extra()


@dataclass(frozen=True, eq=False)
class Coordinate(_Model):
    """The scanned coordinate: label, unit, and how it is measured (if it is)."""

    label: str = _key("label", default="coordinate")
    unit: str = _key("unit", default="")
    extra: dict = _extra()


@dataclass(frozen=True, eq=False)
class ScanHeader(_Model):
    """The ``scan`` header: what was scanned, with which settings."""

    name: str = _key("name", default="scan")
    coordinate: Coordinate | None = _key("coordinate", kind=Coordinate)
    density_source: str | None = _key("density_source")
    settings: dict | None = _key("settings")
    tracking: dict | None = _key("tracking", mode=_OPTIONAL)
    periodic: bool | None = _key("periodic", mode=_OPTIONAL)
    trackscan_version: str | None = _key("trackscan_version", mode=_OPTIONAL)
    direction: str | None = _key("direction", mode=_OPTIONAL)
    description: str | None = _key("description", mode=_OPTIONAL)
    manifest: str | None = _key("manifest", mode=_OPTIONAL)
    refine: dict | None = _key("refine", mode=_OPTIONAL)
    extra: dict = _extra()


@dataclass(frozen=True, eq=False)
class ScanResult(_Model):
    """A whole scan result: the content of scan.json.

    Attributes
    ----------
    scan : ScanHeader
    frames : tuple of Frame
        In scan order.
    changes : tuple of Change
    early_warnings : tuple of EarlyWarning
    bond_tracks : tuple of BondTrack
    structures : tuple of Structure
    incomplete_frames : tuple of int
    schema : str
    """

    scan: ScanHeader = _key("scan", kind=ScanHeader, default=dataclasses.MISSING)
    frames: tuple = _key("frames", kind=Frame, many=True, default=())
    changes: tuple = _key("changes", kind=Change, many=True, default=())
    early_warnings: tuple = _key("early_warnings", kind=EarlyWarning, many=True, default=())
    bond_tracks: tuple = _key("bond_tracks", kind=BondTrack, many=True, default=())
    structures: tuple = _key("structures", kind=Structure, many=True, default=())
    incomplete_frames: tuple = _key("incomplete_frames", default=())
    schema: str = _key("schema", default=SCHEMA)
    extra: dict = _extra()

    def _check(self, path):
        if not str(self.schema).startswith("trackscan.scan/"):
            _fail("schema", f"not a trackscan scan result ({self.schema!r})")

    def __repr__(self) -> str:
        return (f"<ScanResult {self.scan.name!r}: {len(self.frames)} frames, "
                f"{len(self.structures)} structure(s), {len(self.changes)} change(s)>")

    def frame_name(self, index: int) -> str:
        """The stable name of the frame at scan position `index` (``"4"``, ``"r2"``).

        The position itself, as text, when no frame has it.
        """
        try:
            return self.frame(index).name
        except KeyError:
            return str(index)

    def frame_names(self, change) -> tuple:
        """The stable names of the two frames of a change (``("4", "r2")``)."""
        if change.between_labels:
            return tuple(str(x) for x in change.between_labels)
        return tuple(self.frame_name(k) for k in change.between)

    def frame(self, index: int) -> Frame:
        """The frame with this index (scan order)."""
        for f in self.frames:
            if f.index == index:
                return f
        raise KeyError(index)

    def change_frames(self, change: Change) -> tuple:
        """The two frames on either side of a change."""
        return self.frame(change.between[0]), self.frame(change.between[1])
