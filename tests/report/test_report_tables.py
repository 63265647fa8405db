"""The report shows the numbers of scan.json: HTML and Markdown tables read back, CSVs, images.

Input: the hand-built synthetic scan of report_fixtures.py.  The tables are
parsed back with html.parser / a pipe-table reader and compared with the
scan.json values at the precision each cell shows.
"""

from __future__ import annotations

import base64
import csv
import importlib.util
import json
import re
from pathlib import Path

import pytest

from trackscan.cli import main
from trackscan.errors import InputError, ParseError
from trackscan.report import load_scan, write_report
from trackscan.units import ANGSTROM_IN_BOHR



def _load(name):
    spec = importlib.util.spec_from_file_location(name, Path(__file__).with_name(f"{name}.py"))
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


ring_opening_scan = _load("report_fixtures").ring_opening_scan
_reading = _load("report_reading")
numbers, read_html = _reading.numbers, _reading.read_html
read_markdown_tables, shown_equals = _reading.read_markdown_tables, _reading.shown_equals

PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"
KINDS = ("nuclear", "non_nuclear", "bond", "ring", "cage", "degenerate")


@pytest.fixture(scope="module")
def report(tmp_path_factory):
    out = tmp_path_factory.mktemp("report")
    scan = ring_opening_scan()
    (out / "scan.json").write_text(json.dumps(scan), encoding="utf-8")
    events = []
    files = write_report(out / "scan.json", out, date="2026-12-01", progress=events.append)
    return scan, files, out, events


def _html(report):
    return read_html(report[1].html.read_text(encoding="utf-8"))


def _md_tables(report):
    tables = read_markdown_tables(report[1].markdown.read_text(encoding="utf-8"))
    return {t["header"][1] if t["header"][0] == "#" else t["header"][0]: t for t in tables}


def _check_summary(header, rows, scan):
    col = {h.split(" (")[0]: i for i, h in enumerate(header)}
    assert len(rows) == len(scan["changes"])
    for row, change in zip(rows, scan["changes"]):
        lo, hi = numbers(row[col["Bracket"]])
        assert shown_equals(lo, change["bracket"][0]) and shown_equals(hi, change["bracket"][1])
        est, model = numbers(row[col["Estimate ± uncertainty"]])
        assert shown_equals(est, change["estimate"])
        # one ± quoted: the model's error (it is below half the bracket)
        assert shown_equals(model, change["uncertainty"]["model_error"])
        assert numbers(row[col["New frames"]]) == [str(change["evaluations"]),
                                                   str(change["refine"]["bisection_evaluations"])]
        assert row[col["Frames"]] == "–".join(str(i) for i in change["between"])
        assert row[col["Mechanism"]] == change["mechanism"]
        assert "bond path C1–C2 broken" in row[col["Events"]]
        assert "ring CP of C1–C2–C3 lost (fold with the bond CP of C1–C2)" in row[col["Events"]]


def _check_frames(header, rows, scan):
    col = {h: i for i, h in enumerate(header)}
    frames = sorted(scan["frames"], key=lambda f: f["index"])
    assert len(rows) == len(frames)
    short = dict(zip(("n", "nna", "b", "r", "c", "deg."), KINDS))
    for row, f in zip(rows, frames):
        assert row[col["Frame"]] == f.get("label", str(f["index"]))
        assert shown_equals(row[col["Coordinate (Å)"]], f["value"])
        assert row[col["Structure"]] == str(f["structure"])
        shown = {k: int(row[col[s]]) for s, k in short.items()}
        assert shown == {k: f["counts"].get(k, 0) for k in KINDS}
        assert int(row[col["n − b + r − c"]]) == f["poincare_hopf"]["value"]
        assert int(row[col["Expected"]]) == f["poincare_hopf"]["expected"]
        # Poincaré–Hopf for an isolated molecule, from the counts as shown
        assert shown["nuclear"] + shown["non_nuclear"] - shown["bond"] + shown["ring"] \
            - shown["cage"] == 1
        assert shown_equals(row[col["Energy (hartree)"]], f["energy"])
        if f["warnings"]:
            assert f["warnings"][0] in row[col["Warnings"]]
        assert row[col["Made by"]] == (f"refinement, round {f['refine']['round']}"
                                       if "refine" in f else "the scan")
        assert shown_equals(row[col["Grid spacing (Å)"]],
                            f["grid"]["spacing_bohr"][0] / ANGSTROM_IN_BOHR)


