"""``trackscan analyze --dask``: frame analyses on a dask.distributed cluster.

A LocalCluster of two worker processes stands in for a cluster with a shared
disk.  The scan analysed there must give the same scan.json bytes as the
same scan analysed in this process; and the scan itself must show the
cyclopropane ring-opening fold between 64 and 67 degrees, which lies at
65.855 degrees on the exact model field (Newton on the analytic
promolecule, tests/generators/test_demo_scans.py).
"""

import json
import shutil
from pathlib import Path

import pytest
import yaml

distributed = pytest.importorskip("dask.distributed")

from trackscan.analysis import analyze_scan, dumps_scan  # noqa: E402
from trackscan.cli import main  # noqa: E402
from trackscan.io.manifest import load_manifest  # noqa: E402

DEMO = Path(__file__).resolve().parents[2] / "scans" / "cyclopropane-opening"


def test_analyze_on_a_local_cluster_equals_a_local_run(tmp_path):
    shutil.copy(DEMO / "cyclopropane.xyz", tmp_path)
    data = yaml.safe_load((DEMO / "scan.yaml").read_text())
    data["frames"] = {"values": [61.0, 64.0, 67.0, 70.0], "directory": "frames"}
    data["generator"]["promolecule"] = {"spacing": 0.25, "margin": 3.5}
    (tmp_path / "scan.yaml").write_text(yaml.safe_dump(data))
    manifest = load_manifest(tmp_path / "scan.yaml")
    local = analyze_scan(manifest)          # generates the cubes, analyses here
    with distributed.LocalCluster(n_workers=2, processes=True, threads_per_worker=1,
                                  dashboard_address=None) as cluster:
        remote = analyze_scan(load_manifest(tmp_path / "scan.yaml"),
                              dask=cluster.scheduler_address)
        # the command line passes the address through
        out = tmp_path / "out"
        assert main(["analyze", str(tmp_path / "scan.yaml"), "--out", str(out), "--no-report",
                     "--dask", cluster.scheduler_address]) == 0
    assert dumps_scan(remote) == dumps_scan(local)
    (change,) = local.changes
    assert change.mechanism == "fold"
    assert change.bracket[0] < 65.855 < change.bracket[1]
    cli_frames = json.loads((out / "scan.json").read_text())["frames"]
    assert [f["critical_points"] for f in cli_frames] == \
        [f["critical_points"] for f in local.to_dict()["frames"]]


def test_unreachable_scheduler_is_bad_input(tmp_path):
    from trackscan.analysis import analyse_frames
    from trackscan.errors import InputError
    from trackscan.settings import AnalysisSettings

    cube = tmp_path / "a.cube"
    cube.write_text("x")
    with pytest.raises(InputError, match="dask"):
        analyse_frames([cube], AnalysisSettings(), dask="not-a-scheduler-address::")
