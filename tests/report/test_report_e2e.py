"""The report of a really analysed scan: promolecular C3 triangle, base stretched.

Densities from the built-in promolecular model, written as cube files and
listed in a scan manifest; ``trackscan analyze`` analyses and tracks them and
``trackscan report`` writes the report.  The ring opens in a fold: the bond
CP of C1–C2 and the ring CP annihilate (between 1.6 and 1.7 Å on this
model).  The manifest's energies are the nuclear repulsion energies of the
frames (sum of Z_i Z_j / r_ij, hartree): a real property of each geometry,
used here only to exercise the energy plot.
"""

from __future__ import annotations

import csv
import importlib.util
import json
from pathlib import Path

import numpy as np
import pytest

from trackscan.cli import main
from trackscan.io.cube import write_cube
from trackscan.promolecule import promolecule_grid
from trackscan.units import ANGSTROM_IN_BOHR

VALUES = (1.3, 1.4, 1.5, 1.6, 1.7, 1.8)     # C1–C2 distance, Å
APEX = 1.25                                  # height of C3 over the C1–C2 midpoint, Å


def _load(name):
    spec = importlib.util.spec_from_file_location(name, Path(__file__).with_name(f"{name}.py"))
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


R = _load("report_reading")


def _nuclear_repulsion(z, pos):
    pos = np.asarray(pos, float)
    r = np.linalg.norm(pos[:, None] - pos[None], axis=-1)
    i, j = np.triu_indices(len(z), 1)
    return float(np.sum(np.outer(z, z)[i, j] / r[i, j]))


@pytest.fixture(scope="module")
def analysed(tmp_path_factory):
    root = tmp_path_factory.mktemp("c3scan")
    lines = ["name: c3-triangle-stretch",
             "coordinate: {label: C1–C2 distance, distance: [1, 2]}",
             "frames:"]
    for i, d in enumerate(VALUES):
        x = d * ANGSTROM_IN_BOHR / 2
        pos = [[-x, 0.0, 0.0], [x, 0.0, 0.0], [0.0, APEX * ANGSTROM_IN_BOHR, 0.0]]
        grid = promolecule_grid([6, 6, 6], pos, spacing=0.2, margin=3.0)
        write_cube(root / "frames" / f"f{i:02d}.cube", grid)
        lines.append(f"  - {{file: frames/f{i:02d}.cube, "
                     f"energy: {_nuclear_repulsion([6, 6, 6], pos)!r}}}")
    (root / "scan.yaml").write_text("\n".join(lines) + "\n", encoding="utf-8")
    out = root / "out"
    assert main(["analyze", str(root / "scan.yaml"), "--out", str(out)]) == 0
    assert main(["report", str(out), "--out", str(out / "report"),
                 "--source-dir", str(root)]) == 0
    scan = json.loads((out / "scan.json").read_text(encoding="utf-8"))
    return scan, out / "report"


def test_analysed_scan_has_one_fold(analysed):
    scan, _ = analysed
    # independent of the report: Poincaré–Hopf in every frame, and one fold
    for f in scan["frames"]:
        c = f["counts"]
        assert c["nuclear"] + c["non_nuclear"] - c["bond"] + c["ring"] - c["cage"] == 1
    assert [ch["mechanism"] for ch in scan["changes"]] == ["fold"]


def test_report_tables_equal_scan_json(analysed):
    scan, out = analysed
    page = R.read_html((out / "report.html").read_text(encoding="utf-8"))
    rows = page.tables["table-summary"]["rows"]
    assert len(rows) == len(scan["changes"])
    for row, ch in zip(rows, scan["changes"]):
        lo, hi = R.numbers(row[2])
        assert R.shown_equals(lo, ch["bracket"][0]) and R.shown_equals(hi, ch["bracket"][1])
        assert R.shown_equals(R.numbers(row[3])[0], ch["estimate"])
        assert row[4] == ch["mechanism"]
    assert "bond path C1–C2 broken" in rows[0][5]
    assert "lost (fold with the bond CP of C1–C2)" in rows[0][5]
    frames = page.tables["table-frames"]
    energy_col = frames["header"].index("Energy (hartree)")
    for row, f in zip(frames["rows"], scan["frames"]):
        assert R.shown_equals(row[1], f["value"])
        assert R.shown_equals(row[energy_col], f["energy_hartree"])
        assert [int(x) for x in row[3:6]] == [f["counts"][k] for k in ("nuclear", "non_nuclear",
                                                                      "bond")]
    md = R.read_markdown_tables((out / "report.md").read_text(encoding="utf-8"))
    summary = next(t for t in md if t["header"][0] == "#" and t["header"][1] == "Frames")
    assert [r[1:5] for r in summary["rows"]] == [r[1:5] for r in rows]


def test_every_change_has_graphs_and_a_density_map_from_its_cubes(analysed):
    scan, out = analysed
    html = (out / "report.html").read_text(encoding="utf-8")
    for k in range(1, len(scan["changes"]) + 1):
        assert f'id="figure-graph_change{k}"' in html
        assert f'id="figure-density_change{k}"' in html
        assert (out / f"density_change{k}.png").is_file()
    assert "no density map" not in html
    assert "tricubic B-spline interpolation" in html
    for name in ("cp_counts", "bond_cp_properties", "structures", "fold_change1"):
        for ext in ("png", "svg", "pdf"):
            assert (out / f"{name}.{ext}").is_file()
    assert (out / "energy.png").is_file()           # the manifest gives energies
    # the energy profile comes first among the plots along the scan
    assert html.index('id="figure-energy"') < html.index('id="figure-cp_counts"')


def test_critical_points_csv_has_every_cp_with_its_track(analysed):
    scan, out = analysed
    with open(out / "critical_points.csv", newline="", encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    assert len(rows) == sum(len(f["critical_points"]) for f in scan["frames"])
    assert all(r["track"] for r in rows)
    first = min(scan["frames"], key=lambda f: f["index"])
    assert first["label"] == "1"  # listed frames are named from 1
    nuclei = [r for r in rows if r["kind"] == "nuclear" and r["frame"] == first["label"]]
    # measured on the geometry as written in the cube (8 decimals in bohr)
    assert float(nuclei[0]["coordinate [angstrom]"]) == pytest.approx(VALUES[0], abs=1e-4)
    x = sorted(float(r["x [angstrom]"]) for r in nuclei)
    assert x[0] == pytest.approx(-VALUES[0] / 2, abs=1e-5)
    assert x[-1] == pytest.approx(VALUES[0] / 2, abs=1e-5)
    assert np.isfinite([float(r["rho [a.u.]"]) for r in rows]).all()


def test_geometry_at_the_estimate_is_written_as_xyz(analysed):
    scan, out = analysed
    text = (out / "geometry_change1.xyz").read_text(encoding="utf-8").splitlines()
    assert int(text[0]) == 3 and len(text) == 5
    pos = np.array([[float(v) for v in line.split()[1:]] for line in text[2:]])
    # the frames are listed (no generator): linear interpolation between the bracket
    # frames, so the C1–C2 distance at the estimate equals the estimate itself (Å)
    est = scan["changes"][0]["estimate"]
    assert np.linalg.norm(pos[0] - pos[1]) == pytest.approx(est, abs=1e-6)
