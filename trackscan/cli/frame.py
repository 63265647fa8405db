"""Analyse the density topology of one cube file.

Finds every critical point of the density (nuclear and non-nuclear
attractors, bond, ring and cage points), traces the bond paths and prints a
table: kind, position (Å), density, Laplacian and ellipticity, and the atoms
each point belongs to, followed by the Poincaré–Hopf check
n − b + r − c (1 for a molecule, 0 for a periodic cell).  A frame that fails
the check after denser retries is reported as incomplete.  With --json the
frame is also written as one frame object of the scan.json contract; it
never replaces the input cube or a file trackscan did not write (the files
it wrote are listed in the folder's .trackscan-output).
"""

from __future__ import annotations

import json
import os
from pathlib import Path

from trackscan.errors import ConfigError, InputError
from trackscan.io.atomic import write_text_atomic
from trackscan.io.ownership import ForeignFileError, guard_folder, read_ownership
from trackscan.io.cube import DEFAULT_MAX_POINTS, read_cube
from trackscan.progress import TextProgress
from trackscan.settings import AnalysisSettings
from trackscan.units import BOHR_IN_ANGSTROM


def add_arguments(parser) -> None:
    parser.add_argument("cube", help="cube file (.cube, optionally .gz/.bz2/.xz)")
    parser.add_argument("--json", metavar="OUT", default=None,
                        help="also write the frame as JSON to OUT")
    parser.add_argument("--dataset", type=int, default=0,
                        help="dataset index when the file holds several (default 0)")
    parser.add_argument("--periodic", action="store_true",
                        help="the grid is one periodic cell")
    parser.add_argument("--density-floor", type=float, default=None, metavar="RHO",
                        help="ignore critical points below this density, e/bohr^3 (default 1e-4)")
    parser.add_argument("--boundary-margin", type=float, default=None, metavar="BOHR",
                        help="ignore critical points this close to the grid faces (default 0.3)")
    parser.add_argument("--no-promolecule", action="store_true",
                        help="spline the density itself, without subtracting the "
                             "core promolecule first")
    parser.add_argument("--max-points", type=int, default=DEFAULT_MAX_POINTS,
                        help="refuse files claiming more grid values (default 512^3)")


def _check_json_target(target: Path, cube: Path) -> None:
    """Refuse a --json path that is the input, or a file trackscan did not write."""
    if target.exists() and cube.exists() and os.path.samefile(target, cube):
        raise InputError("--json names the input cube; it would be overwritten (nothing was "
                         "written)", target)
    if target.is_dir():
        raise InputError("--json names a folder, not a file", target)
    if target.exists():
        own = read_ownership(target.absolute().parent)
        rel = None if own is None else own.relative(target)
        if own is None or rel is None or not own.owns(rel):
            raise ForeignFileError("trackscan did not write this file and will not replace it "
                                   "(choose another --json path; nothing was written)", target)


def _fmt(x, spec):
    return "-" if x is None else format(x, spec)


def _atoms(atoms, symbols):
    out = []
    for a in atoms:
        if a is None:
            out.append("?")
        elif isinstance(a, int):
            out.append(f"{symbols[a - 1]}{a}")
        else:
            out.append(str(a))
    return "-".join(out) if out else ""


def run(args) -> int:
    import dataclasses

    from trackscan.topology import analyze_frame

    overrides = {"density_floor": args.density_floor, "boundary_margin": args.boundary_margin}
    if args.no_promolecule:
        overrides["subtract_promolecule"] = False
    settings = AnalysisSettings.from_mapping({}, key_prefix="option", **overrides)
    if args.dataset < 0:
        raise ConfigError(f"--dataset must be >= 0, got {args.dataset}", None, "option.dataset")
    if args.json:
        _check_json_target(Path(args.json), Path(args.cube))
    grid = read_cube(args.cube, dataset=args.dataset, max_points=args.max_points)
    if args.periodic and not grid.periodic:
        grid = dataclasses.replace(grid, periodic=True)
    progress = TextProgress()
    topo = analyze_frame(grid, settings, progress=progress)
    progress.close()
    symbols = grid.symbols
    print(f"file   {grid.source}")
    print(f"field  {topo.field}")
    if topo.grid_info.get("density_model"):
        print(f"density  {topo.grid_info['density_model']} -- a model density, not a "
              "quantum-chemistry result")
    print(f"{'id':<5} {'kind':<12} {'x/Å':>9} {'y/Å':>9} {'z/Å':>9} {'rho':>11} "
          f"{'lap rho':>11} {'ellipt.':>8}  atoms")
    for cp in topo.critical_points:
        # rounded before printing, so that -0.00001 shows as 0.0000, not -0.0000
        x, y, z = (round(float(c), 4) + 0.0 for c in cp.position * BOHR_IN_ANGSTROM)
        label = _atoms(cp.atoms, symbols)
        if cp.kind == "cage" and cp.rings:
            label = "rings " + ",".join(cp.rings)
        print(f"{cp.id:<5} {cp.kind:<12} {x:9.4f} {y:9.4f} {z:9.4f} {cp.rho:11.4e} "
              f"{_fmt(cp.laplacian, '11.4e'):>11} {_fmt(cp.ellipticity, '8.4f'):>8}  {label}")
    if topo.bond_paths:
        print("bond paths (Å): length, internuclear distance")
        for bp in topo.bond_paths:
            r = None if bp.internuclear is None else bp.internuclear * BOHR_IN_ANGSTROM
            state = "" if bp.complete else "  (open: does not reach an attractor)"
            print(f"  {bp.cp.id:<5} {_atoms(bp.atoms, symbols):<12} "
                  f"{bp.length * BOHR_IN_ANGSTROM:8.4f} {_fmt(r, '8.4f'):>8}{state}")
    c = topo.counts
    ph = topo.poincare_hopf
    verdict = "holds" if ph["holds"] else "FAILS: frame incomplete"
    print(f"Poincaré–Hopf: n - b + r - c = {c['nuclear'] + c['non_nuclear']} - {c['bond']} "
          f"+ {c['ring']} - {c['cage']} = {ph['value']} (expected {ph['expected']}): {verdict}")
    for w in topo.warnings:
        print(f"warning: {w}")
    if args.json:
        text = json.dumps(topo.to_dict(index=0), indent=1, sort_keys=False, ensure_ascii=False)
        target = Path(args.json)
        with guard_folder(target.absolute().parent, purpose="--json"):
            _check_json_target(target, Path(args.cube))
            write_text_atomic(target, text + "\n")
        print(f"wrote {args.json}")
    return 0
