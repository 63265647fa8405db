"""Validate a scan manifest and the consistency of its frames.

Reads the YAML (keys, types, paths), reads every frame's cube file in full,
and checks that all frames carry the same atoms in the same order, and that
the generator's program (if any) exists and is executable.  Prints
one line per frame (coordinate value, grid, electron count) and exits 0 when
everything is readable, 2 with one line naming the problem otherwise.
"""

from __future__ import annotations

from trackscan.consistency import check_same_atoms
from trackscan.io.cube import read_cube
from trackscan.io.manifest import load_manifest
from trackscan.progress import TextProgress, report


def add_arguments(parser) -> None:
    parser.add_argument("manifest", help="scan manifest (YAML)")


def run(args) -> int:
    manifest = load_manifest(args.manifest)
    if manifest.generator is not None:
        # the generator can run at all (e.g. its program exists and is executable)
        from trackscan.generators import make_generator

        make_generator(manifest.generator, coordinate=manifest.coordinate).check()
    coord = manifest.coordinate
    print(f"scan {manifest.name}: {len(manifest.frames)} frames, "
          f"coordinate {coord.label} ({coord.unit})")
    seen = []
    missing = 0
    progress = TextProgress()
    for i, entry in enumerate(manifest.frames):
        if entry.generated and not entry.file.exists():
            missing += 1
            print(f"  [{i:3d}] {entry.value:12.6g}  (to be generated: {entry.file.name})")
            continue
        grid = read_cube(entry.file, max_points=manifest.analysis.max_points)
        seen.append((entry.file, grid.numbers))
        check_same_atoms([seen[0], seen[-1]])
        shape = "x".join(map(str, grid.shape))
        print(f"  [{i:3d}] {entry.value:12.6g}  {entry.file.name:30s} {shape:>13s}  "
              f"{grid.integral():9.4f} e")
        report(progress, "read frames", i + 1, len(manifest.frames), entry.file.name)
    progress.close()
    print(f"ok: {len(seen)} frames readable and consistent"
          + (f", {missing} to be generated" if missing else ""))
    return 0
