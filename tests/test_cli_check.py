import os
import shutil
from pathlib import Path

import click
import pytest
from click.testing import CliRunner

from geo3d import __version__
from geo3d.cli import handle_errors, main
from geo3d.config import TEMPLATE, load_config
from geo3d.errors import TableFormatError

REPO = Path(__file__).resolve().parents[1]
DEMO = REPO / "demo_site"


def run(*args: str):
    return CliRunner().invoke(main, list(args), catch_exceptions=False)


def test_version_and_help():
    result = run("--version")
    assert result.exit_code == 0 and __version__ in result.output
    result = run("--help")
    assert result.exit_code == 0
    assert "check" in result.output and "init" in result.output


def test_check_mini_site(mini_site: Path):
    result = run("check", str(mini_site))
    assert result.exit_code == 0, result.output
    for text in ("Mini site", "UTM zone 31N", "borings", "33", "Z1", "10,000", "Site is valid"):
        assert text in result.output
    assert "Traceback" not in result.output


def test_check_broken_site_lists_every_problem(mini_site: Path, tmp_path: Path):
    broken = tmp_path / "broken"
    shutil.copytree(mini_site, broken)
    (broken / "borings.csv").write_text(
        (broken / "borings.csv").read_text().replace("B2,500060.0", "B2,east")
    )
    (broken / "logs" / "B3.csv").write_text("depth,pressure\n1,2\n")
    result = run("check", str(broken))
    assert result.exit_code == 2
    assert "Traceback" not in result.output
    assert "2 problems found" in result.output
    assert "borings.csv, line 3, column 'x'" in result.output
    assert "B3.csv" in result.output


def test_check_missing_site_toml(tmp_path: Path):
    result = run("check", str(tmp_path))
    assert result.exit_code == 2
    assert "site.toml" in result.output and "Traceback" not in result.output


def test_check_warning_shown_and_quiet(mini_site: Path):
    path = mini_site / "borings.csv"
    path.write_text(path.read_text().replace("B3,500030.0,5000070.0", "B3,500030.0,5000570.0"))
    result = run("check", str(mini_site))
    assert result.exit_code == 0
    assert "outside the site boundary" in result.output
    result = run("-q", "check", str(mini_site))
    assert result.exit_code == 0
    assert "outside the site boundary" not in result.output


def test_init_writes_template_and_refuses_overwrite(tmp_path: Path):
    folder = tmp_path / "new"
    result = run("init", str(folder))
    assert result.exit_code == 0, result.output
    assert (folder / "site.toml").read_text() == TEMPLATE.read_text()
    assert "borings.csv" in result.output and "[site]" in result.output
    assert load_config(folder).site.name == "My site"
    result = run("init", str(folder))
    assert result.exit_code == 2 and "--force" in result.output
    (folder / "site.toml").write_text("changed")
    assert run("init", "--force", str(folder)).exit_code == 0
    assert (folder / "site.toml").read_text() == TEMPLATE.read_text()


def test_handle_errors_unexpected_exception():
    @click.command()
    @handle_errors
    def boom():
        raise RuntimeError("internal detail")

    @click.command()
    @handle_errors
    def bad_input():
        raise TableFormatError("x.csv, line 2, column 'y': not a number")

    group = click.Group(commands={"boom": boom, "bad": bad_input})
    result = CliRunner().invoke(group, ["boom"])
    assert result.exit_code == 1
    assert "RuntimeError: internal detail" in result.output
    assert "run with -v for details" in result.output
    assert "Traceback" not in result.output
    result = CliRunner().invoke(group, ["bad"])
    assert result.exit_code == 2
    assert "x.csv, line 2, column 'y'" in result.output and "Traceback" not in result.output


def test_verbose_shows_traceback_for_unexpected_errors(monkeypatch, mini_site: Path):
    def fail(path):
        raise RuntimeError("reader crashed")

    monkeypatch.setattr("geo3d.pipeline.read_site", fail)
    result = run("-v", "check", str(mini_site))
    assert result.exit_code == 1
    assert "Traceback" in result.output and "reader crashed" in result.output
    result = run("check", str(mini_site))
    assert "Traceback" not in result.output and "-v" in result.output


@pytest.mark.skipif(
    not (DEMO / "site.toml").exists(),
    reason="demo_site/site.toml does not exist yet (made by scripts/make_demo_site.py)",
)
def test_check_demo_site():
    cwd = os.getcwd()
    try:
        os.chdir(REPO)
        result = run("check", "demo_site")
    finally:
        os.chdir(cwd)
    assert result.exit_code == 0, result.output
    assert "Traceback" not in result.output
