"""The report of a really analysed scan: promolecular C3 triangle, base stretched.

Densities from the built-in promolecular model, written as cube files; each
frame analysed by trackscan.topology, the scan tracked by trackscan.tracking
(the same steps ``trackscan analyze`` runs), then the report written by the
CLI.  The scan has two folds: the ring closes (bond CP C1–C3 and ring CP
born together) and opens again (bond CP C1–C2 and ring CP annihilate).
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
from trackscan.promolecule import MODEL_LABEL, promolecule_grid
from trackscan.settings import AnalysisSettings
from trackscan.topology import analyze_frame
from trackscan.tracking import track_scan
from trackscan.units import ANGSTROM_IN_BOHR

VALUES = (1.2, 1.3, 1.4, 1.5, 1.6, 1.7)     # C1–C2 distance, Å
APEX = 1.25                                  # height of C3 over the C1–C2 midpoint, Å


def _load(name):
    spec = importlib.util.spec_from_file_location(name, Path(__file__).with_name(f"{name}.py"))
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


R = _load("report_reading")


@pytest.fixture(scope="module")
def analysed(tmp_path_factory):
    root = tmp_path_factory.mktemp("c3scan")
    settings = AnalysisSettings()
    frames = []
    for i, d in enumerate(VALUES):
        x = d * ANGSTROM_IN_BOHR / 2
        pos = [[-x, 0.0, 0.0], [x, 0.0, 0.0], [0.0, APEX * ANGSTROM_IN_BOHR, 0.0]]
        grid = promolecule_grid([6, 6, 6], pos, spacing=0.2, margin=3.0)
        write_cube(root / "frames" / f"f{i:02d}.cube", grid)
        frame = analyze_frame(grid, settings).to_dict()
        frame.update(index=i, value=d, source=f"frames/f{i:02d}.cube")
        frames.append(frame)
    tracked = track_scan(frames, coordinate="C1–C2 distance")
    scan = {"schema": "trackscan.scan/1",
            "scan": {"name": "c3-triangle-stretch",
                     "coordinate": {"label": "C1–C2 distance", "unit": "angstrom"},
                     "density_source": MODEL_LABEL, "settings": settings.to_dict()},
            "frames": tracked["frames"], "changes": tracked["changes"],
            "early_warnings": tracked["early_warnings"]}
    (root / "scan.json").write_text(json.dumps(scan, sort_keys=True), encoding="utf-8")
    assert main(["report", str(root), "--out", str(root / "report")]) == 0
    return scan, root / "report"


def test_analysed_scan_has_the_two_folds(analysed):
    scan, _ = analysed
    # independent of the report: Poincaré–Hopf in every frame, and two fold changes
    for f in scan["frames"]:
        c = f["counts"]
        assert c["nuclear"] + c["non_nuclear"] - c["bond"] + c["ring"] - c["cage"] == 1
    assert [ch["mechanism"] for ch in scan["changes"]] == ["fold", "fold"]


def test_report_tables_equal_scan_json(analysed):
    scan, out = analysed
    page = R.read_html((out / "report.html").read_text(encoding="utf-8"))
    rows = page.tables["table-summary"]["rows"]
    assert len(rows) == len(scan["changes"])
    for row, ch in zip(rows, scan["changes"]):
        lo, hi = R.numbers(row[1])
        assert R.shown_equals(lo, ch["bracket"][0]) and R.shown_equals(hi, ch["bracket"][1])
        assert R.shown_equals(R.numbers(row[2])[0], ch["estimate"])
        assert row[4] == ch["mechanism"]
    assert "ring CP (ring C1–C2–C3) is born together with the bond CP" in rows[0][5]
    assert "bond path C1–C2 breaks" in rows[1][5]
    frames = page.tables["table-frames"]["rows"]
    for row, f in zip(frames, scan["frames"]):
        assert R.shown_equals(row[1], f["value"])
        assert [int(x) for x in row[3:6]] == [f["counts"][k] for k in ("nuclear", "non_nuclear",
                                                                      "bond")]
    md = R.read_markdown_tables((out / "report.md").read_text(encoding="utf-8"))
    summary = next(t for t in md if t["header"][0] == "#" and t["header"][1].startswith("Bracket"))
    assert [r[1:5] for r in summary["rows"]] == [r[1:5] for r in rows]


def test_every_change_has_graphs_and_a_density_map_from_its_cubes(analysed):
    scan, out = analysed
    html = (out / "report.html").read_text(encoding="utf-8")
    for k in range(1, len(scan["changes"]) + 1):
        assert f'id="figure-graph_change{k}"' in html
        assert f'id="figure-density_change{k}"' in html
        assert (out / f"density_change{k}.png").is_file()
    assert "no density map" not in html
    assert "cubic-spline interpolation" in html
    for name in ("cp_counts", "bond_cp_properties", "fold_distance"):
        assert (out / f"{name}.png").is_file()
    assert not (out / "energy.png").exists()        # the model has no energies


def test_critical_points_csv_has_every_cp_with_its_track(analysed):
    scan, out = analysed
    with open(out / "critical_points.csv", newline="", encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    assert len(rows) == sum(len(f["critical_points"]) for f in scan["frames"])
    assert all(r["track"] for r in rows)
    nuclei = [r for r in rows if r["kind"] == "nuclear" and r["frame"] == "0"]
    x = sorted(float(r["x_angstrom"]) for r in nuclei)
    assert x[0] == pytest.approx(-VALUES[0] / 2, abs=1e-6)
    assert x[-1] == pytest.approx(VALUES[0] / 2, abs=1e-6)
    assert np.isfinite([float(r["rho"]) for r in rows]).all()
