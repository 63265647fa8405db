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
