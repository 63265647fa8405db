"""Element symbols by atomic number (a fact of the periodic table)."""

from __future__ import annotations

__all__ = ["SYMBOLS", "symbol", "atomic_number"]

SYMBOLS = (
    "X",
    "H", "He",
    "Li", "Be", "B", "C", "N", "O", "F", "Ne",
    "Na", "Mg", "Al", "Si", "P", "S", "Cl", "Ar",
    "K", "Ca", "Sc", "Ti", "V", "Cr", "Mn", "Fe", "Co", "Ni", "Cu", "Zn",
    "Ga", "Ge", "As", "Se", "Br", "Kr",
    "Rb", "Sr", "Y", "Zr", "Nb", "Mo", "Tc", "Ru", "Rh", "Pd", "Ag", "Cd",
    "In", "Sn", "Sb", "Te", "I", "Xe",
    "Cs", "Ba", "La", "Ce", "Pr", "Nd", "Pm", "Sm", "Eu", "Gd", "Tb", "Dy",
    "Ho", "Er", "Tm", "Yb", "Lu", "Hf", "Ta", "W", "Re", "Os", "Ir", "Pt",
    "Au", "Hg", "Tl", "Pb", "Bi", "Po", "At", "Rn",
    "Fr", "Ra", "Ac", "Th", "Pa", "U", "Np", "Pu", "Am", "Cm", "Bk", "Cf",
    "Es", "Fm", "Md", "No", "Lr", "Rf", "Db", "Sg", "Bh", "Hs", "Mt", "Ds",
    "Rg", "Cn", "Nh", "Fl", "Mc", "Lv", "Ts", "Og",
)

_NUMBERS = {s.lower(): z for z, s in enumerate(SYMBOLS)}


def symbol(z: int) -> str:
    """Element symbol of atomic number `z` (``"X"`` for 0 or unknown)."""
    z = int(z)
    return SYMBOLS[z] if 0 <= z < len(SYMBOLS) else "X"


def atomic_number(sym: str) -> int:
    """Atomic number of an element symbol (case-insensitive).

    Raises
    ------
    KeyError
        If `sym` is not an element symbol.
    """
    return _NUMBERS[sym.strip().lower()]
