"""The code base stays ruff clean (lint and format), with the settings in pyproject.toml."""

import shutil
import subprocess
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]


def _ruff() -> list[str]:
    exe = shutil.which("ruff")
    if exe is None:
        pytest.skip("ruff is not installed (it comes with the [test] extra)")
    return [exe]


@pytest.mark.parametrize("args", [["check", "."], ["format", "--check", "."]])
def test_ruff_clean(args):
    out = subprocess.run([*_ruff(), *args], cwd=ROOT, capture_output=True, text=True, check=False)
    assert out.returncode == 0, out.stdout + out.stderr


def test_no_unfinished_markers_in_the_package():
    # A path a user can reach carries no placeholder for work left to do.
    markers = ("TO" + "DO", "FIX" + "ME", "XX" + "X")
    hits = [
        f"{path.relative_to(ROOT)}:{n}"
        for path in sorted((ROOT / "geo3d").rglob("*.py"))
        for n, line in enumerate(path.read_text(encoding="utf-8").splitlines(), 1)
        if any(m in line for m in markers)
    ]
    assert hits == [], hits