def test_html_tables_equal_scan_json(report):
    scan = report[0]
    page = _html(report)
    assert page.errors == []
    summary = page.tables["table-summary"]
    _check_summary(summary["header"], summary["rows"], scan)
    frames = page.tables["table-frames"]
    _check_frames(frames["header"], frames["rows"], scan)
    head = dict(page.tables["table-header"]["rows"])
    assert head["Scan"] == scan["scan"]["name"]
    assert head["Density source"] == scan["scan"]["density_source"]
    assert head["Frames"].startswith(f"{len(scan['frames'])} (1 new frames")
    settings = {r[0]: r for r in page.tables["table-settings"]["rows"]}
    assert len(settings) == len(scan["scan"]["settings"])
    for key, value in scan["scan"]["settings"].items():
        if isinstance(value, bool):
            assert settings[key][1] == ("yes" if value else "no")
        else:
            assert shown_equals(settings[key][1], value)
    # meaning and unit from the settings' docstrings, not the raw key
    assert settings["gtol"][3].startswith("Newton convergence")
    assert settings["density_floor"][2] == "a.u."


def test_markdown_tables_equal_scan_json(report):
    scan = report[0]
    tables = _md_tables(report)
    summary = tables["Frames"]
    _check_summary(summary["header"], summary["rows"], scan)
    frames = tables["Frame"]
    _check_frames(frames["header"], frames["rows"], scan)


def test_fold_pair_table_equals_scan_json(report):
    scan = report[0]
    table = _html(report).tables["table-pair1"]
    col = {h: i for i, h in enumerate(table["header"])}
    frame = next(f for f in scan["frames"] if f["index"] == scan["changes"][0]["between"][0])
    cps = {cp["id"]: cp for cp in frame["critical_points"]}
    assert len(table["rows"]) == 2
    for row in table["rows"]:
        cp = next(c for c in cps.values() if c.get("track") == row[col["Track"]])
        for axis, x in zip("xyz", cp["position_bohr"]):
            assert shown_equals(row[col[f"{axis} (Å)"]], x / ANGSTROM_IN_BOHR)
        assert shown_equals(row[col["ρ (a.u.)"]], cp["rho"])
        assert shown_equals(row[col["∇²ρ (a.u.)"]], cp["laplacian"])
        for j in range(3):
            assert shown_equals(row[col[f"λ{j + 1} (a.u.)"]], cp["eigenvalues"][j])
    bond = next(r for r in table["rows"] if r[0].startswith("bond"))
    assert shown_equals(bond[col["ε"]], cps["b3"]["ellipticity"])
    assert bond[col["Atoms"]] == "C1–C2"


def test_early_warnings_table_equals_scan_json(report):
    scan = report[0]
    rows = _html(report).tables["table-early_warnings"]["rows"]
    assert len(rows) == len(scan["early_warnings"])
    for row, w in zip(rows, scan["early_warnings"]):
        assert row[0] == "bond path C1–C2" and row[1] == "ellipticity rising"
        projected = numbers(row[2].split("a change near")[1].split(";")[0])
        assert len(projected) == len(w["projected"])
        assert all(shown_equals(x, v) for x, v in zip(projected, w["projected"].values()))
        assert "followed by the change between frames 1 and 2" in row[2]
        assert "_" not in row[1] + row[2]          # no internal keys leak into the text


def test_resolution_limit_given_for_each_change(report):
    scan = report[0]
    rows = _html(report).tables["table-resolution"]["rows"]
    assert len(rows) == len(scan["changes"])
    pair = scan["changes"][0]["resolution"]["pairs"][0]
    text = rows[0][1]
    assert "bond CP of C1–C2 and ring CP in frame 1" in text
    shown = numbers(text.split("apart")[0].split(":")[-1])[0]
    assert shown_equals(shown, pair["separation_bohr"] / ANGSTROM_IN_BOHR)
    assert "resolved" in text


