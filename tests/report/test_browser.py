"""Render report.html in a real headless browser (Debian's chromium) and look at the screenshot.

Skips only when no chromium executable can be found.
"""

from __future__ import annotations

import importlib.util
import shutil
import subprocess
from pathlib import Path

import numpy as np
import pytest
from matplotlib import image as mpimg

from trackscan.report import write_report

WIDTH, HEIGHT = 1200, 2000
OKABE_ITO_BLUE = np.array([0, 114, 178]) / 255.0


def _chromium():
    for name in ("chromium", "chromium-browser"):
        path = shutil.which(name)
        if path:
            return path
    return "/usr/bin/chromium" if Path("/usr/bin/chromium").is_file() else None


def _fixture_scan():
    path = Path(__file__).with_name("report_fixtures.py")
    spec = importlib.util.spec_from_file_location("report_fixtures", path)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module.ring_opening_scan()


def screenshot(html: Path, png: Path, profile: Path) -> None:
    """Screenshot of a local page with chromium, no network, no sandbox (container)."""
    exe = _chromium()
    cmd = [exe, "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic",
           "--no-first-run", "--disable-background-networking", "--disable-component-update",
           "--disable-sync", f"--user-data-dir={profile}", f"--screenshot={png}",
           f"--window-size={WIDTH},{HEIGHT}", html.resolve().as_uri()]
    subprocess.run(cmd, check=True, timeout=120, stdout=subprocess.DEVNULL,
                   stderr=subprocess.DEVNULL)


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    return write_report(_fixture_scan(), tmp_path_factory.mktemp("browser") / "report",
                        date="2026-12-01")


@pytest.mark.skipif(_chromium() is None, reason="chromium is not installed")
def test_report_renders_in_headless_chromium(tmp_path, files):
    png = tmp_path / "shot.png"
    screenshot(files.html, png, tmp_path / "profile")
    img = mpimg.imread(png)[..., :3]
    assert img.shape[:2] == (HEIGHT, WIDTH)
    white = np.all(img > 0.97, axis=-1)
    assert 0.03 < 1.0 - white.mean() < 0.9, "page is blank or a solid block"
    colours = {tuple(c) for c in (img[::4, ::4] * 255).astype(np.uint8).reshape(-1, 3)}
    assert len(colours) > 200, "too few distinct colours for text, tables and plots"
    # the embedded figures were decoded: lines in the palette's blue are on the page
    blue = np.all(np.abs(img - OKABE_ITO_BLUE) < 0.04, axis=-1)
    assert blue.sum() > 300
    # content reaches down the page (the first figure sits below the tables)
    rows = np.where(~white.all(axis=1))[0]
    assert rows.max() > HEIGHT * 0.6


@pytest.mark.skipif(_chromium() is None, reason="chromium is not installed")
def test_report_prints_to_pdf(tmp_path, files):
    import re
    pdf = tmp_path / "report.pdf"
    cmd = [_chromium(), "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic",
           "--no-first-run", "--disable-background-networking", "--disable-component-update",
           "--disable-sync", f"--user-data-dir={tmp_path / 'profile'}", f"--print-to-pdf={pdf}",
           "--no-pdf-header-footer", files.html.resolve().as_uri()]
    subprocess.run(cmd, check=True, timeout=120, stdout=subprocess.DEVNULL,
                   stderr=subprocess.DEVNULL)
    data = pdf.read_bytes()
    assert data.startswith(b"%PDF")
    pages = len(re.findall(rb"/Type\s*/Page[^s]", data))
    assert pages >= 3           # header and tables, the plots, the change figures
    assert len(data) > 100_000  # the figures are in the PDF
