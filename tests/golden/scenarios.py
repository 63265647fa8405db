"""The scans whose scan.json is kept byte for byte in tests/golden/.

Each scenario builds its inputs in a fresh folder and runs the CLI as a user
would; ``python tests/golden/scenarios.py`` rewrites the golden files (do that
only in a commit that says which intended change altered them), and
``tests/test_golden.py`` reruns every scenario and compares the bytes.

Scenarios (all our own scans):
- ``cyclopropane-demo``: ``trackscan demo`` of the cyclopropane ring opening
  (promolecular model; analyse, refine, report).
- ``cyclopropane-analyze``: ``trackscan analyze`` of the same demo manifest
  (listed frames only).
- ``vinylidene-analyze``: ``trackscan analyze`` of the PySCF vinylidene
  demo on three of its values (needs PySCF).
- ``cyclopropane-refine``: ``trackscan refine --tolerance 0.5`` of the
  cyclopropane demo's manifest on five of its values.
"""

from __future__ import annotations

import shutil
import sys
from pathlib import Path

import yaml

ROOT = Path(__file__).resolve().parents[2]
SCANS = ROOT / "scans"
GOLDEN = Path(__file__).resolve().parent


def _copy_scan(name: str, work: Path, values=None) -> Path:
    src = SCANS / name
    work.mkdir(parents=True, exist_ok=True)
    for item in src.iterdir():
        if item.is_file() and item.name != "scan.yaml":
            shutil.copy(item, work / item.name)
    data = yaml.safe_load((src / "scan.yaml").read_text(encoding="utf-8"))
    if values is not None:
        data["frames"]["values"] = list(values)
    (work / "scan.yaml").write_text(yaml.safe_dump(data, sort_keys=False), encoding="utf-8")
    return work / "scan.yaml"


def cyclopropane_demo(root: Path) -> Path:
    from trackscan.cli import main

    out = root / "out"
    assert main(["demo", "--out", str(out)]) == 0
    return out / "scan.json"


def cyclopropane_analyze(root: Path) -> Path:
    from trackscan.cli import main

    manifest = _copy_scan("cyclopropane-opening", root / "scan")
    out = root / "out"
    assert main(["analyze", str(manifest), "--out", str(out), "--no-report"]) == 0
    return out / "scan.json"


def cyclopropane_refine(root: Path) -> Path:
    from trackscan.cli import main

    manifest = _copy_scan("cyclopropane-opening", root / "scan", values=[58, 61, 64, 67, 70])
    out = root / "out"
    assert main(["refine", str(manifest), "--tolerance", "0.5", "--out", str(out),
                 "--no-report"]) == 0
    return out / "scan.json"


def vinylidene_analyze(root: Path) -> Path:
    from trackscan.cli import main

    manifest = _copy_scan("vinylidene-shift", root / "scan", values=[0.4, 0.5, 0.6])
    out = root / "out"
    assert main(["analyze", str(manifest), "--out", str(out), "--no-report"]) == 0
    return out / "scan.json"


SCENARIOS = {
    "cyclopropane-demo": (cyclopropane_demo, False),
    "cyclopropane-analyze": (cyclopropane_analyze, False),
    "cyclopropane-refine": (cyclopropane_refine, False),
    "vinylidene-analyze": (vinylidene_analyze, True),   # needs PySCF
}


def main(argv=None) -> int:
    import tempfile

    names = (argv or sys.argv[1:]) or list(SCENARIOS)
    for name in names:
        build, _ = SCENARIOS[name]
        with tempfile.TemporaryDirectory() as tmp:
            path = build(Path(tmp))
            (GOLDEN / f"{name}.json").write_bytes(path.read_bytes())
            print(f"wrote tests/golden/{name}.json", file=sys.stderr)
    return 0


if __name__ == "__main__":
    sys.path.insert(0, str(ROOT))
    raise SystemExit(main())
