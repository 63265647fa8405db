"""A model density with a fold, and its fold location solved independently.

Three hydrogen atoms of the built-in promolecule (free-atom Slater densities,
exact derivatives): H1 at the origin, H2 at (2.6, 0, 0) bohr, and H3 at
distance ``s`` from H1 along a fixed direction 58 degrees from the H1-H2
line.  As ``s`` grows, an H1-H2 bond CP and a ring CP are born together
(s ~ 2.35) and later the ring CP and the H1-H3 bond CP annihilate
(s ~ 2.86): two folds, one of each direction.

The fold locations are solved here on the analytic field with SciPy: the
CP conditions grad rho = 0 in the molecular plane together with
det(H_plane) = 0 (a degenerate CP), in the unknowns (x, y, s).  Nothing of
trackscan's topology, tracking or refine code is used.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
from scipy.optimize import root

from trackscan.promolecule import Promolecule

ANGLE = math.radians(58.0)
H1H2 = 2.6
BOHR_IN_ANGSTROM = 0.529177210903   # CODATA 2018


def positions(s: float) -> np.ndarray:
    """Nuclear positions (bohr) at coordinate s (the H1-H3 distance, bohr)."""
    return np.array([[0.0, 0.0, 0.0], [H1H2, 0.0, 0.0],
                     [s * math.cos(ANGLE), s * math.sin(ANGLE), 0.0]])


def field(s: float) -> Promolecule:
    return Promolecule([1, 1, 1], positions(s))


def _conditions(v):
    x, y, s = v
    f = field(s)
    p = np.array([[x, y, 0.0]])
    g = f.gradient(p)[0, :2]
    h = f.hessian(p)[0, :2, :2]
    return [g[0], g[1], np.linalg.det(h)]


def solve_fold(guess) -> float:
    """s* of the degenerate CP nearest `guess` = (x, y, s); checked to 1e-12."""
    sol = root(_conditions, guess, method="hybr", options={"xtol": 1e-13})
    res = np.abs(_conditions(sol.x))
    assert res.max() < 1e-12, res
    return float(sol.x[2])


#: Starting points of the two degenerate CPs (x, y, s), from a coarse look.
BIRTH_GUESS = (1.30, 0.45, 2.35)
DEATH_GUESS = (1.05, 1.25, 2.86)


def write_scan(folder: Path, values, *, spacing=0.1, margin=1.6, frames=None, density=True):
    """A scan manifest of the model.

    With `frames` (list of (file, value)) the frames are cube files; with
    ``density=False`` the generator section holds only the geometry drive.
    """
    folder.mkdir(parents=True, exist_ok=True)
    base = positions(2.5) * BOHR_IN_ANGSTROM
    xyz = ["3", "three model hydrogen atoms"] + [
        f"H {x:.10f} {y:.10f} {z:.10f}" for x, y, z in base]
    (folder / "h3.xyz").write_text("\n".join(xyz) + "\n")
    lines = ["name: h3-fold", "coordinate:", "  label: H1-H3 distance", "  unit: bohr",
             "  distance: [1, 3]"]
    if frames is None:
        lines += ["frames:", f"  values: [{', '.join(repr(float(v)) for v in values)}]",
                  "  directory: frames"]
    else:
        lines += ["frames:"] + [f"  - {{file: {f}, value: {v!r}}}" for f, v in frames]
    lines += ["generator:", "  geometry:", "    xyz: h3.xyz",
              "    drive: {distance: [1, 3], move: [3], unit: bohr}"]
    if density:
        lines += [f"  promolecule: {{spacing: {spacing}, margin: {margin}}}"]
    path = folder / "scan.yaml"
    path.write_text("\n".join(lines) + "\n")
    return path
