"""Render the HTML report in headless Chromium and check a real page comes out.

Debian's chromium is used; when it is missing the session tries once to install it with
apt-get, and the test is skipped (with the reason) only when that fails.
"""

from __future__ import annotations

import shutil
import subprocess
from pathlib import Path

import numpy as np
import pytest

pytestmark = pytest.mark.browser

CHROMIUM = "/usr/bin/chromium"

# PNG signature: PNG specification (W3C 2003 / ISO/IEC 15948:2004) 5.2
PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"


@pytest.fixture(scope="session")
def chromium() -> str:
    found = CHROMIUM if Path(CHROMIUM).exists() else shutil.which("chromium")
    if found:
        return found
    apt = shutil.which("apt-get")
    if apt is None:
        pytest.skip("headless Chromium is not installed and apt-get is not available")
    try:
        subprocess.run(
            [apt, "install", "-y", "--no-install-recommends", "chromium"],
            check=True,
            capture_output=True,
            timeout=600,
        )
    except (subprocess.SubprocessError, OSError) as exc:
        pytest.skip(f"headless Chromium is not installed and could not be installed: {exc}")
    found = CHROMIUM if Path(CHROMIUM).exists() else shutil.which("chromium")
    if not found:
        pytest.skip("apt-get ran but no chromium executable appeared")
    return found


def screenshot(chromium: str, page: Path, out: Path, profile: Path) -> Path:
    command = [
        chromium,
        "--headless",
        "--no-sandbox",
        "--disable-gpu",
        "--disable-quic",
        "--no-first-run",
        "--disable-background-networking",
        "--disable-component-update",
        "--disable-sync",
        f"--user-data-dir={profile}",
        f"--screenshot={out}",
        "--window-size=1280,2000",
        page.resolve().as_uri(),
    ]
    subprocess.run(command, check=True, capture_output=True, timeout=120)
    return out


@pytest.mark.slow
def test_report_renders_in_headless_chromium(chromium, tmp_path):
    from matplotlib.image import imread
    from test_report import _keep_borings, make_results

    from geo3d.report import write_report

    # every section with its figures; two borings' logs are enough for a page render
    results = _keep_borings(make_results(), ["DP-01", "DP-02"])
    page = write_report(results, tmp_path / "report.html")
    shot = screenshot(chromium, page, tmp_path / "shot.png", tmp_path / "profile")
    png = shot.read_bytes()
    assert png[:8] == PNG_SIGNATURE
    pixels = imread(shot)
    assert pixels.shape[:2] == (2000, 1280)
    # a real page, not a blank or error screen: many distinct colours and dark text on white
    flat = (pixels[..., :3] * 255).astype(np.uint8).reshape(-1, 3)
    assert len(np.unique(flat, axis=0)) > 200
    assert (flat.mean(axis=1) < 80).mean() > 0.005
    assert len(png) > 50_000
