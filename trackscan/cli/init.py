"""Write a scan manifest for a set of cube files (the first step with your own cubes).

Give the cube files (or a folder holding them) and the scanned coordinate as
1-based atom numbers:

    trackscan init cubes/*.cube --dihedral 1 2 3 4
    trackscan analyze scan.yaml

The coordinate is measured on every cube's geometry, the frames are listed
sorted along it with the measured values, and the file paths are written
relative to the manifest.  The manifest (default scan.yaml in the current
folder; --out FILE to choose) carries comments on what each key means and
what else can be set; an existing file is never overwritten.  Distances are
in angstrom, angles and dihedrals in degrees.
"""

from __future__ import annotations

import json
import os
import re
from pathlib import Path

from trackscan.consistency import check_same_atoms
from trackscan.coordinates import COORDINATE_KINDS, default_tolerance, in_unit, measure
from trackscan.elements import symbol
from trackscan.errors import InputError
from trackscan.io.atomic import write_text_atomic
from trackscan.io.cube import read_cube_header

__all__ = ["add_arguments", "run", "manifest_text", "CUBE_SUFFIXES"]

CUBE_SUFFIXES = (".cube", ".cub", ".cube.gz", ".cube.bz2", ".cube.xz")
"""File endings taken from a folder given instead of files."""

_UNITS = {"distance": "angstrom", "angle": "degree", "dihedral": "degree"}


def add_arguments(parser) -> None:
    parser.add_argument("frames", nargs="+", metavar="FRAME",
                        help="cube files of the scan (or a folder of them), in any order")
    kind = parser.add_mutually_exclusive_group(required=True)
    kind.add_argument("--distance", nargs=2, type=int, metavar=("I", "J"),
                      help="the scan coordinate is the distance of atoms I and J (1-based)")
    kind.add_argument("--angle", nargs=3, type=int, metavar=("I", "J", "K"),
                      help="the angle I-J-K at atom J")
    kind.add_argument("--dihedral", nargs=4, type=int, metavar=("I", "J", "K", "L"),
                      help="the dihedral angle I-J-K-L")
    parser.add_argument("--name", default=None,
                        help="scan name (default: the cubes' folder name); names the report folder")
    parser.add_argument("--out", metavar="FILE", default="scan.yaml",
                        help="manifest to write (default scan.yaml; never overwritten)")


def _cube_files(args_frames) -> list:
    files = []
    for item in args_frames:
        p = Path(item)
        if p.is_dir():
            found = sorted(f for f in p.iterdir()
                           if f.is_file() and f.name.lower().endswith(CUBE_SUFFIXES))
            if not found:
                raise InputError(f"no cube files ({', '.join(CUBE_SUFFIXES)}) in this folder", p)
            files.extend(found)
        elif not p.exists():
            raise InputError("no such cube file", p)
        else:
            files.append(p)
    return files


def _safe_name(text: str) -> str:
    name = re.sub(r"[^A-Za-z0-9_.+-]+", "-", text).strip("-.")
    return name or "scan"


def manifest_text(name: str, kind: str, atoms, elements, frames, *, unit: str,
                  file_name: str = "scan.yaml") -> str:
    """The commented YAML of a scan manifest.

    Parameters
    ----------
    name : str
    kind : {'distance', 'angle', 'dihedral'}
    atoms : sequence of int
        1-based atoms of the coordinate.
    elements : sequence of str
        Element symbols of all atoms (for the label).
    frames : list of (str, float)
        Relative file path and measured value, in scan order.
    unit : str
    file_name : str
        The manifest's own name (for the comments).

    Returns
    -------
    str
    """
    label = f"{kind} " + "-".join(f"{elements[a - 1]}{a}" for a in atoms)
    tol = default_tolerance(kind, unit)
    q = json.dumps      # a JSON string is a valid YAML scalar, whatever the characters
    lines = [
        f"# Scan manifest written by `trackscan init`.  Next:  trackscan analyze {file_name}",
        f"# Everything here may be edited; `trackscan check {file_name}` validates it.",
        f"name: {q(name)}                 # names the report folder (reports/<name>/)",
        "# description: free text shown in the report",
        "coordinate:",
        f"  label: {q(label)}",
        f"  unit: {unit}",
        f"  {kind}: [{', '.join(str(a) for a in atoms)}]" + " " * 8
        + "# 1-based atoms; measured on every frame",
        f"  # tolerance: {tol:g}              # listed values must match the measured ones "
        "within this",
        f"frames:                             # {len(frames)} cubes, sorted along the coordinate; "
        "values as measured",
    ]
    for file, value in frames:
        lines.append(f"  - {{file: {q(file)}, value: {round(value, 6)!r}}}")
    lines += [
        "#   a frame may also carry its total energy:  {file: ..., value: ..., energy: -154.2}",
        "# periodic: false                   # true for periodic (crystal) cubes",
        "# analysis:                         # settings of the frame analysis, e.g.",
        "#   density_floor: 1.0e-4           # ignore CPs below this density in the outer vacuum",
        "",
    ]
    return "\n".join(lines)


def run(args) -> int:
    kind = next(k for k in COORDINATE_KINDS if getattr(args, k) is not None)
    atoms = tuple(getattr(args, kind))
    out = Path(args.out)
    if out.exists():
        raise InputError("exists already; give another --out FILE (init never overwrites)", out)
    if any(a < 1 for a in atoms):
        raise InputError(f"atom numbers are 1-based, got {list(atoms)}", out)
    if len(set(atoms)) != len(atoms):
        raise InputError(f"the {kind} needs {len(atoms)} different atoms, got {list(atoms)}", out)
    files = _cube_files(args.frames)
    unit = _UNITS[kind]
    measured = []
    seen = []
    for f in files:
        header = read_cube_header(f)
        if max(atoms) > len(header.numbers):
            raise InputError(f"atom {max(atoms)} does not exist: the cube has "
                             f"{len(header.numbers)} atoms", f)
        seen.append((f, header.numbers))
        check_same_atoms([seen[0], seen[-1]])
        value = in_unit(kind, measure(kind, atoms, header.positions), unit)
        measured.append((f, value))
    measured.sort(key=lambda fv: (fv[1], str(fv[0])))
    for (f1, v1), (f2, v2) in zip(measured, measured[1:]):
        if round(v1, 6) == round(v2, 6):
            raise InputError(f"{f1.name} and {f2.name} have the same {kind} ({v1:.6g} {unit}): "
                             f"a scan needs one frame per value", f2)
    base = out.absolute().parent
    rel = [(Path(os.path.relpath(f.absolute(), base)).as_posix(), v) for f, v in measured]
    elements = [symbol(z) for z in seen[0][1]]
    name = _safe_name(args.name if args.name else files[0].absolute().parent.name)
    write_text_atomic(out, manifest_text(name, kind, atoms, elements, rel, unit=unit,
                                               file_name=out.name))
    lo, hi = measured[0][1], measured[-1][1]
    print(f"wrote {out}: scan {name!r}, {len(measured)} frames, {kind} "
          f"{'-'.join(map(str, atoms))} from {lo:.6g} to {hi:.6g} {unit}")
    print(f"next: trackscan analyze {out}")
    return 0
