"""A plane scan end to end (CLI refine: frames, analysis, boundaries, refinement, report)
against the structures of the analytic field computed independently with scipy.

The system: three hydrogen atoms in a plane, H1 at the origin, H2 at distance
d along x, H3 at 1.0 angstrom from H1 at the angle theta (H2-H1-H3).  The
built-in model density of H is the exact free-atom density exp(-2r)/pi, so
the reference (tests/maps/analytic_plane.py: scipy root finding and
steepest-ascent paths on that sum, no trackscan code) gives the structure at
any (d, theta).  On the coarse 4 x 4 grid below it has three structures
(H1-H2 + H2-H3 for a short d and a narrow angle, H1-H3 + H2-H3 for a long d
and a narrow angle, H1-H2 + H1-H3 for a wide angle); a ring structure
lives in between near the equilateral triangle.
"""

from __future__ import annotations

import json
import math
import os
import sys

import numpy as np
import pytest

sys.path.insert(0, os.path.dirname(__file__))
from analytic_plane import ANGSTROM, structure  # noqa: E402

from trackscan.cli import main  # noqa: E402

D_VALUES = [0.8, 0.95, 1.1, 1.25]          # angstrom; none is 1.0 (the isosceles tie)
ANGLES = [44.0, 56.0, 68.0, 80.0]          # degree
T_DISTANCE = 0.03                           # angstrom
T_ANGLE = 3.0                               # degree
R13 = 1.0                                   # angstrom

MANIFEST = f"""
name: h3-plane-test
coordinates:
  - {{label: H1-H2 distance, unit: angstrom, distance: [1, 2]}}
  - {{label: H2-H1-H3 angle, unit: degree, angle: [2, 1, 3]}}
frames:
  grid: [{D_VALUES}, {ANGLES}]
  directory: frames
generator:
  geometry:
    xyz: h3.xyz
    drive:
      - {{distance: [1, 2], move: [2]}}
      - {{angle: [2, 1, 3], move: [3]}}
  promolecule: {{spacing: 0.2, margin: 3.5}}
"""

XYZ = """3
H3 equilateral
H 0.0 0.0 0.0
H 1.0 0.0 0.0
H 0.5 0.8660254037844386 0.0
"""


def reference(values):
    """Bonded pairs and ring count of the analytic field at (d, theta)."""
    d, theta = values
    t = math.radians(theta)
    nuclei = np.array([[0.0, 0.0], [d, 0.0], [R13 * math.cos(t), R13 * math.sin(t)]]) * ANGSTROM
    return structure(nuclei)


@pytest.fixture(scope="module")
def refined(tmp_path_factory):
    root = tmp_path_factory.mktemp("plane")
    (root / "scan.yaml").write_text(MANIFEST)
    (root / "h3.xyz").write_text(XYZ)
    out = root / "out"
    code = main(["refine", str(root / "scan.yaml"), "--tolerance", str(T_DISTANCE),
                 "--tolerance2", str(T_ANGLE), "--subdivide", "--out", str(out)])
    assert code == 0
    return json.loads((out / "scan.json").read_text()), out


def _key(s):
    return tuple(sorted(tuple(b) for b in s["bond_paths"])), s["rings"]


@pytest.mark.slow
def test_plane_scan_json_shape(refined):
    scan, out = refined
    assert scan["dimensions"] == 2
    assert [c["unit"] for c in scan["scan"]["coordinates"]] == ["angstrom", "degree"]
    assert all(len(f["values"]) == 2 and isinstance(f["structure"], int) for f in scan["frames"])
    for name in ("report.html", "report.md", "structure_map.png", "structure_map.svg",
                 "structure_map.pdf", "boundaries.csv", "structures.csv"):
        assert (out / name).is_file(), name


@pytest.mark.slow
def test_every_frame_has_the_reference_structure(refined):
    scan, _ = refined
    table = {s["number"]: _key(s) for s in scan["structures"]}
    frames = scan["frames"]
    assert len(frames) > len(D_VALUES) * len(ANGLES)
    wrong = [(f["values"], table[f["structure"]], reference(f["values"])) for f in frames
             if table[f["structure"]] != reference(f["values"])]
    assert not wrong


@pytest.mark.slow
def test_refined_brackets_hold_a_real_change_and_meet_the_tolerance(refined):
    scan, _ = refined
    bounds = scan["boundaries"]
    assert len(bounds) >= 4
    # --subdivide added mid-line edges inside crossed cells, and they found boundary points
    grid = {f["index"] for f in scan["frames"] if "refine" not in f}
    assert scan["scan"]["refine"]["added_edges"] >= 1
    assert any(not set(b["edge"]) <= grid for b in bounds)
    tols = (T_DISTANCE, T_ANGLE)
    for b in bounds:
        a, z = b["bracket"]
        along = b["along"]
        assert a[1 - along] == z[1 - along]
        assert abs(z[along] - a[along]) <= tols[along] + 1e-9, b
        assert reference(a) != reference(z), b
        assert min(a[along], z[along]) <= b["estimate"][along] <= max(a[along], z[along])


