"""Physical constants and unit conversions.

trackscan works in atomic units inside (bohr, e/bohr^3, hartree) and converts
only at file boundaries and in reports.

References
----------
.. [1] E. Tiesinga, P. J. Mohr, D. B. Newell and B. N. Taylor, "CODATA
   recommended values of the fundamental physical constants: 2018",
   Rev. Mod. Phys. 93, 025010 (2021). :DOI:`10.1103/RevModPhys.93.025010`
"""

BOHR_IN_ANGSTROM = 0.529177210903
"""Bohr radius in angstrom (CODATA 2018)."""

ANGSTROM_IN_BOHR = 1.0 / BOHR_IN_ANGSTROM
"""One angstrom in bohr."""

HARTREE_IN_KCAL_PER_MOL = 627.5094740631
"""One hartree in kcal/mol (CODATA 2018)."""

HARTREE_IN_EV = 27.211386245988
"""One hartree in eV (CODATA 2018)."""


def angstrom_to_bohr(x):
    """Convert a length (scalar or array) from angstrom to bohr."""
    return x * ANGSTROM_IN_BOHR


def bohr_to_angstrom(x):
    """Convert a length (scalar or array) from bohr to angstrom."""
    return x * BOHR_IN_ANGSTROM


# -- unit names ---------------------------------------------------------------------
#: Canonical unit names and the spellings users write for them (case-folded;
#: ``Ångström`` and ``Å`` are written with and without the ring).
UNIT_ALIASES = {
    "angstrom": ("angstrom", "angstroms", "ångström", "ångströms", "ångstrom", "angström",
                 "å", "a", "ang", "aa"),
    "bohr": ("bohr", "bohrs", "a0", "au", "a.u."),
    "degree": ("degree", "degrees", "deg", "°"),
    "radian": ("radian", "radians", "rad"),
}

#: Canonical units by kind of coordinate.
UNITS_OF_KIND = {"distance": ("angstrom", "bohr"), "angle": ("degree", "radian"),
                 "dihedral": ("degree", "radian")}

#: Symbols shown in reports and tables.
UNIT_SYMBOLS = {"angstrom": "Å", "bohr": "bohr", "degree": "°", "radian": "rad"}

_BY_ALIAS = {alias: name for name, aliases in UNIT_ALIASES.items() for alias in aliases}


def canonical_unit(unit) -> str | None:
    """The canonical name of a unit (``'angstrom'``, ``'bohr'``, ``'degree'``,
    ``'radian'``), or None for any other text (a coordinate may be in units of
    its own, e.g. ``fraction``).

    Examples
    --------
    >>> canonical_unit("Ångström"), canonical_unit("angstroms"), canonical_unit("deg")
    ('angstrom', 'angstrom', 'degree')
    >>> canonical_unit("fraction") is None
    True
    """
    if unit is None:
        return None
    return _BY_ALIAS.get(str(unit).strip().casefold())


def unit_symbol(unit) -> str:
    """What a report shows for a unit: ``Å``, ``bohr``, ``°``, ``rad``, or the text as given."""
    name = canonical_unit(unit)
    return UNIT_SYMBOLS[name] if name else str(unit or "")


def length_factor(unit) -> float:
    """Bohr per one `unit` of length (angstrom or bohr); raises ValueError otherwise."""
    name = canonical_unit(unit)
    if name == "angstrom":
        return ANGSTROM_IN_BOHR
    if name == "bohr":
        return 1.0
    raise ValueError(f"unit {unit!r} is not a length (angstrom or bohr)")


def angle_factor(unit) -> float:
    """Degrees per one `unit` of angle (degree or radian); raises ValueError otherwise."""
    name = canonical_unit(unit)
    if name == "degree":
        return 1.0
    if name == "radian":
        return 180.0 / 3.141592653589793
    raise ValueError(f"unit {unit!r} is not an angle (degree or radian)")
