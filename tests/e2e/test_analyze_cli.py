"""End to end: ``trackscan analyze`` on promolecule scans (the cyclopropane demo).

The fold of the cyclopropane demo lies at 65.855 degrees on the exact model
field (located independently by Newton on the analytic promolecule in
tests/generators/test_demo_scans.py); the frames here bracket it between 64
and 67 degrees.
"""

import json
import shutil
from pathlib import Path

import numpy as np
import pytest
import yaml

from trackscan.analysis import analyse_frames
from trackscan.cli import main
from trackscan.generators import make_generator
from trackscan.io.cube import write_cube
from trackscan.io.manifest import load_manifest
from trackscan.promolecule import promolecule_grid

DEMO = Path(__file__).resolve().parents[2] / "scans" / "cyclopropane-opening"
VALUES = [61.0, 64.0, 67.0, 70.0]
SPACING = 0.2


def _rotation(k):
    rng = np.random.default_rng(100 + k)
    q, r = np.linalg.qr(rng.normal(size=(3, 3)))
    q = q * np.sign(np.diag(r))
    return q if np.linalg.det(q) > 0 else -q


@pytest.fixture(scope="module")
def scan_dir(tmp_path_factory):
    """The demo scan with four frames, generated once, plus listed variants."""
    root = tmp_path_factory.mktemp("cyclo")
    work = root / "gen"
    work.mkdir()
    shutil.copy(DEMO / "cyclopropane.xyz", work)
    data = yaml.safe_load((DEMO / "scan.yaml").read_text())
    data["frames"] = {"values": VALUES, "directory": "frames"}
    data["generator"]["promolecule"] = {"spacing": SPACING, "margin": 3.5}
    (work / "scan.yaml").write_text(yaml.safe_dump(data))
    m = load_manifest(work / "scan.yaml")
    gen = make_generator(m.generator, coordinate=m.coordinate)
    files = {}
    rotated = {}
    for e in m.frames:
        gen.generate(e.value, e.file)
        files[e.value] = e.file
        geo = gen.geometry(e.value)
        k = VALUES.index(e.value)
        pos = geo.positions @ _rotation(k).T + 3.0 * k
        path = root / "rotated" / f"r{k}.cube"
        path.parent.mkdir(exist_ok=True)
        write_cube(path, promolecule_grid(geo.numbers, pos, spacing=SPACING, margin=3.5))
        rotated[e.value] = path
    base = {"name": "cyclo-listed",
            "coordinate": {"label": "C2-C3-C1 angle", "unit": "degree"}}
    order = [VALUES[i] for i in (2, 0, 3, 1)]
    listed = dict(base, frames=[{"file": str(files[v]), "value": v} for v in order])
    (root / "listed.yaml").write_text(yaml.safe_dump(listed))
    rot = dict(base, name="cyclo-rotated",
               frames=[{"file": str(rotated[v]), "value": v} for v in VALUES])
    (root / "rotated.yaml").write_text(yaml.safe_dump(rot))
    return root


def _analyze(manifest, out, *extra):
    assert main(["analyze", str(manifest), "--out", str(out), "--no-report", *extra]) == 0
    return json.loads((out / "scan.json").read_text(encoding="utf-8"))


def _essence(scan):
    return [(c["between"], c["bracket"], c["mechanism"],
             sorted((e["kind"], tuple(e.get("atoms", ()) if e["kind"].startswith("bond") else ()))
                    for e in c["events"]))
            for c in scan["changes"]]


@pytest.fixture(scope="module")
def analysed(scan_dir):
    out = scan_dir / "out1"
    return _analyze(scan_dir / "gen" / "scan.yaml", out), out


def test_demo_fold_events_and_mechanism(analysed, capsys):
    scan, _ = analysed
    assert scan["schema"] == "trackscan.scan/1"
    assert [f["value"] for f in scan["frames"]] == VALUES
    assert all(f["poincare_hopf"]["holds"] for f in scan["frames"])
    assert _essence(scan) == [([1, 2], [64.0, 67.0], "fold",
                               [("bond_broken", (1, 2)), ("ring_lost", ())])]
    (ch,) = scan["changes"]
    assert ch["structure_type_changed"] is True
    assert ch["bracket"][0] < 65.855 < ch["bracket"][1]
    assert [f["structure"] for f in scan["frames"]] == [1, 1, 2, 2]
    tracks = {cp["track"] for f in scan["frames"] for cp in f["critical_points"]}
    assert "ring-1" in tracks and "nucleus-1" in tracks


def test_summary_table_in_words(scan_dir, capsys):
    out = scan_dir / "out-words"
    assert main(["analyze", str(scan_dir / "gen" / "scan.yaml"), "--out", str(out),
                 "--no-report"]) == 0
    printed = capsys.readouterr().out
    assert "bond path C1–C2 broken; ring CP lost" in printed
    assert "fold" in printed and "64 → 67 degree" in printed
    assert str(out / "scan.json") in printed