def test_cautions_are_stated(report):
    text = report[1].html.read_text(encoding="utf-8")
    md = report[1].markdown.read_text(encoding="utf-8")
    for needle in ("method and the basis set", "unstable", "stability",
                   "Grid spacing and the printed precision"):
        assert needle in text and needle in md


def test_every_image_is_embedded_and_matches_markdown_files(report):
    _, files, out, _ = report
    page = _html(report)
    assert page.images, "the report has figures"
    embedded = []
    for img in page.images:
        src = img["src"]
        assert src.startswith("data:image/png;base64,")
        data = base64.b64decode(src.split(",", 1)[1], validate=True)
        assert data.startswith(PNG_SIGNATURE)
        embedded.append(data)
        assert img.get("alt")
    html_text = files.html.read_text(encoding="utf-8")
    assert "http:" not in html_text and "https:" not in html_text  # nothing from the network
    local = [link for link in page.links if not link.startswith("#")]
    assert local and all((out / link).is_file() for link in local)   # the SVG and PDF files
    md = files.markdown.read_text(encoding="utf-8")
    refs = re.findall(r"!\[[^\]]*\]\(([^)]+)\)", md)
    assert len(refs) == len(embedded)
    for ref, data in zip(refs, embedded):
        assert (out / ref).read_bytes() == data


def test_csv_files_load_and_hold_scan_numbers(report):
    scan, files, _, _ = report
    with open(files.changes_csv, newline="", encoding="utf-8") as fh:
        changes = list(csv.DictReader(fh))
    assert len(changes) == len(scan["changes"])
    for row, change in zip(changes, scan["changes"]):
        assert shown_equals(row["bracket_low [angstrom]"], change["bracket"][0])
        assert shown_equals(row["bracket_high [angstrom]"], change["bracket"][1])
        assert shown_equals(row["estimate [angstrom]"], change["estimate"])
        assert shown_equals(row["uncertainty [angstrom]"], change["uncertainty"]["model_error"])
        assert row["uncertainty_source"] == "error of the model estimate"
        assert int(row["bisection_new_frames"]) == change["refine"]["bisection_evaluations"]
        assert int(row["new_frames"]) == change["evaluations"]
        assert row["mechanism"] == change["mechanism"]
        assert row["resolved"] == "yes"
        assert not any(cell.lstrip().startswith(("{", "[")) for cell in row.values())
    with open(files.critical_points_csv, newline="", encoding="utf-8") as fh:
        reader = csv.DictReader(fh)
        cps = list(reader)
    # every numeric column names its unit
    for name in reader.fieldnames:
        if name not in ("frame", "cp_id_in_frame", "track", "kind", "rank", "signature",
                        "ellipticity", "atoms"):
            assert "[" in name, name
    expected = [(f, cp) for f in sorted(scan["frames"], key=lambda f: f["index"])
                for cp in f["critical_points"]]
    assert len(cps) == len(expected)
    for row, (f, cp) in zip(cps, expected):
        assert int(row["frame"]) == f["index"]
        assert shown_equals(row["coordinate [angstrom]"], f["value"])
        assert row["cp_id_in_frame"] == cp["id"] and row["track"] == cp["track"]
        assert row["kind"] == cp["kind"]
        for axis, x in zip("xyz", cp["position_bohr"]):
            assert shown_equals(row[f"{axis} [angstrom]"], x / ANGSTROM_IN_BOHR)
        assert float(row["rho [a.u.]"]) == pytest.approx(cp["rho"], rel=1e-5)


