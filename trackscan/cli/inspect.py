"""Read a cube file and print what it holds.

Prints the grid (points, spacing, origin, axes), the atoms (Å), the density
range and the electron count (the sum of the values times the voxel volume),
and names the atoms whose density has no core (an effective core potential).
Reading it checks the file thoroughly: a broken file gives one line naming
the problem and exit code 2.
"""

from __future__ import annotations

import numpy as np

from trackscan.fields.core_model import find_valence_only
from trackscan.io.cube import DEFAULT_MAX_POINTS, read_cube
from trackscan.units import BOHR_IN_ANGSTROM


def add_arguments(parser) -> None:
    parser.add_argument("cube", help="cube file (.cube, optionally .gz/.bz2/.xz)")
    parser.add_argument("--dataset", type=int, default=0,
                        help="dataset index when the file holds several (default 0)")
    parser.add_argument("--max-points", type=int, default=DEFAULT_MAX_POINTS,
                        help="refuse files claiming more grid values (default 512^3)")


def run(args) -> int:
    grid = read_cube(args.cube, dataset=args.dataset, max_points=args.max_points)
    nx, ny, nz = grid.shape
    h = grid.spacing
    print(f"file      {grid.source}")
    print(f"comments  {grid.comments[0].strip()} | {grid.comments[1].strip()}")
    print(f"grid      {nx} x {ny} x {nz} = {grid.values.size} points, "
          f"{'orthogonal' if grid.is_orthogonal else 'non-orthogonal'} axes")
    print(f"spacing   {h[0]:.4f} {h[1]:.4f} {h[2]:.4f} bohr")
    o = grid.origin * BOHR_IN_ANGSTROM
    print(f"origin    {o[0]:.4f} {o[1]:.4f} {o[2]:.4f} Å")
    print(f"values    min {grid.values.min():.4e}  max {grid.values.max():.4e} a.u.")
    charge = float(grid.numbers[grid.numbers > 0].sum())
    print(f"electrons {grid.integral():.4f} (sum of values x voxel volume; nuclear charges "
          f"{charge:g})")
    print(f"atoms     {grid.n_atoms}")
    for i, (sym, q, p) in enumerate(zip(grid.symbols, grid.charges, grid.positions), 1):
        x, y, z = np.asarray(p) * BOHR_IN_ANGSTROM
        print(f"  {sym}{i:<4d} charge {q:6.2f}   {x:10.5f} {y:10.5f} {z:10.5f} Å")
    for atom in find_valence_only(grid):
        print(f"core      {atom.describe()}: {'; '.join(atom.evidence)}")
    return 0
