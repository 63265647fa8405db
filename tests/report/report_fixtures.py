"""A hand-built scan result for the report tests: clearly synthetic test input.

Four frames of a three-atom ring (C1, C2, C3) opening as the C1–C2 distance
grows: frames 0 and 1 have three bond paths and a ring CP, frames 2 and 3
only C1–C3 and C2–C3 (the bond CP of C1–C2 and the ring CP annihilate in a
fold between frames 1 and 2).  Positions of the CPs are made up, but the
counts obey Poincaré–Hopf (3 − 3 + 1 = 1, 3 − 2 = 1), which the tests check.
"""

from __future__ import annotations

import copy

import numpy as np

from trackscan.units import ANGSTROM_IN_BOHR

VALUES = (1.50, 1.70, 1.90, 2.10)        # C1–C2 distance, Å
ENERGIES = (-113.9, -113.85, -113.78, -113.74)


def _cp(cid, track, kind, pos, rho, lap, ev, atoms=None):
    sig = {"nuclear": -3, "bond": -1, "ring": 1, "cage": 3}[kind]
    cp = {"id": cid, "track": track, "kind": kind, "rank": 3, "signature": sig,
          "position_bohr": [float(x) for x in pos], "rho": rho, "laplacian": lap,
          "eigenvalues": ev}
    if kind == "bond":
        cp["ellipticity"] = ev[0] / ev[1] - 1.0
        g, v = 0.3 * rho, -0.45 * rho          # made-up energy densities, H = G + V
        cp["energy_densities"] = {"G": g, "V": v, "H": g + v, "approximate": "synthetic"}
    if atoms is not None:
        cp["atoms"] = atoms
    return cp


def _path(cp, a, b, pos, bend=0.0):
    pa, pb, pc = (np.asarray(p, float) for p in (pos[a], pos[b], cp["position_bohr"]))
    t = np.linspace(0.0, 1.0, 9)[:, None]
    pts = np.where(t <= 0.5, pa + (pc - pa) * 2 * t, pc + (pb - pc) * (2 * t - 1))
    pts = pts + bend * np.sin(np.pi * t) * np.array([0.0, 1.0, 0.0])
    return {"cp": cp["id"], "atoms": [a, b], "complete": True,
            "points_bohr": [[round(float(x), 6) for x in p] for p in pts],
            "length_bohr": float(np.sum(np.linalg.norm(np.diff(pts, axis=0), axis=1))),
            "internuclear_bohr": float(np.linalg.norm(pa - pb))}


def _frame(i, d):
    h = 1.45 * ANGSTROM_IN_BOHR
    x = d * ANGSTROM_IN_BOHR / 2
    pos = {1: [-x, 0.0, 0.0], 2: [x, 0.0, 0.0], 3: [0.0, h, 0.0]}
    atoms = [{"number": n, "element": "C", "Z": 6, "position_bohr": pos[n]} for n in (1, 2, 3)]
    cps = [_cp(f"n{n}", f"T-n{n}", "nuclear", pos[n], 116.2116, None, [-1e3, -1e3, -1e3],
               [n]) for n in (1, 2, 3)]
    paths = []
    b13 = _cp("b1", "T-b13", "bond", [-x / 2, h / 2, 0.0], 0.21 - 0.01 * i, -0.40 + 0.02 * i,
              [-0.40, -0.35, 0.35], [1, 3])
    b23 = _cp("b2", "T-b23", "bond", [x / 2, h / 2, 0.0], 0.21 - 0.01 * i, -0.40 + 0.02 * i,
              [-0.40, -0.35, 0.35], [2, 3])
    cps += [b13, b23]
    paths += [_path(b13, 1, 3, pos, 0.05), _path(b23, 2, 3, pos, 0.05)]
    ph = 1
    if i < 2:
        gap = 0.9 - 0.6 * i                     # bond CP and ring CP close in
        b12 = _cp("b3", "T-b12", "bond", [0.0, 0.05, 0.0], 0.12 - 0.03 * i, 0.05 + 0.02 * i,
                  [-0.15 + 0.05 * i, -0.03 + 0.02 * i, 0.4], [1, 2])
        r = _cp("r1", "T-r1", "ring", [0.0, 0.05 + gap, 0.0], 0.11 - 0.02 * i, 0.3,
                [-0.1, 0.2, 0.3], [1, 2, 3])
        cps += [b12, r]
        paths.append(_path(b12, 1, 2, pos, -0.1))
        counts = {"nuclear": 3, "non_nuclear": 0, "bond": 3, "ring": 1, "cage": 0,
                  "degenerate": 0}
    else:
        counts = {"nuclear": 3, "non_nuclear": 0, "bond": 2, "ring": 0, "cage": 0,
                  "degenerate": 0}
    value = counts["nuclear"] + counts["non_nuclear"] - counts["bond"] + counts["ring"] \
        - counts["cage"]
    return {"index": i, "value": VALUES[i], "source": f"frames/f{i:02d}.cube",
            "energy": ENERGIES[i], "counts": counts,
            "poincare_hopf": {"value": value, "expected": ph, "holds": value == ph},
            "structure": 1 if i < 2 else 2, "complete": True,
            "warnings": ["grid edge close to atom 3"] if i == 3 else [],
            "atoms": atoms, "critical_points": cps, "bond_paths": paths,
            "grid": {"shape": [40, 40, 30], "origin_bohr": [-6.0, -4.0, -4.0],
                     "axes_bohr": [[0.3, 0, 0], [0, 0.3, 0], [0, 0, 0.3]],
                     "spacing_bohr": [0.3, 0.3, 0.3], "periodic": False}}