def test_figures_are_written_as_png_svg_and_pdf_with_the_same_content(report):
    import struct
    _, files, out, _ = report
    assert len(files.images) >= 5 and len(files.vector_images) == 2 * len(files.images)
    for png in files.images:
        svg, pdf = png.with_suffix(".svg"), png.with_suffix(".pdf")
        data = png.read_bytes()
        assert data.startswith(PNG_SIGNATURE)
        assert b"<svg" in svg.read_bytes()[:2000]
        assert pdf.read_bytes().startswith(b"%PDF")
        # 300 dpi PNG: the pHYs chunk holds pixels per metre (300 / 0.0254 = 11811)
        i = data.index(b"pHYs")
        assert int.from_bytes(data[i + 4:i + 8], "big") == 11811
        # same content: the SVG and the PNG have the same aspect ratio (to 2 %)
        w, h = struct.unpack(">II", data[16:24])
        m = re.search(rb'width="([\d.]+)pt" height="([\d.]+)pt"', svg.read_bytes())
        assert abs(float(m.group(1)) / float(m.group(2)) - w / h) < 0.02 * w / h
        # one or two journal columns wide (3.35 in / 7.0 in, plus the legend's margin)
        assert w / 300 <= 7.3
    # the PDF keeps text as text (TrueType fonts embedded, not outlines)
    assert b"/FontFile2" in (out / "energy.pdf").read_bytes()


def test_minimal_scan_without_optional_keys(tmp_path):
    files = write_report(_minimal_scan(), tmp_path, date=None)
    page = read_html(files.html.read_text(encoding="utf-8"))
    rows = page.tables["table-frames"]["rows"]
    assert [r[0] for r in rows] == ["0", "1", "2"]
    md = files.markdown.read_text(encoding="utf-8")
    assert "No change was found" in md and "No energies were given" in md
    with open(files.critical_points_csv, newline="") as fh:
        assert len(list(csv.reader(fh))) == 1      # header only


def test_rerun_is_byte_identical(report, tmp_path):
    _, a, out, _ = report
    b = write_report(out / "scan.json", tmp_path / "b", date="2026-12-01")
    assert a.html.read_bytes() == b.html.read_bytes()
    assert a.markdown.read_bytes() == b.markdown.read_bytes()
    assert len(a.vector_images) > 0
    for x, y in zip(a.vector_images + a.images + a.geometries,
                    b.vector_images + b.images + b.geometries):
        assert x.read_bytes() == y.read_bytes(), x.name


@pytest.mark.parametrize("content, error", [
    ("{not json", ParseError),
    ('{"frames": 3}', InputError),
    ('{"scan": {}, "frames": [{"index": 0}]}', InputError),
    ('{"frames": [], "changes": [{"bracket": [1]}]}', InputError),
])
def test_bad_scan_json_is_an_input_error(tmp_path, content, error):
    path = tmp_path / "scan.json"
    path.write_text(content, encoding="utf-8")
    with pytest.raises(error):
        load_scan(path)
    assert main(["report", str(path), "--out", str(tmp_path / "r")]) == 2


def _minimal_scan():
    atoms = [{"number": 1, "element": "H", "Z": 1, "position_bohr": [0.0, 0.0, 0.0]},
             {"number": 2, "element": "H", "Z": 1, "position_bohr": [1.4, 0.0, 0.0]}]
    return {"schema": "trackscan.scan/1", "scan": {"name": "minimal"},
            "frames": [{"index": i, "value": v, "atoms": atoms} for i, v in
                       enumerate((1.0, 1.1, 1.2))]}


def test_cli_writes_report_of_a_copied_scan_with_out(tmp_path, capsys):
    # a folder holding a scan.json that trackscan did not write is not its own
    # (issue 16): the report goes to --out, and nothing lands beside the copy
    (tmp_path / "scan.json").write_text(json.dumps(_minimal_scan()), encoding="utf-8")
    assert main(["report", str(tmp_path), "--no-date"]) == 2
    assert not (tmp_path / "report.html").exists()
    out = tmp_path / "rep"
    assert main(["report", str(tmp_path), "--no-date", "--out", str(out)]) == 0
    assert (out / "report.html").is_file() and (out / "report.md").is_file()
    assert "report.html" in capsys.readouterr().out


def test_markdown_and_html_carry_the_same_tables(report):
    page = _html(report)
    md = read_markdown_tables(report[1].markdown.read_text(encoding="utf-8"))
    html_tables = list(page.tables.values())
    assert len(md) == len(html_tables)
    for m, h in zip(md, html_tables):
        assert m["header"] == h["header"]
        assert m["rows"] == h["rows"]


