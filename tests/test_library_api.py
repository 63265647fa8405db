"""The top-level library API and the README's notebook example, run as written.

The README example runs on three promolecular C3 triangles (C1-C2 at 1.3,
1.5 and 1.8 Å, apex 1.25 Å) after `trackscan init`; the printed reprs must be
what the README shows in its comments.  Outside reference: Poincaré–Hopf
(n - b + r - c = 1) on every frame, and the scan.json round trip through the
typed model.
"""

import contextlib
import io
import json
import re
import subprocess
import sys
from pathlib import Path

import pytest

import trackscan
from trackscan.cli import main
from trackscan.io.cube import write_cube
from trackscan.promolecule import promolecule_grid
from trackscan.units import ANGSTROM_IN_BOHR

README = Path(__file__).resolve().parents[1] / "README.md"
DISTANCES = (1.3, 1.5, 1.8)


def _readme_block(heading: str, lang: str) -> str:
    text = README.read_text(encoding="utf-8")
    section = text.split(f"## {heading}", 1)[1].split("\n## ", 1)[0]
    m = re.search(rf"```{lang}\n(.*?)```", section, re.S)
    assert m, f"no {lang} block under {heading!r}"
    return m.group(1)


@pytest.fixture(scope="module")
def c3_folder(tmp_path_factory):
    root = tmp_path_factory.mktemp("api")
    (root / "cubes").mkdir()
    for k, d in enumerate(DISTANCES):
        x = d * ANGSTROM_IN_BOHR / 2
        pos = [[-x, 0.0, 0.0], [x, 0.0, 0.0], [0.0, 1.25 * ANGSTROM_IN_BOHR, 0.0]]
        write_cube(root / "cubes" / f"f{k}.cube",
                   promolecule_grid([6, 6, 6], pos, spacing=0.25, margin=3.0))
    return root


def test_import_trackscan_stays_light():
    code = ("import sys, trackscan; "
            "print(sorted(m for m in sys.modules if m.split('.')[0] in ('numpy', 'scipy')))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True, cwd=README.parent).stdout.strip()
    assert out == "[]"
    assert set(trackscan.__all__) >= {"read_cube", "analyze_frame", "analyze_scan", "load_scan",
                                      "load_manifest", "refine_scan"}
    for name in trackscan.__all__[1:]:
        doc = getattr(trackscan, name).__doc__
        assert "Parameters" in doc or "Returns" in doc, name


def test_readme_notebook_example_runs_as_written(c3_folder, monkeypatch):
    monkeypatch.chdir(c3_folder)
    shell = _readme_block("Your own cubes: the first thing to do", "")
    assert "trackscan init cubes/*.cube" in shell and "trackscan analyze scan.yaml" in shell
    cubes = sorted(str(p.relative_to(c3_folder)) for p in (c3_folder / "cubes").glob("*.cube"))
    assert main(["init", *cubes, "--distance", "1", "2", "--name", "c3"]) == 0
    code = _readme_block("In a notebook", "python")
    out = io.StringIO()
    namespace = {}
    with contextlib.redirect_stdout(out):
        exec(compile(code, str(README), "exec"), namespace)
    printed = out.getvalue().splitlines()
    # each `print(x)  # <...>` line of the README shows what it prints
    shown = re.findall(r"^print\((\w+)\)\s+# (<.*>)$", code, re.M)
    assert [name for name, _ in shown] == ["frame", "scan"]
    for _, expected in shown:
        assert expected in printed, (expected, printed)
    frame, scan = namespace["frame"], namespace["scan"]
    assert frame.poincare_hopf["holds"] and frame.counts["ring"] == 1
    assert all(f.poincare_hopf.value == 1 for f in scan.frames)
    (change,) = scan.changes
    assert change.mechanism == "fold" and tuple(change.bracket) == (1.5, 1.8)
    on_disk = json.loads((c3_folder / "reports" / "c3" / "scan.json").read_text())
    assert trackscan.load_scan(on_disk).to_dict() == scan.to_dict()


def test_analyze_frame_takes_a_path_and_a_settings_mapping(c3_folder):
    from trackscan.errors import ConfigError

    topo = trackscan.analyze_frame(c3_folder / "cubes" / "f2.cube", {"density_floor": 1e-3})
    assert "Poincaré–Hopf holds" in repr(topo) and topo.counts["ring"] == 0
    with pytest.raises(ConfigError, match="density_flor"):
        trackscan.analyze_frame(c3_folder / "cubes" / "f2.cube", {"density_flor": 1e-3})


def test_refine_scan_needs_a_generator(c3_folder, monkeypatch):
    from trackscan.errors import InputError

    monkeypatch.chdir(c3_folder)
    if not (c3_folder / "scan.yaml").exists():
        assert main(["init", "cubes", "--distance", "1", "2", "--name", "c3"]) == 0
    with pytest.raises(InputError, match="generator"):
        trackscan.refine_scan("scan.yaml", tolerance=0.01)