def test_rerun_uses_cache_and_is_byte_identical(scan_dir, analysed):
    scan, out = analysed
    before = (out / "scan.json").read_bytes()
    events = []
    m = load_manifest(scan_dir / "gen" / "scan.yaml")
    analyse_frames([e.file for e in m.frames], m.analysis, cache_dir=out / ".cache",
                   progress=events.append)
    assert events[0].done == len(VALUES) and events[0].message == "cached"
    _analyze(scan_dir / "gen" / "scan.yaml", out)
    assert (out / "scan.json").read_bytes() == before
    # a fresh run with two worker processes gives the same bytes
    fresh = scan_dir / "out-jobs2"
    _analyze(scan_dir / "gen" / "scan.yaml", fresh, "--jobs", "2")
    assert (fresh / "scan.json").read_bytes() == before


def test_changed_frame_is_reanalysed(scan_dir, tmp_path):
    m = load_manifest(scan_dir / "gen" / "scan.yaml")
    files = [tmp_path / f"f{k}.cube" for k in range(2)]
    for src, dst in zip(m.frames[:2], files):
        shutil.copy(src.file, dst)
    cache = tmp_path / "cache"
    analyse_frames(files, m.analysis, cache_dir=cache)
    shutil.copy(m.frames[3].file, files[1])
    events = []
    res = analyse_frames(files, m.analysis, cache_dir=cache, progress=events.append)
    assert events[0].done == 1
    assert len(list(cache.glob("*.json"))) == 3
    assert res[1].atoms[0].position_bohr != res[0].atoms[0].position_bohr


def test_listed_out_of_order_gives_same_changes(scan_dir, analysed):
    ref, _ = analysed
    scan = _analyze(scan_dir / "listed.yaml", scan_dir / "out-listed")
    assert _essence(scan) == _essence(ref)


def test_rotated_molecule_gives_same_changes(scan_dir, analysed):
    ref, _ = analysed
    scan = _analyze(scan_dir / "rotated.yaml", scan_dir / "out-rotated")
    assert _essence(scan) == _essence(ref)


def test_default_output_folder(scan_dir, tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    assert main(["analyze", str(scan_dir / "listed.yaml"), "--no-report"]) == 0
    assert (tmp_path / "reports" / "cyclo-listed" / "scan.json").is_file()


def test_bad_input_exits_2(tmp_path, scan_dir, capsys):
    assert main(["analyze", str(tmp_path / "missing.yaml")]) == 2
    assert main(["analyze", str(scan_dir / "listed.yaml"), "--jobs", "0",
                 "--out", str(tmp_path / "o")]) == 2
    bad = yaml.safe_load((scan_dir / "listed.yaml").read_text())
    bad["frames"][0]["file"] = str(tmp_path / "nowhere.cube")
    (tmp_path / "bad.yaml").write_text(yaml.safe_dump(bad))
    assert main(["analyze", str(tmp_path / "bad.yaml"), "--out", str(tmp_path / "o2")]) == 2
    err = capsys.readouterr().err
    assert err.count("trackscan: error:") == 3


def test_printed_precision_is_read_from_the_cube_values(tmp_path):
    # write_cube prints %.{digits}E: digits + 1 significant digits
    from trackscan.analysis import printed_digits
    from trackscan.io.cube import read_cube

    grid = promolecule_grid([6, 8], [[0, 0, 0], [0, 0, 2.1]], spacing=0.4, margin=2.0)
    for digits in (3, 5):
        path = tmp_path / f"d{digits}.cube"
        write_cube(path, grid, digits=digits)
        assert printed_digits(read_cube(path).values) == digits + 1
    assert printed_digits(grid.values) == 17


def test_scan_json_text_is_canonical():
    from trackscan.analysis import dumps_scan

    text = dumps_scan({"b": [float("nan"), -0.0, np.float64(0.1)], "a": (1, np.int64(2))})
    assert text == '{\n "a": [\n  1,\n  2\n ],\n "b": [\n  null,\n  0.0,\n  0.1\n ]\n}\n'


def test_broken_frame_with_parallel_workers_exits_2(scan_dir, tmp_path, capsys):
    frames = yaml.safe_load((scan_dir / "listed.yaml").read_text())
    bad = tmp_path / "broken.cube"
    lines = Path(frames["frames"][0]["file"]).read_text().splitlines()
    # a bad number deep in the values: the manifest loader (header only)
    # accepts the file, the worker's cube reader refuses it
    mid = len(lines) // 2
    bad.write_text("\n".join(lines[:mid] + ["1.0 nonsense 2.0"] + lines[mid + 1:]) + "\n")
    frames["frames"][0]["file"] = str(bad)
    (tmp_path / "m.yaml").write_text(yaml.safe_dump(frames))
    code = main(["analyze", str(tmp_path / "m.yaml"), "--out", str(tmp_path / "o"), "--jobs", "2"])
    err = capsys.readouterr().err
    assert code == 2 and "broken.cube" in err and f":{mid + 1}:" in err
    assert not (tmp_path / "o" / "scan.json").exists()
