"""Analysis settings: one frozen value object, with documented defaults.

The manifest's ``analysis`` section and command-line flags set the same
fields.  Unknown keys and wrong types are errors naming the key.
"""

from __future__ import annotations

import dataclasses
import difflib
from dataclasses import dataclass

from trackscan.errors import ConfigError
from trackscan.io.keycheck import as_number

__all__ = ["AnalysisSettings"]


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
        promolecule's exact derivatives back (METHODS.md, section 1).
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
        nucleus's attractor (the cusp; METHODS.md section 1).  Must stay
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
            value = getattr(self, f.name)
            if f.type in ("float", float) and isinstance(value, (int, float)) \
                    and not isinstance(value, bool) and value < 0:
                raise ValueError(f"{f.name} must be >= 0, got {value}")

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
            kind = fields[key].type
            kwargs[key] = _coerce(value, kind, path, where)
        try:
            return cls(**kwargs)
        except ValueError as exc:
            raise ConfigError(str(exc), path, key_prefix) from None

    def to_dict(self) -> dict:
        """Plain dict of all settings (for JSON and cache keys)."""
        return dataclasses.asdict(self)


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
