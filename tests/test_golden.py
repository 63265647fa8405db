"""scan.json of fixed scenarios stays byte-identical (tests/golden/).

The golden files guard refactors: the same inputs and settings must give the
same bytes.  An intended change of results rewrites them with
``python tests/golden/scenarios.py NAME`` in its own commit.
"""

import importlib.util
import re
from pathlib import Path

import pytest

_spec = importlib.util.spec_from_file_location(
    "golden_scenarios", Path(__file__).resolve().parent / "golden" / "scenarios.py")
scenarios = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(scenarios)


#: PySCF's cube writer puts the wall-clock date in the cube's comment line,
#: which the frame keeps; that one input differs between runs by design.
_PYSCF_DATE = re.compile(rb"Date: [^\"]*")


def _normalised(data: bytes) -> bytes:
    return _PYSCF_DATE.sub(b"Date: <date>", data)


@pytest.mark.slow
@pytest.mark.parametrize("name", sorted(scenarios.SCENARIOS))
def test_scan_json_matches_golden(name, tmp_path):
    build, needs_pyscf = scenarios.SCENARIOS[name]
    if needs_pyscf:
        pytest.importorskip("pyscf")
    golden = scenarios.GOLDEN / f"{name}.json"
    assert golden.is_file(), f"no golden file {golden.name}: run tests/golden/scenarios.py"
    produced = _normalised(build(tmp_path).read_bytes())
    expected = _normalised(golden.read_bytes())
    if produced != expected:
        (tmp_path / "produced.json").write_bytes(produced)
    assert produced == expected, (
        f"scan.json of {name} differs from tests/golden/{name}.json "
        f"(produced copy: {tmp_path / 'produced.json'})")
