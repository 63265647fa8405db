"""SYNTHETIC TEST INPUT: hand-built frame dicts that follow the frame contract.

These are not results of any density analysis.  They are small, explicit
frame dicts (DEVELOPERS.md "Internal contracts") built to exercise the
tracking logic: matching, fold pairing, bracket order, noise and resolution.
Each scenario satisfies Poincaré–Hopf (n - b + r - c = 1) unless a test says
otherwise.
"""

from __future__ import annotations

import numpy as np

ELEMENTS = {1: "H", 6: "C", 7: "N", 8: "O"}


def bond_cp(cid, pos, atoms, *, rho=0.25, eig=(-0.6, -0.45, 0.4)):
    e = sorted(eig)
    return {"id": cid, "kind": "bond", "rank": 3, "signature": -1,
            "position_bohr": [float(x) for x in pos], "rho": rho, "laplacian": float(sum(e)),
            "eigenvalues": list(e), "ellipticity": e[0] / e[1] - 1.0, "atoms": list(atoms)}


def ring_cp(cid, pos, atoms, *, rho=0.05, eig=(-0.1, 0.2, 0.3)):
    e = sorted(eig)
    return {"id": cid, "kind": "ring", "rank": 3, "signature": 1,
            "position_bohr": [float(x) for x in pos], "rho": rho, "laplacian": float(sum(e)),
            "eigenvalues": list(e), "ellipticity": None, "atoms": list(atoms)}


def frame(value, numbers, positions, cps, *, spacing=0.1, complete=True, source=None):
    """A frame dict: nuclear CPs at the nuclei, then the given CPs."""
    positions = np.asarray(positions, dtype=float)
    atoms = [{"number": i + 1, "element": ELEMENTS[z], "Z": z,
              "position_bohr": [float(x) for x in p]} for i, (z, p) in enumerate(zip(numbers, positions))]
    nuc = [{"id": f"n{i + 1}", "kind": "nuclear", "rank": 3, "signature": -3,
            "position_bohr": [float(x) for x in p], "rho": 100.0, "laplacian": -1000.0,
            "eigenvalues": [-500.0, -500.0, -500.0], "ellipticity": None, "atoms": [i + 1]}
           for i, p in enumerate(positions)]
    allcps = nuc + list(cps)
    counts = {k: sum(cp["kind"] == k for cp in allcps)
              for k in ("nuclear", "non_nuclear", "bond", "ring", "cage")}
    ph = counts["nuclear"] + counts["non_nuclear"] - counts["bond"] + counts["ring"] - counts["cage"]
    paths = [{"cp": cp["id"], "atoms": list(cp["atoms"]), "length_bohr": 1.0,
              "internuclear_bohr": 1.0, "complete": True} for cp in cps if cp["kind"] == "bond"]
    return {"index": 0, "value": float(value), "source": source or f"f{value}.cube",
            "counts": counts, "poincare_hopf": {"value": ph, "expected": 1, "holds": ph == 1 and complete},
            "critical_points": allcps, "bond_paths": paths, "atoms": atoms,
            "grid": {"shape": [40, 40, 40], "origin_bohr": [-4.0, -4.0, -4.0],
                     "axes_bohr": [[spacing, 0, 0], [0, spacing, 0], [0, 0, spacing]],
                     "spacing_bohr": [spacing] * 3, "periodic": False},
            "complete": complete, "warnings": []}


TRIANGLE_Z = (6, 6, 6)


def ring_opening_scan(n=6, s_star=2.5, spacing=0.1, kappa=0.3, c=0.6):
    """Three carbons; bond C1-C3 and the ring CP close in as d = c*sqrt(s* - s)
    and annihilate (a fold) between s = 2 and s = 3.  Values s = 0..n-1."""
    frames = []
    for s in range(n):
        p = np.array([[0.0, 0, 0], [2.8, 0, 0], [1.4, 2.4 + 0.05 * s, 0]])
        mid12 = 0.5 * (p[0] + p[1])
        mid23 = 0.5 * (p[1] + p[2])
        cps = [bond_cp("b1", mid12, (1, 2)), bond_cp("b2", mid23, (2, 3))]
        if s < s_star:
            d = c * np.sqrt(s_star - s)
            centre = np.array([0.55, 1.0, 0.0])
            u = np.array([0.8, -0.6, 0.0])
            rho_b = 0.08
            eig_b = (-0.3, -max(0.02, 0.5 * kappa * d), 0.3)
            cps.append(bond_cp("b3", centre - 0.5 * d * u, (1, 3), rho=rho_b, eig=eig_b))
            cps.append(ring_cp("r1", centre + 0.5 * d * u, (1, 2, 3), rho=rho_b - kappa * d ** 3 / 12))
        frames.append(frame(float(s), TRIANGLE_Z, p, cps, spacing=spacing))
    return frames


def conflict_scan(n=6, s_switch=2.5):
    """Atom 3 (H) slides from above C1 to above C2; its bond path switches
    from C1 to C2 between s = 2 and s = 3 with no change in CP counts."""
    frames = []
    for s in range(n):
        x = 0.4 * s
        p = np.array([[0.0, 0, 0], [2.0, 0, 0], [x, 2.2, 0]])
        to = 1 if s < s_switch else 2
        q = p[to - 1]
        cps = [bond_cp("b1", 0.5 * (p[0] + p[1]), (1, 2)),
               bond_cp("b2", 0.5 * (q + p[2]), (to, 3), rho=0.03)]
        frames.append(frame(float(s), (6, 6, 1), p, cps))
    return frames


def rotate_frame(f, rot, shift):
    """Rigidly move every position of a frame dict (nuclei, CPs, paths)."""
    import copy

    g = copy.deepcopy(f)
    move = lambda v: [float(x) for x in np.asarray(v) @ np.asarray(rot).T + shift]
    for a in g["atoms"]:
        a["position_bohr"] = move(a["position_bohr"])
    for cp in g["critical_points"]:
        cp["position_bohr"] = move(cp["position_bohr"])
    return g


def random_rotation(rng):
    q, r = np.linalg.qr(rng.normal(size=(3, 3)))
    q = q * np.sign(np.diag(r))
    if np.linalg.det(q) < 0:
        q[:, 0] = -q[:, 0]
    return q
