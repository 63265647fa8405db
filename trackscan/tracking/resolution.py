"""The resolution floor of a frame: how small a density difference it can show.

Near a fold the two coalescing critical points differ in density by
Δρ = κd³/12 (METHODS.md section 2), which soon falls below what a grid can
resolve.  Two things limit it:

* printed precision: a cube file prints each value with a fixed number of
  significant digits (5 for the E13.5 format), so two printed values near ρ
  differ by no less than one unit in their last digit,
  ``10**(floor(log10 ρ) - digits + 1)``;
* interpolation: between grid points the density is interpolated.  With
  promolecule subtraction and a cubic spline, METHODS.md section 1 measured
  |Δρ| ≤ 3e-6 at spacing h = 0.1 bohr [C]; we scale that as h⁴, the order of
  a cubic interpolant (a model, not a measurement beyond h = 0.1).

The floor of a frame at density ρ is the larger of the two.

Positions are limited too: METHODS.md section 7 calls a pair absent when its
two points are closer than about three times the position error, ≈ 0.01
bohr at h ≈ 0.2 with promolecule subtraction.  We scale that as h³ (between
the measured h² and h⁵ trends of METHODS.md section 1; a model).
"""

from __future__ import annotations

import math

__all__ = ["interpolation_floor", "printed_floor", "rho_floor", "separation_floor",
           "INTERPOLATION_ERROR_AT_0P1", "SEPARATION_FLOOR_AT_0P2"]

#: |Δρ| of the interpolated density at h = 0.1 bohr (METHODS.md section 1, [C]).
INTERPOLATION_ERROR_AT_0P1 = 3.0e-6


#: Smallest resolvable CP-pair separation at h = 0.2 bohr (METHODS.md section 7).
SEPARATION_FLOOR_AT_0P2 = 0.01


def separation_floor(spacing: float) -> float:
    """Smallest distance (bohr) at which two CPs of a pair can be told apart.

    Returns 0 when the spacing is unknown.
    """
    if not math.isfinite(spacing) or spacing <= 0:
        return 0.0
    return SEPARATION_FLOOR_AT_0P2 * (spacing / 0.2) ** 3


def interpolation_floor(spacing: float) -> float:
    """Density error of interpolation at grid spacing `spacing` (bohr).

    Returns 0 when the spacing is unknown (nan): then only the printed
    precision limits the frame.
    """
    if not math.isfinite(spacing) or spacing <= 0:
        return 0.0
    return INTERPOLATION_ERROR_AT_0P1 * (spacing / 0.1) ** 4


def printed_floor(rho: float, digits: int) -> float:
    """Smallest difference of two values near `rho` printed with `digits` digits."""
    if not math.isfinite(rho) or rho <= 0:
        return 0.0
    return 10.0 ** (math.floor(math.log10(rho)) - digits + 1)


def rho_floor(rho: float, spacing: float, digits: int) -> float:
    """Resolution floor (e/bohr^3) of a frame at density level `rho`.

    Parameters
    ----------
    rho : float, e/bohr^3
        Density level of the critical points compared (nan: unknown).
    spacing : float, bohr
        Largest grid spacing of the frame.
    digits : int
        Significant digits of the printed density values.

    Examples
    --------
    >>> rho_floor(0.0123, 0.1, 5)    # printing limits: 1e-6 < 3e-6
    3e-06
    >>> rho_floor(0.25, float("nan"), 5)
    1e-05
    """
    return max(interpolation_floor(spacing), printed_floor(rho, digits))
