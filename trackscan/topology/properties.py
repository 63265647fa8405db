"""Properties of critical points: classification, ellipticity, energy densities.

Classification follows the (rank, signature) scheme of Bader [1]_: with the
Hessian eigenvalues sorted ``l1 <= l2 <= l3``, a CP whose eigenvalues all
exceed ``degenerate_tol`` in magnitude has rank 3 and signature = number of
positive minus number of negative eigenvalues: (3,-3) attractor, (3,-1) bond,
(3,+1) ring, (3,+3) cage.  A smaller eigenvalue makes it ``degenerate``
(rank < 3), never forced into a class.

Energy densities at bond CPs use Abramov's gradient-expansion estimate of
the kinetic energy density [2]_,

    G = (3/10)(3 pi^2)^(2/3) rho^(5/3) + (1/72)|grad rho|^2/rho + (1/6) lap rho,

and the local virial theorem ``(1/4) lap rho = 2G + V`` [1]_, so
``V = lap/4 - 2G`` and ``H = G + V``.  Both are approximate (reliable for
closed-shell contacts, poor for shared bonds; ../shared/METHODS.md
section 3) and labelled so in every output.

References
----------
.. [1] R. F. W. Bader, *Atoms in Molecules: A Quantum Theory*, Oxford
   University Press (1990).
.. [2] Yu. A. Abramov, "On the possibility of kinetic energy density
   evaluation from the experimental electron-density distribution",
   Acta Cryst. A53, 264 (1997). :DOI:`10.1107/S010876739601495X`
"""

from __future__ import annotations

import math

import numpy as np

__all__ = ["classify", "ellipticity", "abramov_energy_densities", "ENERGY_LABEL",
           "KIND_BY_SIGNATURE", "canonical_eigenvectors"]

ENERGY_LABEL = "Abramov (1997) + local virial theorem"
"""The ``approximate`` label carried by every energy-density output."""

KIND_BY_SIGNATURE = {-3: "non_nuclear", -1: "bond", 1: "ring", 3: "cage"}

_CF = 0.3 * (3.0 * math.pi ** 2) ** (2.0 / 3.0)  # 2.871234...


def classify(eigenvalues, degenerate_tol: float):
    """Rank, signature and kind from sorted Hessian eigenvalues.

    Parameters
    ----------
    eigenvalues : (N, 3) float array
        Ascending along axis 1.
    degenerate_tol : float
        Eigenvalues with smaller magnitude count as zero.

    Returns
    -------
    rank : (N,) int array
    signature : (N,) int array
    kind : list of str
        ``non_nuclear``, ``bond``, ``ring``, ``cage`` or ``degenerate``.
    """
    lam = np.asarray(eigenvalues, dtype=np.float64).reshape(-1, 3)
    nonzero = np.abs(lam) > degenerate_tol
    rank = nonzero.sum(axis=1)
    signature = (np.sign(lam) * nonzero).sum(axis=1).astype(int)
    kind = [KIND_BY_SIGNATURE[int(s)] if r == 3 else "degenerate"
            for r, s in zip(rank, signature)]
    return rank.astype(int), signature, kind


def ellipticity(eigenvalues) -> float:
    """Bond ellipticity ``l1 / l2 - 1`` (l1 <= l2 < 0), after Bader [1]_."""
    l1, l2 = float(eigenvalues[0]), float(eigenvalues[1])
    if l2 == 0.0:
        return math.inf
    return l1 / l2 - 1.0


def abramov_energy_densities(rho: float, laplacian: float, grad_norm: float = 0.0) -> dict:
    """Kinetic (G), potential (V) and total (H) energy density, approximate.

    Parameters
    ----------
    rho : float
        Density (e/bohr^3), > 0.
    laplacian : float
        Laplacian of the density (a.u.).
    grad_norm : float
        |grad rho|; zero at a critical point.

    Returns
    -------
    dict
        ``{"G", "V", "H", "approximate"}`` in hartree/bohr^3.

    Examples
    --------
    >>> e = abramov_energy_densities(0.02, 0.08)
    >>> round(e["H"] - (0.08 / 4 - e["G"]), 12)
    0.0
    """
    g = _CF * rho ** (5.0 / 3.0) + grad_norm ** 2 / (72.0 * rho) + laplacian / 6.0
    v = 0.25 * laplacian - 2.0 * g
    return {"G": g, "V": v, "H": g + v, "approximate": ENERGY_LABEL}


def canonical_eigenvectors(vectors) -> np.ndarray:
    """Fix the sign of each eigenvector (columns): largest component positive.

    Parameters
    ----------
    vectors : (..., 3, 3) float array
        Eigenvectors as columns (as returned by ``numpy.linalg.eigh``).

    Returns
    -------
    (..., 3, 3) float array
        Same vectors, signs fixed so outputs do not flip between runs.
    """
    v = np.array(vectors, dtype=np.float64)
    idx = np.argmax(np.abs(np.round(v, 8)), axis=-2)            # (..., 3)
    big = np.take_along_axis(v, idx[..., None, :], axis=-2)     # (..., 1, 3)
    return v * np.where(big < 0, -1.0, 1.0)
