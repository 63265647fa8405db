"""Command-line skeleton: version, help of every subcommand, exit codes."""

import subprocess
import sys
from pathlib import Path

import pytest

from trackscan import __version__
from trackscan.cli import COMMANDS, main


def test_version(capsys):
    with pytest.raises(SystemExit) as info:
        main(["--version"])
    assert info.value.code == 0
    assert capsys.readouterr().out.strip() == f"trackscan {__version__}"


@pytest.mark.parametrize("name", [c[0] for c in COMMANDS])
def test_help_of_each_subcommand(capsys, name):
    with pytest.raises(SystemExit) as info:
        main([name, "--help"])
    assert info.value.code == 0
    assert "usage: trackscan " + name in capsys.readouterr().out


def test_no_command_is_bad_usage(capsys):
    assert main([]) == 2


def test_module_entry_point():
    r = subprocess.run([sys.executable, "-m", "trackscan", "--version"], capture_output=True, text=True)
    assert r.returncode == 0 and __version__ in r.stdout


def test_inspect_prints_electron_count(tmp_path, capsys):
    import numpy as np
    from trackscan.grid import DensityGrid
    from trackscan.io.cube import write_cube
    g = DensityGrid(np.full((4, 4, 4), 0.5), [0, 0, 0], np.eye(3) * 0.5, [1], [1.0], [[1, 1, 1]])
    write_cube(tmp_path / "c.cube", g)
    assert main(["inspect", str(tmp_path / "c.cube")]) == 0
    out = capsys.readouterr().out
    assert "electrons 4.0000" in out  # 64 points x 0.5 x 0.125 bohr^3
    assert "H1" in out


def test_demo_without_pyscf_exits_2_with_the_readme_hint_and_writes_nothing(tmp_path, capsys,
                                                                            monkeypatch):
    from trackscan.cli import main
    from trackscan.generators import pyscf_density

    monkeypatch.setattr(pyscf_density, "gto", None)        # as if PySCF were not installed
    out = tmp_path / "demo"
    assert main(["demo", "--scan", "vinylidene-shift", "--out", str(out)]) == 2
    err = capsys.readouterr().err
    readme = (Path(__file__).resolve().parents[1] / "README.md").read_text(encoding="utf-8")
    assert pyscf_density.INSTALL_HINT in err and pyscf_density.INSTALL_HINT in readme
    assert len(err.strip().splitlines()) == 1 and "Traceback" not in err
    assert not out.exists()


def test_report_on_a_folder_without_scan_json_says_so(tmp_path, capsys):
    from trackscan.cli import main

    (tmp_path / "notes.txt").write_text("not a result folder", encoding="utf-8")
    assert main(["report", str(tmp_path)]) == 2
    err = capsys.readouterr().err
    assert "no scan.json" in err and str(tmp_path) in err
    assert "output" not in err                   # it does not blame the output folder
    assert sorted(p.name for p in tmp_path.iterdir()) == ["notes.txt"]
