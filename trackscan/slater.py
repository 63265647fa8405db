"""Ground-state electron configurations and Slater's screening rules, Z = 1-86.

The free atoms of :mod:`trackscan.promolecule` beyond Ar are single Slater
orbitals per subshell whose exponents follow Slater's rules [1]_:

- the electrons are grouped as [1s] [2s,2p] [3s,3p] [3d] [4s,4p] [4d] [4f]
  [5s,5p] [5d] [6s,6p];
- an electron of an s/p group is screened by 0.35 per other electron of its
  group (0.30 within 1s), 0.85 per electron of principal quantum number
  n - 1 and 1.00 per electron deeper still;
- an electron of a d or f group is screened by 0.35 per other electron of
  its group and 1.00 per electron of every group to its left;
- ``zeta = (Z - s) / n*`` with the effective quantum numbers
  ``n* = 1, 2, 3, 3.7, 4.0, 4.2`` for n = 1-6.

(METHODS.md section 5 states the rules [R]; the n* values are Slater's [M].)

The occupations are filled in the Madelung (n + l, n) order, with the
ground-state exceptions of the periodic table below Rn (Cr, Cu, Nb, Mo, Ru,
Rh, Pd, Ag, La, Ce, Gd, Pt, Au; the configurations tabulated by NIST [2]_,
from memory [M]).  For a spherical model density only the sums per shell
matter much; the exceptions keep the outermost shells right.

References
----------
.. [1] J. C. Slater, "Atomic shielding constants", Phys. Rev. 36, 57 (1930).
   :DOI:`10.1103/PhysRev.36.57`
.. [2] NIST Atomic Spectra Database, ground levels and ionization energies
   for the neutral atoms (configurations [M]).
"""

from __future__ import annotations

__all__ = ["MAX_Z", "configuration", "slater_shells", "N_STAR"]

MAX_Z = 86
"""Heaviest element covered (Rn)."""

#: Slater's effective principal quantum numbers n* for n = 1-6 [M].
N_STAR = {1: 1.0, 2: 2.0, 3: 3.0, 4: 3.7, 5: 4.0, 6: 4.2}

_CAPACITY = {0: 2, 1: 6, 2: 10, 3: 14}

# Madelung order: increasing n + l, then increasing n
_MADELUNG = sorted(((n, l) for n in range(1, 7) for l in range(0, min(n, 4))),
                   key=lambda nl: (nl[0] + nl[1], nl[0]))

# ground-state configurations that differ from the Madelung filling [M]
_EXCEPTIONS = {
    24: {(3, 2): 5, (4, 0): 1},                      # Cr [Ar] 3d5 4s1
    29: {(3, 2): 10, (4, 0): 1},                     # Cu [Ar] 3d10 4s1
    41: {(4, 2): 4, (5, 0): 1},                      # Nb [Kr] 4d4 5s1
    42: {(4, 2): 5, (5, 0): 1},                      # Mo [Kr] 4d5 5s1
    44: {(4, 2): 7, (5, 0): 1},                      # Ru [Kr] 4d7 5s1
    45: {(4, 2): 8, (5, 0): 1},                      # Rh [Kr] 4d8 5s1
    46: {(4, 2): 10, (5, 0): 0},                     # Pd [Kr] 4d10
    47: {(4, 2): 10, (5, 0): 1},                     # Ag [Kr] 4d10 5s1
    57: {(4, 3): 0, (5, 2): 1},                      # La [Xe] 5d1 6s2
    58: {(4, 3): 1, (5, 2): 1},                      # Ce [Xe] 4f1 5d1 6s2
    64: {(4, 3): 7, (5, 2): 1},                      # Gd [Xe] 4f7 5d1 6s2
    78: {(4, 3): 14, (5, 2): 9, (6, 0): 1},          # Pt [Xe] 4f14 5d9 6s1
    79: {(4, 3): 14, (5, 2): 10, (6, 0): 1},         # Au [Xe] 4f14 5d10 6s1
}


def configuration(z: int) -> dict:
    """Ground-state occupations ``{(n, l): electrons}`` of the neutral atom `z`.

    Parameters
    ----------
    z : int
        Atomic number, 1 to 86.

    Raises
    ------
    ValueError
        If `z` is outside H-Rn.
    """
    z = int(z)
    if not 1 <= z <= MAX_Z:
        raise ValueError(f"the free-atom model covers H-Rn (Z = 1-{MAX_Z}), got Z = {z}")
    occ = {}
    left = z
    for n, l in _MADELUNG:
        if left == 0:
            break
        k = min(_CAPACITY[l], left)
        occ[(n, l)] = k
        left -= k
    occ.update(_EXCEPTIONS.get(z, {}))
    occ = {k: v for k, v in occ.items() if v > 0}
    assert sum(occ.values()) == z
    return occ


def _group(n: int, l: int) -> tuple:
    """Slater group of subshell (n, l), as a sortable key (n, kind)."""
    return (n, 0 if l <= 1 else l - 1)


def slater_shells(z: int) -> list:
    """Subshells of atom `z` with their Slater exponents, innermost group first.

    Returns
    -------
    list of (n, l, electrons, zeta, n_star)
        In Slater's group order ([1s] [2s,2p] [3s,3p] [3d] [4s,4p] ...), s
        before p within a group.  ``zeta`` (1/bohr) is ``(Z - s) / n*``.
    """
    occ = configuration(z)
    groups = {}
    for (n, l), k in occ.items():
        groups[_group(n, l)] = groups.get(_group(n, l), 0) + k
    out = []
    for (n, l) in sorted(occ, key=lambda nl: (_group(*nl), nl[1])):
        g = _group(n, l)
        same = groups[g] - 1
        if g[1] == 0:                                  # an s/p group
            s = (0.30 if n == 1 else 0.35) * same
            for (gn, gk), k in groups.items():
                if gn == n - 1:
                    s += 0.85 * k
                elif gn < n - 1:
                    s += 1.00 * k
        else:                                          # a d or f group
            s = 0.35 * same + sum(k for h, k in groups.items() if h < g)
        n_star = N_STAR[n]
        out.append((n, l, occ[(n, l)], (z - s) / n_star, n_star))
    return out