def ring_opening_scan() -> dict:
    """The synthetic scan result (a fresh deep copy each call)."""
    frames = [_frame(i, d) for i, d in enumerate(VALUES)]
    frames[1]["refine"] = {"round": 1, "method": "fold", "bracket": [1.5, 1.9]}
    return copy.deepcopy({
        "schema": "trackscan.scan/1",
        "scan": {"name": "synthetic-ring-opening",
                 "coordinate": {"label": "C1–C2 distance", "unit": "angstrom"},
                 "density_source": "synthetic test input (no density)",
                 "settings": {"density_floor": 1e-4, "gtol": 1e-8,
                              "subtract_promolecule": True}},
        "frames": frames,
        "changes": [{
            "between": [1, 2], "bracket": [1.70, 1.90], "estimate": 1.8312345,
            "estimate_method": "fold-extrapolation", "mechanism": "fold",
            "events": [{"kind": "bond_broken", "atoms": [1, 2], "cp": "b3", "track": "T-b12",
                        "fold_with": "T-r1"},
                       {"kind": "ring_lost", "cp": "r1", "track": "T-r1", "atoms": [1, 2, 3],
                        "fold_with": "T-b12"}],
            "evaluations": 1, "note": "", "structure_type_changed": True,
            "fit": {"indicator": "d2", "samples": 2, "order": 1, "estimate": 1.8312345},
            "uncertainty": {"half_width": 0.1, "model_error": 0.0123},
            "refine": {"initial_bracket": [1.5, 1.9], "tolerance": 0.01, "converged": False,
                       "bisection_evaluations": 6},
            "resolution": {"spacing_bohr": [0.3, 0.3], "rho_floor": [1e-6, 1e-6],
                           "interpolation_floor": [2.4e-4, 2.4e-4], "margin": 37.5,
                           "resolved": True,
                           "pairs": [{"cps": ["b3", "r1"], "tracks": ["T-b12", "T-r1"],
                                      "frame": 1, "separation_bohr": 0.3,
                                      "rho_difference": 0.02, "rho_floor": 5.3e-4,
                                      "margin": 37.5}]},
        }],
        "structures": [{"number": 1, "frames": [0, 1], "bond_paths": [[1, 2], [1, 3], [2, 3]],
                        "rings": 1, "cages": 0, "non_nuclear": []},
                       {"number": 2, "frames": [2, 3], "bond_paths": [[1, 3], [2, 3]],
                        "rings": 0, "cages": 0, "non_nuclear": []}],
        "early_warnings": [{"track": "T-b12", "atoms": [1, 2], "frames": [1],
                            "indicators": ["ellipticity"], "projected": {"ellipticity": 1.8512},
                            "change_between": [1, 2],
                            "message": "ellipticity of C1–C2 rising steeply"}],
    })
