"""Every broken site of the corpus gets its stated outcome from ``geo3d check``, and a few from
``geo3d run``; never a traceback."""

from __future__ import annotations

import re
import shutil
import time
from pathlib import Path

import pytest
from click.testing import CliRunner
from conftest import make_site

from bad_input.cases import CASES, Case
from geo3d.cli import main

_LOCATED = re.compile(r"(line \d+|row \d+|feature \d+|data row \d+)")


@pytest.fixture(scope="session")
def template_site(tmp_path_factory: pytest.TempPathFactory) -> Path:
    return make_site(tmp_path_factory.mktemp("corpus") / "template")


def broken_site(case: Case, template: Path, tmp_path: Path) -> Path:
    site = tmp_path / "site"
    shutil.copytree(template, site)
    case.mutate(site)
    return site


def test_corpus_is_large_and_names_are_unique():
    assert len(CASES) >= 80
    assert len({c.name for c in CASES}) == len(CASES)


@pytest.mark.parametrize("case", CASES, ids=[c.name for c in CASES])
def test_check_outcome(case: Case, template_site: Path, tmp_path: Path):
    site = broken_site(case, template_site, tmp_path)
    start = time.perf_counter()
    result = CliRunner().invoke(main, ["check", str(site)])
    seconds = time.perf_counter() - start
    output = result.output
    assert "Traceback" not in output, output
    assert result.exception is None or isinstance(result.exception, SystemExit), output
    for text in case.texts:
        assert text in output, (text, output)
    if case.outcome == "error":
        assert result.exit_code == 2, output
        assert case.place in output, output
        if case.located:
            assert _LOCATED.search(output) and "column" in output, output
    else:
        assert result.exit_code == 0, output
        assert "Site is valid" in output
        if case.outcome == "warning":
            assert "Warning" in output, output
    if case.name in ("absurd-cell-size", "million-realizations"):
        # resource refusals come from an estimate, before any work
        assert seconds < 30, seconds


_RUN_LEVEL = ["xy-swapped", "neighbors-1", "million-realizations", "scheduler-unreachable"]


@pytest.mark.slow
@pytest.mark.parametrize("name", _RUN_LEVEL)
def test_run_refuses_before_work(name: str, template_site: Path, tmp_path: Path):
    case = next(c for c in CASES if c.name == name)
    site = broken_site(case, template_site, tmp_path)
    out = tmp_path / "out"
    args = ["run", str(site), "-o", str(out), "--no-progress"]
    result = CliRunner().invoke(main, args)
    assert result.exit_code == 2, result.output
    assert "Traceback" not in result.output
    assert case.texts[0] in result.output
    assert sorted(p.name for p in tmp_path.iterdir()) == ["site"]


@pytest.mark.slow
def test_logs_stage_runs_on_two_borings(template_site: Path, tmp_path: Path):
    """Without a model, too few borings is only a warning: the logs stage still runs."""
    case = next(c for c in CASES if c.name == "two-borings")
    site = broken_site(case, template_site, tmp_path)
    result = CliRunner().invoke(
        main, ["logs", str(site), "-o", str(tmp_path / "out"), "--no-progress"]
    )
    assert result.exit_code == 0, result.output
    assert "[too-few-borings]" in result.output
