"""``--dask``: generator calls and analyses on a dask.distributed cluster.

A LocalCluster of two worker processes stands in for a cluster with a shared
disk.  The refine through dask must make the same frames (values and
brackets) as the same refine on this machine.
"""

import importlib.util
import json
from pathlib import Path

import pytest

distributed = pytest.importorskip("dask.distributed")

from trackscan.cli import main  # noqa: E402

_spec = importlib.util.spec_from_file_location(
    "fold_model", Path(__file__).with_name("fold_model.py"))
fm = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(fm)

VALUES = [2.6, 2.7, 2.8, 2.9, 3.0]


def _record(folder):
    rec = json.loads((folder / "frames" / "record.json").read_text())["frames"]
    # frames listed by value are recorded too (round 0: made before refining)
    return sorted((r["value"], r.get("refine", {}).get("round", 0)) for r in rec)


def test_refine_through_a_local_cluster(tmp_path, capsys):
    local, remote = tmp_path / "local", tmp_path / "remote"
    for d in (local, remote):
        fm.write_scan(d, VALUES, spacing=0.2, margin=1.6)
    args = ["--tolerance", "1e-3", "--jobs", "2", "--no-report"]
    assert main(["refine", str(local / "scan.yaml"), *args, "--out", str(local / "out")]) == 0
    with distributed.LocalCluster(n_workers=2, processes=True, threads_per_worker=1,
                                  dashboard_address=None) as cluster:
        assert main(["refine", str(remote / "scan.yaml"), *args, "--out", str(remote / "out"),
                     "--dask", cluster.scheduler_address]) == 0
    assert _record(remote) == _record(local)
    a = json.loads((local / "out" / "scan.json").read_text())["changes"]
    b = json.loads((remote / "out" / "scan.json").read_text())["changes"]
    assert [c["bracket"] for c in a] == [c["bracket"] for c in b]
    # each bracket is at the tolerance, or as narrow as the 0.2 bohr grids resolve
    assert b and all(c["refine"]["converged"] or "resolution_limit" in c["refine"] for c in b)