@pytest.mark.slow
def test_every_coarse_boundary_gets_boundary_points(refined):
    scan, _ = refined
    grid = {tuple(f["values"]): f["index"] for f in scan["frames"] if "refine" not in f}
    assert scan["scan"]["refine"]["converged"] is True
    assert len(grid) == len(D_VALUES) * len(ANGLES)
    ref = {v: reference(v) for v in grid}
    assert len(set(ref.values())) >= 3             # the coarse grid sees three structures
    covered = {tuple(b["edge"]) for b in scan["boundaries"]}
    needed = []
    for i, d in enumerate(D_VALUES):
        for j, t in enumerate(ANGLES):
            for nb in ((D_VALUES[i + 1], t) if i + 1 < len(D_VALUES) else None,
                       (d, ANGLES[j + 1]) if j + 1 < len(ANGLES) else None):
                if nb is not None and ref[(d, t)] != ref[nb]:
                    needed.append((grid[(d, t)], grid[nb]))
    assert len(needed) >= 5
    assert [e for e in needed if e not in covered] == []
    # along each such edge the boundary points lead from the structure of one end to
    # that of the other (through any structure that lies between them)
    table = {s["number"]: _key(s) for s in scan["structures"]}
    values = [tuple(f["values"]) for f in scan["frames"]]
    for a, b in needed:
        on = sorted((x for x in scan["boundaries"] if tuple(x["edge"]) == (a, b)),
                    key=lambda x: x["bracket"][0][x["along"]])
        chain = [table[on[0]["structures"][0]]] + [table[x["structures"][1]] for x in on]
        assert chain[0] == ref[values[a]] and chain[-1] == ref[values[b]]
        assert all(table[x["structures"][0]] == table[y["structures"][1]]
                   for y, x in zip(on, on[1:]))


@pytest.mark.slow
def test_new_frames_against_a_uniform_grid(refined, capsys):
    scan, _ = refined
    new = sum(1 for f in scan["frames"] if "refine" in f)
    n1 = round((D_VALUES[-1] - D_VALUES[0]) / T_DISTANCE) + 1
    n2 = round((ANGLES[-1] - ANGLES[0]) / T_ANGLE) + 1
    uniform = n1 * n2 - len(D_VALUES) * len(ANGLES)
    assert 0 < new < uniform
    with capsys.disabled():
        print(f"\nplane refine --subdivide: {new} new frames vs {uniform} for a uniform grid "
              f"at ({T_DISTANCE} A, {T_ANGLE} deg): ratio {new / uniform:.3f}")


@pytest.mark.slow
def test_plane_scan_json_round_trips_through_the_model(refined):
    from trackscan.analysis.scanjson import dumps_scan
    from trackscan.maps.model import PlaneScanResult

    scan, out = refined
    model = PlaneScanResult.from_dict(scan)
    assert len(model.boundaries) == len(scan["boundaries"]) > 0
    assert dumps_scan(model) == (out / "scan.json").read_text()


@pytest.mark.slow
def test_structure_map_legend_contours_and_report_words(refined):
    from matplotlib.contour import ContourSet

    from trackscan.maps.model import PlaneScanResult
    from trackscan.report.structure_map import plane_document, structure_map_figure

    scan, out = refined
    model = PlaneScanResult.from_dict(scan)
    fig = structure_map_figure(model)
    ax = fig.axes[0]
    legend = [t.get_text() for t in ax.get_legend().get_texts()]
    assert any("H1–H2, H1–H3; no ring or cage CP" in t for t in legend)
    assert not any(isinstance(c, ContourSet) for c in ax.get_children())
    # with energies (a made-up smooth surface in hartree) the map draws their contours
    data = json.loads((out / "scan.json").read_text())
    for f in data["frames"]:
        d, t = f["values"]
        f["energy_hartree"] = -1.5 + 0.1 * (d - 1.0) ** 2 + 1e-4 * (t - 60.0) ** 2
    fig = structure_map_figure(PlaneScanResult.from_dict(data))
    assert any(isinstance(c, ContourSet) for c in fig.axes[0].get_children())
    doc, _ = plane_document(model)
    tables = {t.key: t for t in doc.tables()}
    assert len(tables["structures"].rows) == len(scan["structures"])
    assert len(tables["boundaries"].rows) == len(scan["boundaries"])
    text = (out / "report.md").read_text()
    assert "bond path H1–H2 switched to H1–H3" in text
