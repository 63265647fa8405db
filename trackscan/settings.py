"""Analysis settings: one frozen value object, with documented defaults.

The manifest's ``analysis`` section and command-line flags set the same
fields.  Unknown keys and wrong types are errors naming the key.
"""

from __future__ import annotations

import dataclasses
import difflib
import math
from dataclasses import asdict, dataclass

from trackscan.errors import ConfigError
from trackscan.io.keycheck import as_number

__all__ = ["AnalysisSettings", "TrackingSettings", "settings_from_mapping", "SETTING_RANGES"]

#: Allowed range of each numeric setting: (lowest, lowest allowed?, highest).
#: Every value must also be finite; the upper ends keep the work of one frame
#: bounded (``maxiter``, ``max_points``) or catch unit slips (lengths in bohr).
SETTING_RANGES = {
    "density_floor": (0.0, True, 1e3),
    "boundary_margin": (0.0, True, 1e3),
    "gtol": (0.0, False, 1.0),
    "xtol": (0.0, False, 10.0),
    "maxiter": (1, True, 10_000),
    "max_step": (0.0, False, 10.0),
    "degenerate_tol": (0.0, True, 1e3),
    "capture_radius": (0.0, False, 10.0),
    "max_points": (64, True, 2 ** 40),
    "nuclear_radius": (0.0, True, 5.0),
    "seed_retries": (0, True, 2),
}


def setting_problem(name: str, value) -> str | None:
    """Why `value` is not allowed for setting `name`, or None (see SETTING_RANGES)."""
    if name not in SETTING_RANGES:
        return None
    lo, closed, hi = SETTING_RANGES[name]
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        return f"expected a number, got {value!r}"
    if isinstance(lo, int) and not isinstance(value, int):
        return f"expected an integer, got {value!r}"
    try:
        finite = math.isfinite(value)
    except OverflowError:
        finite = False
    if not finite:
        return f"expected a finite number, got {value!r}"
    if value < lo or (value == lo and not closed) or value > hi:
        low = f"{'>=' if closed else '>'} {lo:g}"
        return f"must be {low} and <= {hi:{'d' if isinstance(hi, int) else 'g'}}, got {value!r}"
    return None


@dataclass(frozen=True)
class AnalysisSettings:
    """Settings of the single-frame topology analysis.

    Attributes
    ----------
    density_floor : float
        Critical points with rho below this (e/bohr^3) are dropped in the
        outer vacuum, where the density is noise.  Inside the molecule (a
        region below the floor enclosed by density above it, e.g. a cage
        interior) they are kept and marked ``below_density_floor``
        (:mod:`trackscan.topology.envelope`).  Default 1e-4.
    boundary_margin : float
        Critical points closer than this (bohr) to the edge of a non-periodic
        grid are dropped (the interpolant is unreliable there).  Default 0.3.
    gtol : float
        Newton convergence: |grad rho| below this (a.u.).  Default 1e-8.
    xtol : float
        Critical points closer than this (bohr) are one point.  Default 1e-3.
    maxiter : int
        Newton iterations per seed.  Default 60.
    max_step : float
        Largest Newton step (bohr).  Default 0.25.
    degenerate_tol : float
        An eigenvalue with |lambda| below this (a.u.) counts as zero and the
        CP is reported as degenerate.  Default 1e-5.
    subtract_promolecule : bool
        Interpolate rho minus an analytic promolecule and add the
        promolecule's exact derivatives back, so the interpolant is smooth near
        the nuclear cusps (described in the report's Methods).
        Default True.
    capture_radius : float
        A gradient path within this distance (bohr) of a nucleus ends there.
        Default 0.1.
    max_points : int
        Ceiling on the number of grid points a cube may claim before it is
        refused unread.  Default 512**3.
    nuclear_radius : float
        Newton iterates entering a sphere of this radius (bohr) around a
        nucleus are abandoned and a converged point inside one is that
        nucleus's attractor (rho has a cusp there, not a critical point).  Must stay
        below the distance from an H nucleus to its bond CP (about 0.35
        bohr in O-H).  Default 0.2.
    seed_retries : int
        How many denser seeding levels to try when Poincare-Hopf fails (0 to
        2); any retry starts with seeds where the missing points should be
        (:mod:`trackscan.topology.retry`), and all retries together run at
        most twice the first pass's seeds.  Default 2.
    """

    density_floor: float = 1e-4
    boundary_margin: float = 0.3
    gtol: float = 1e-8
    xtol: float = 1e-3
    maxiter: int = 60
    max_step: float = 0.25
    degenerate_tol: float = 1e-5
    subtract_promolecule: bool = True
    capture_radius: float = 0.1
    max_points: int = 512 ** 3
    nuclear_radius: float = 0.2
    seed_retries: int = 2

    def __post_init__(self):
        for f in dataclasses.fields(self):
            problem = setting_problem(f.name, getattr(self, f.name))
            if problem is not None:
                raise ValueError(f"{f.name} {problem}")

    @classmethod
    def from_mapping(cls, mapping, *, path=None, key_prefix: str = "analysis",
                     **overrides) -> "AnalysisSettings":
        """Build settings from a manifest's ``analysis`` mapping.

        Parameters
        ----------
        mapping : dict or None
            Keys are field names.
        path : str, optional
            Manifest file, for error messages.
        key_prefix : str
            Key path prefix for error messages.
        **overrides
            Values that win over the mapping (command-line flags); ``None``
            values are ignored.

        Raises
        ------
        ConfigError
            Unknown key (with a close-match suggestion) or wrong type.
        """
        return settings_from_mapping(cls, mapping, path=path, key_prefix=key_prefix,
                                     **overrides)

    def to_dict(self) -> dict:
        """Plain dict of all settings (for JSON and cache keys)."""
        return dataclasses.asdict(self)