def test_progress_events_count_up_to_the_total(report):
    events = report[3]
    assert {e.task for e in events} == {"report"}
    done = [e.done for e in events]
    # 3 plots + the structures + 1 change + writing
    assert done == sorted(done) and done[-1] == events[-1].total == 4 + 1 + 1


def test_report_folder_that_is_a_file_is_an_input_error(tmp_path):
    (tmp_path / "scan.json").write_text(json.dumps(ring_opening_scan()), encoding="utf-8")
    (tmp_path / "taken").write_text("", encoding="utf-8")
    with pytest.raises(InputError):
        write_report(tmp_path / "scan.json", tmp_path / "taken")
    assert main(["report", str(tmp_path), "--out", str(tmp_path / "taken" / "sub")]) == 2


def test_descending_scan_keeps_scan_order():
    # the same ring opening read backwards: the ring forms as C1–C2 shortens
    scan = ring_opening_scan()
    n = len(scan["frames"])
    for f in scan["frames"]:
        f["index"] = n - 1 - f["index"]
    ch = scan["changes"][0]
    ch.update(between=[1, 2], bracket=[1.9, 1.7], mechanism="fold",
              events=[{"kind": "bond_formed", "atoms": [1, 2], "track": "T-b12",
                       "fold_with": "T-r1"},
                      {"kind": "ring_formed", "track": "T-r1", "fold_with": "T-b12"}])
    from trackscan.report.tables import frame_table, summary_table
    view = load_scan(scan)
    row = summary_table(view).rows[0]
    assert numbers(row[2]) == ["1.900", "1.700"]
    assert "bond path C1–C2 formed" in row[5] and "(fold with the bond CP of C1–C2)" in row[5]
    values = [r[1] for r in frame_table(view).rows]
    assert values == ["2.100", "1.900", "1.700", "1.500"]


def test_structures_table_equals_scan_json(report):
    scan = report[0]
    rows = _html(report).tables["table-structures"]["rows"]
    assert len(rows) == len(scan["structures"]) == 2
    for row, s in zip(rows, scan["structures"]):
        assert row[0] == str(s["number"])
        first, last = min(s["frames"]), max(s["frames"])
        assert row[1] == f"{first}–{last}"
        assert int(row[3]) == len(s["bond_paths"]) and int(row[5]) == s["rings"]
        frames = {f["index"]: f["value"] for f in scan["frames"]}
        lo, hi = numbers(row[2])
        assert shown_equals(lo, frames[first]) and shown_equals(hi, frames[last])


def test_energy_densities_and_geometry_at_the_estimate_equal_scan_json(report):
    scan, files, out, _ = report
    page = _html(report)
    table = page.tables["table-energy_densities1"]
    col = {h: i for i, h in enumerate(table["header"])}
    frames = {f["index"]: f for f in scan["frames"]}
    # the bond path that breaks, in the frame before (it is absent after)
    assert len(table["rows"]) == 1
    row = table["rows"][0]
    cp = next(c for c in frames[1]["critical_points"] if c.get("track") == "T-b12")
    assert row[col["Bond path"]] == "C1–C2" and row[col["Frame"]] == "1"
    for key in ("G", "V", "H"):
        assert shown_equals(row[col[f"{key} (a.u.)"]], cp["energy_densities"][key])
    assert shown_equals(row[col["ρ (a.u.)"]], cp["rho"])
    geo = page.tables["table-geometry1"]
    first = geo["rows"][0]
    assert shown_equals(first[1], frames[1]["value"]) and shown_equals(first[3], frames[2]["value"])
    # C1–C2 distance: the frames' own geometry (nuclei at ±d/2), interpolated at the estimate
    dist = next(r for r in geo["rows"] if r[0].startswith("C1–C2"))
    assert shown_equals(dist[1], frames[1]["value"]) and shown_equals(dist[3], frames[2]["value"])
    assert shown_equals(dist[2], scan["changes"][0]["estimate"])
    xyz = (out / "geometry_change1.xyz").read_text(encoding="utf-8").splitlines()
    assert xyz[0] == "3" and len(xyz) == 5
