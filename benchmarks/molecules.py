"""Demo molecules and cube files for the benchmarks (written to a temp folder).

``cyclopropanol()`` gives a 10-atom geometry (Å).  ``make_cube(path, n)``
samples its density on an n x n x n box and writes a cube:

- ``kind="promolecule"`` (default): the built-in promolecular model
  (:mod:`trackscan.promolecule`), fast at any size;
- ``kind="pyscf"``: RHF/6-31G* with PySCF's cube writer (needs pyscf).

The box is the same for every n (atoms plus a 4 bohr margin), so a larger
n means a finer spacing, as when a researcher refines the grid.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np

ANGSTROM = 1.0 / 0.529177210903   # bohr per Å (CODATA 2018)
MARGIN = 4.0                      # bohr between the atoms and the box faces


def cyclopropanol():
    """Cyclopropane (r(CC) 1.51, r(CH) 1.089 Å) with one H replaced by OH.

    Returns
    -------
    list of (symbol, (x, y, z) in Å)
    """
    rcc, rch, hch = 1.510, 1.089, math.radians(115.1)
    rc = rcc / math.sqrt(3.0)
    atoms = []
    for k in range(3):
        phi = 2 * math.pi * k / 3
        atoms.append(("C", rc * np.array([math.cos(phi), math.sin(phi), 0.0])))
    for k in range(3):
        phi = 2 * math.pi * k / 3
        u = np.array([math.cos(phi), math.sin(phi), 0.0])
        for s in (1.0, -1.0):
            d = math.cos(hch / 2) * u + math.sin(hch / 2) * np.array([0, 0, s])
            if k == 0 and s > 0:
                o = atoms[0][1] + 1.42 * d
                perp = np.cross(d, [0.0, 1.0, 0.0])
                perp /= np.linalg.norm(perp)
                h = o + 0.96 * (math.cos(math.radians(71)) * d
                                + math.sin(math.radians(71)) * perp)
                atoms += [("O", o), ("H", h)]
            else:
                atoms.append(("H", atoms[k][1] + rch * d))
    return [(s, tuple(float(c) for c in p)) for s, p in atoms]


def box(positions_bohr, n: int):
    """Origin and axes of an n^3 cubic box around the atoms (same box for any n)."""
    pos = np.asarray(positions_bohr, dtype=float)
    lo = pos.min(axis=0) - MARGIN
    hi = pos.max(axis=0) + MARGIN
    side = float((hi - lo).max())
    centre = 0.5 * (lo + hi)
    h = side / (n - 1)
    return centre - 0.5 * side, np.eye(3) * h


def promolecule_cube(path: Path, n: int, atoms=None, *, digits: int = 5) -> Path:
    """Write the promolecular density of `atoms` (default cyclopropanol) on n^3 points."""
    from trackscan.elements import atomic_number
    from trackscan.grid import DensityGrid
    from trackscan.io.cube import write_cube
    from trackscan.promolecule import MODEL_LABEL, Promolecule, sample_field

    atoms = atoms or cyclopropanol()
    numbers = [atomic_number(s) for s, _ in atoms]
    pos = np.array([p for _, p in atoms]) * ANGSTROM
    model = Promolecule(numbers, pos)
    origin, axes = box(pos, n)
    values = sample_field(model, origin, axes, (n, n, n))
    grid = DensityGrid(values, origin, axes, numbers, np.asarray(numbers, float), pos,
                       comments=(MODEL_LABEL, f"benchmark cube {n}^3"))
    write_cube(path, grid, digits=digits)
    return Path(path)


def pyscf_cube(path: Path, n: int) -> Path:
    """Write the RHF/6-31G* density of cyclopropanol on n^3 points (PySCF)."""
    from pyscf import gto, scf
    from pyscf.tools import cubegen

    mol = gto.M(atom=cyclopropanol(), basis="6-31g*", unit="Angstrom", verbose=0)
    mf = scf.RHF(mol).run()
    cubegen.density(mol, str(path), mf.make_rdm1(), nx=n, ny=n, nz=n, margin=MARGIN)
    return Path(path)


def make_cube(path: Path, n: int, *, kind: str = "promolecule") -> Path:
    """Write a benchmark cube of cyclopropanol (`kind`: promolecule or pyscf)."""
    if kind == "pyscf":
        return pyscf_cube(path, n)
    return promolecule_cube(path, n)


def stretched(k: int, step: float = 0.02):
    """Cyclopropanol with its O-H group moved ``k * step`` Å away from C1."""
    atoms = cyclopropanol()
    c1, o = np.array(atoms[0][1]), np.array(atoms[6][1])
    u = (o - c1) / np.linalg.norm(o - c1)
    return [(s, tuple(np.array(p) + (k * step * u if i in (6, 7) else 0.0)))
            for i, (s, p) in enumerate(atoms)]


def scan_folder(folder: Path, frames: int, n: int, *, distinct: int | None = None) -> Path:
    """Write a scan of `frames` cubes (n^3, promolecule) and its manifest; the manifest.

    Frame k stretches C1-O by 0.02 k Å.  With `distinct` only that many
    different cubes are computed and the frames cycle through them (hard
    links), which keeps a long scan cheap to build; the analysis still reads
    and analyses every frame.
    """
    import os

    import yaml

    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    made = []
    entries = []
    for k in range(frames):
        path = folder / f"frame_{k:04d}.cube"
        j = k if distinct is None else k % distinct
        if j < len(made):
            os.link(made[j], path)
        else:
            promolecule_cube(path, n, stretched(j))
            made.append(path)
        entries.append({"file": path.name, "value": round(1.42 + 0.02 * k, 4)})
    manifest = folder / "scan.yaml"
    manifest.write_text(yaml.safe_dump({
        "name": "benchmark-scan",
        "coordinate": {"label": "C1-O stretch", "unit": "angstrom"},
        "frames": entries}))
    return manifest


C60_SINGLE = 1.45   # Å, C-C bond shared by a pentagon and a hexagon (a common value, from memory)
C60_DOUBLE = 1.40   # Å, C-C bond shared by two hexagons (a common value, from memory)


def c60(single: float = C60_SINGLE, double: float = C60_DOUBLE):
    """Buckminsterfullerene as a truncated icosahedron with two bond lengths.

    Construction: an icosahedron (vertices the cyclic permutations of
    (0, +-1, +-phi), edge 2) is truncated at every vertex v by placing an atom
    at ``v + t (w - v)`` for each of its five neighbours w.  The five atoms
    around v form a pentagon of side ``t a`` (a = icosahedron edge), and the
    atoms near the two ends of one icosahedron edge are ``(1 - 2 t) a``
    apart (the hexagon-hexagon bond).  Choosing ``t a = single`` and
    ``(1 - 2 t) a = double`` gives ``a = 2 single + double``.  The bond
    lengths 1.45 and 1.40 Å are common values (from memory), not a fit.

    Returns
    -------
    list of (symbol, (x, y, z) in Å), 60 carbon atoms centred on the origin
    """
    phi = (1.0 + math.sqrt(5.0)) / 2.0
    verts = []
    for s1 in (-1.0, 1.0):
        for s2 in (-phi, phi):
            base = (0.0, s1, s2)
            for k in range(3):
                verts.append(base[k:] + base[:k])
    verts = np.array(verts)
    edge = 2.0
    a = 2.0 * single + double
    verts *= a / edge
    t = single / a
    d = np.linalg.norm(verts[:, None] - verts[None], axis=-1)
    atoms = []
    for i, v in enumerate(verts):
        for j in np.nonzero(np.abs(d[i] - a) < 1e-6)[0]:
            atoms.append(("C", tuple(float(c) for c in v + t * (verts[j] - v))))
    assert len(atoms) == 60
    return atoms


def polyacene_chain(n_rings: int = 10):
    """A linear acene of `n_rings` fused benzene rings (planar, idealised).

    Regular hexagons of side 1.40 Å with C-H 1.08 Å pointing outwards (both
    common values, from memory; not optimised).  ``n_rings = 10`` gives
    C42H24, 66 atoms, 10 rings in a row: a long fused-ring molecule whose
    pair, triple and quadruple seeds grow with the number of atoms.

    Returns
    -------
    list of (symbol, (x, y, z) in Å)
    """
    rcc, rch = 1.40, 1.08
    h = rcc * math.sqrt(3.0) / 2.0      # half the width of a hexagon across its flats
    carbons = {}
    for k in range(n_rings):
        cx = 2.0 * h * k
        for m in range(6):
            ang = math.radians(90 + 60 * m)
            p = (round(cx + rcc * math.cos(ang), 6), round(rcc * math.sin(ang), 6))
            carbons[p] = (cx, 0.0)
    pos = sorted(carbons)
    atoms = [("C", (x, y, 0.0)) for x, y in pos]
    xy = np.array(pos)
    d = np.linalg.norm(xy[:, None] - xy[None], axis=-1)
    for i, (x, y) in enumerate(pos):
        nb = np.nonzero((d[i] > 0.1) & (d[i] < rcc + 0.05))[0]
        if len(nb) == 2:       # an outer C-H carbon: H along the outward bisector
            u = 2 * xy[i] - xy[nb[0]] - xy[nb[1]]
            u /= np.linalg.norm(u)
            atoms.append(("H", (x + rch * u[0], y + rch * u[1], 0.0)))
    return atoms


def spaced_cube(path: Path, atoms, spacing: float = 0.15, *, digits: int = 5) -> Path:
    """Write the promolecular density of `atoms` (Å) on a box of the given spacing (bohr).

    The box is trackscan's own (:func:`trackscan.promolecule.grid_box`, 4 bohr
    margin), as ``trackscan demo`` and the model generator make it.
    """
    from trackscan.elements import atomic_number
    from trackscan.io.cube import write_cube
    from trackscan.promolecule import promolecule_grid

    numbers = [atomic_number(s) for s, _ in atoms]
    pos = np.array([p for _, p in atoms]) * ANGSTROM
    write_cube(path, promolecule_grid(numbers, pos, spacing=spacing), digits=digits)
    return Path(path)


BIG_MOLECULES = {
    "c60": (c60, "C60 cage (60 atoms)"),
    "acene": (polyacene_chain, "decacene C42H24 (66 atoms, 10 fused rings)"),
}
"""Large benchmark molecules: name -> (geometry function, description)."""