def settings_from_mapping(cls, mapping, *, path=None, key_prefix: str, **overrides):
    """A settings dataclass built from a manifest section, every key checked.

    Parameters
    ----------
    cls : dataclass type
        Frozen settings class whose ``__post_init__`` checks ranges.
    mapping : dict or None
        Keys are field names.
    path : str, optional
        Manifest file, for error messages.
    key_prefix : str
        Key path prefix for error messages (``analysis``, ``tracking``).
    **overrides
        Values that win over the mapping (command-line flags); ``None``
        values are ignored.

    Raises
    ------
    ConfigError
        Unknown key (with a close-match suggestion), wrong type or range.
    """
    mapping = dict(mapping or {})
    mapping.update({k: v for k, v in overrides.items() if v is not None})
    fields = {f.name: f for f in dataclasses.fields(cls)}
    kwargs = {}
    for key, value in mapping.items():
        where = f"{key_prefix}.{key}"
        if key not in fields:
            close = difflib.get_close_matches(str(key), fields, n=1)
            hint = f" (did you mean {close[0]!r}?)" if close else ""
            raise ConfigError(f"unknown setting{hint}", path, where)
        kwargs[key] = _coerce(value, fields[key].type, path, where)
        problem = setting_problem(key, kwargs[key])
        if problem is not None:
            raise ConfigError(problem, path, where)
    try:
        return cls(**kwargs)
    except ValueError as exc:
        raise ConfigError(str(exc), path, key_prefix) from None


def _coerce(value, kind, path, where):
    kind = kind if isinstance(kind, str) else kind.__name__
    if kind == "bool":
        if isinstance(value, bool):
            return value
        raise ConfigError(f"expected true or false, got {value!r}", path, where)
    if kind == "int":
        if isinstance(value, int) and not isinstance(value, bool):
            return value
        raise ConfigError(f"expected an integer, got {value!r}", path, where)
    if kind == "float":
        value = as_number(value)
        if isinstance(value, (int, float)) and not isinstance(value, bool):
            return float(value)
        raise ConfigError(f"expected a number, got {value!r}", path, where)
    if kind == "str":
        if isinstance(value, str):
            return value
        raise ConfigError(f"expected a string, got {value!r}", path, where)
    return value


_DIRECTIONS = ("auto", "ascending", "descending")


@dataclass(frozen=True)
class TrackingSettings:
    """How critical points are followed and changes judged.

    Attributes
    ----------
    match_gate : float, bohr
        A critical point of frame k and one of the same kind in frame k+1
        (after alignment) can be the same point only if they are closer than
        ``match_gate`` plus the largest nuclear displacement between the two
        frames.  Default 1.0.
    switch_penalty : float, bohr
        Added to the matching cost of two bond CPs whose paths end on
        different attractors, so that among nearby bond CPs the one linking
        the same atoms wins.  Default 0.3.
    fold_gate : float, bohr
        Two critical points whose Morse indices differ by one and that are
        lost (or born) between the same two frames are paired as a fold when
        they are closer than this.  Default 2.5.
    printed_digits : int
        Significant digits of the density values in the input files, when a
        frame does not record its own (cube files print 5).  Default 5.
    significance : float
        A fold pair that exists in a single frame only (or is missing from a
        single frame only) is judged noise when the density difference of its
        two members is below ``significance`` times that frame's resolution
        floor.  Default 3.0.
    warning_horizon : float
        Early warnings flag a frame when an indicator extrapolates to zero
        within this many scan steps ahead.  Default 1.5.
    direction : {'auto', 'ascending', 'descending'}
        Order in which the scan runs.  ``auto``: descending when the frames
        are listed with strictly decreasing values, else ascending.
    """

    match_gate: float = 1.0
    switch_penalty: float = 0.3
    fold_gate: float = 2.5
    printed_digits: int = 5
    significance: float = 3.0
    warning_horizon: float = 1.5
    direction: str = "auto"

    def __post_init__(self):
        for name in ("match_gate", "switch_penalty", "fold_gate", "significance",
                     "warning_horizon"):
            value = getattr(self, name)
            if isinstance(value, bool) or not isinstance(value, (int, float)) \
                    or not math.isfinite(value) or value < 0:
                raise ValueError(f"{name} must be a number >= 0, got {value!r}")
        if isinstance(self.printed_digits, bool) or not isinstance(self.printed_digits, int) \
                or not 1 <= self.printed_digits <= 17:
            raise ValueError(f"printed_digits must be an integer in 1..17, got {self.printed_digits!r}")
        if self.direction not in _DIRECTIONS:
            raise ValueError(f"direction must be one of {_DIRECTIONS}, got {self.direction!r}")

    @classmethod
    def from_mapping(cls, mapping, *, path=None, key_prefix: str = "tracking",
                     **overrides) -> "TrackingSettings":
        """Settings from a manifest's ``tracking`` section (keys checked, with
        close-match suggestions; ConfigError names the key path)."""
        return settings_from_mapping(cls, mapping, path=path, key_prefix=key_prefix,
                                     **overrides)

    def to_dict(self) -> dict:
        """Plain dict of all settings."""
        return asdict(self)
