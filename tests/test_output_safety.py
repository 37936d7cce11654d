"""No output path can delete or replace an input or a file geo3d did not write."""

from __future__ import annotations

import json
import os
import shutil
import signal
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import pytest
from click.testing import CliRunner

from geo3d.cli import main
from geo3d.errors import Geo3dWarning, OutputExistsError
from geo3d.io.outdir import (
    UnsafeOutputError,
    check_output_path,
    input_folders,
    remove_stale_staging,
)

REPO = Path(__file__).resolve().parents[1]


def snapshot(folder: Path) -> dict[str, bytes]:
    return {str(p.relative_to(folder)): p.read_bytes() for p in folder.rglob("*") if p.is_file()}


def logs(site: Path, out: Path, *extra: str):
    args = ["logs", str(site), "-o", str(out), "--no-progress", *extra]
    return CliRunner().invoke(main, args)


def test_output_is_the_site_folder(mini_site):
    before = snapshot(mini_site)
    result = logs(mini_site, mini_site, "--overwrite")
    assert result.exit_code == 2, result.output
    assert "is the input folder" in result.output and "Traceback" not in result.output
    assert snapshot(mini_site) == before


def test_output_holds_the_site_folder(mini_site, tmp_path):
    (tmp_path / "notes.txt").write_text("unrelated")
    before = snapshot(tmp_path)
    result = logs(mini_site, tmp_path, "--overwrite")
    assert result.exit_code == 2, result.output
    assert "contains the input folder" in result.output
    assert snapshot(tmp_path) == before


def test_output_inside_the_site_folder(mini_site):
    result = logs(mini_site, mini_site / "results")
    assert result.exit_code == 2, result.output
    assert "lies inside the input folder" in result.output
    assert not (mini_site / "results").exists()


def test_output_is_the_folder_of_an_input_file_elsewhere(mini_site, tmp_path):
    shared = tmp_path / "shared"
    shared.mkdir()
    shutil.move(mini_site / "zones.geojson", shared / "zones.geojson")
    toml = mini_site / "site.toml"
    toml.write_text(toml.read_text().replace('"zones.geojson"', f'"{shared / "zones.geojson"}"'))
    assert shared.resolve() in input_folders(mini_site)
    for out in (shared, shared / "out"):
        result = logs(mini_site, out, "--overwrite")
        assert result.exit_code == 2, result.output
        assert "input folder" in result.output
    assert sorted(p.name for p in shared.iterdir()) == ["zones.geojson"]


def test_output_is_a_file(mini_site, tmp_path):
    target = tmp_path / "report.txt"
    target.write_text("keep me")
    result = logs(mini_site, target, "--overwrite")
    assert result.exit_code == 2, result.output
    assert target.read_text() == "keep me"


def test_overwrite_refuses_a_folder_geo3d_did_not_write(mini_site, tmp_path):
    out = tmp_path / "out"
    out.mkdir()
    (out / "thesis.docx").write_text("years of work")
    (out / "run.json").write_text('{"note": "not ours"}')
    with pytest.raises(UnsafeOutputError, match="not written by geo3d"):
        check_output_path(out, site_path=mini_site, overwrite=True)
    with pytest.raises(OutputExistsError, match="--overwrite"):
        check_output_path(out, site_path=mini_site, overwrite=False)
    assert (out / "thesis.docx").read_text() == "years of work"


@pytest.mark.slow
def test_overwrite_refuses_a_user_file_added_to_earlier_results(mini_site, tmp_path):
    out = tmp_path / "out"
    assert logs(mini_site, out).exit_code == 0
    listed = json.loads((out / "run.json").read_text())["outputs"]
    assert "intervals.csv" in listed
    (out / "my_notes.txt").write_text("mine")
    result = logs(mini_site, out, "--overwrite")
    assert result.exit_code == 2, result.output
    assert "my_notes.txt" in result.output and "not listed in its run.json" in result.output
    assert (out / "my_notes.txt").read_text() == "mine"
    (out / "my_notes.txt").unlink()
    assert logs(mini_site, out, "--overwrite").exit_code == 0


def test_folder_appearing_during_the_run_is_not_replaced(mini_site, tmp_path, monkeypatch):
    import geo3d.pipeline

    out = tmp_path / "out"
    real = geo3d.pipeline.run_logs

    def another_run_writes_out(site):
        out.mkdir()
        (out / "other.txt").write_text("written meanwhile")
        return real(site)

    monkeypatch.setattr(geo3d.pipeline, "run_logs", another_run_writes_out)
    result = logs(mini_site, out)
    assert result.exit_code == 2, result.output
    assert "appeared while the run was going" in result.output
    assert sorted(p.name for p in out.iterdir()) == ["other.txt"]
    assert sorted(p.name for p in tmp_path.iterdir()) == ["mini_site", "out"]


def test_earlier_results_changed_during_the_run_are_not_replaced(mini_site, tmp_path, monkeypatch):
    import geo3d.pipeline

    out = tmp_path / "out"
    assert logs(mini_site, out).exit_code == 0
    real = geo3d.pipeline.run_logs

    def another_run_rewrites_out(site):
        time.sleep(0.01)
        (out / "run.json").write_text((out / "run.json").read_text() + " ")
        return real(site)

    monkeypatch.setattr(geo3d.pipeline, "run_logs", another_run_rewrites_out)
    result = logs(mini_site, out, "--overwrite")
    assert result.exit_code == 2, result.output
    assert "changed while the run was going" in result.output


def _dead_pid() -> int:
    child = subprocess.Popen([sys.executable, "-c", "pass"])
    child.wait()
    return child.pid


def test_stale_staging_removed_live_and_old_kept(tmp_path):
    stamp = time.strftime("%Y%m%dT%H%M%S", time.gmtime())
    stale = tmp_path / f".geo3d-staging-{_dead_pid()}-{stamp}-abc"
    live = tmp_path / f".geo3d-staging-{os.getppid()}-{stamp}-abc"
    old = tmp_path / f".geo3d-old-{_dead_pid()}-{stamp}-abc"
    other = tmp_path / ".hidden-of-someone"
    for folder in (stale, live, old, other):
        folder.mkdir()
        (folder / "half.vti").write_text("half")
    with pytest.warns(Geo3dWarning, match="earlier results"):
        removed = remove_stale_staging(tmp_path)
    assert removed == [stale]
    assert live.exists() and old.exists() and other.exists() and not stale.exists()


_SLOW_RUN = textwrap.dedent(
    """
    import sys, time
    from pathlib import Path
    import geo3d.pipeline
    from geo3d.cli import main

    def slow_stage(site_path, **kwargs):
        # stands for a long stage writing into the staging folder
        for staging in Path(sys.argv[2]).parent.glob(".geo3d-staging-*"):
            (staging / "half_written.vti").write_text("half")
        time.sleep(60)

    geo3d.pipeline.run_check = slow_stage
    main(["logs", sys.argv[1], "-o", sys.argv[2], "--no-progress"])
    """
)


def _start_slow_run(site: Path, out: Path) -> subprocess.Popen:
    env = dict(os.environ, PYTHONPATH=str(REPO))
    process = subprocess.Popen(
        [sys.executable, "-c", _SLOW_RUN, str(site), str(out)],
        env=env,
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
    )
    deadline = time.monotonic() + 120
    while time.monotonic() < deadline:
        if list(out.parent.glob(".geo3d-staging-*/half_written.vti")):
            return process
        if process.poll() is not None:
            pytest.fail(process.stderr.read().decode())
        time.sleep(0.2)
    process.kill()
    pytest.fail("the run did not reach its export stage")


@pytest.mark.slow
@pytest.mark.parametrize("signum", [signal.SIGINT, signal.SIGTERM])
def test_interrupted_run_leaves_nothing(mini_site, tmp_path, signum):
    out = tmp_path / "out"
    process = _start_slow_run(mini_site, out)
    process.send_signal(signum)
    _, stderr = process.communicate(timeout=60)
    assert process.returncode == 130, stderr.decode()
    assert "interrupted" in stderr.decode() and "Traceback" not in stderr.decode()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["mini_site"]


@pytest.mark.slow
def test_killed_run_leaves_a_recognisable_staging_folder_that_the_next_run_removes(
    mini_site, tmp_path
):
    out = tmp_path / "out"
    process = _start_slow_run(mini_site, out)
    process.kill()
    process.wait(timeout=30)
    left = [p.name for p in tmp_path.iterdir() if p.name != "mini_site"]
    assert len(left) == 1 and left[0].startswith(f".geo3d-staging-{process.pid}-"), left
    result = logs(mini_site, out)
    assert result.exit_code == 0, result.output
    assert sorted(p.name for p in tmp_path.iterdir()) == ["mini_site", "out"]


def test_memory_error_leaves_nothing(mini_site, tmp_path, monkeypatch):
    import geo3d.pipeline

    def out_of_memory(site):
        raise MemoryError

    monkeypatch.setattr(geo3d.pipeline, "run_logs", out_of_memory)
    result = logs(mini_site, tmp_path / "out")
    assert result.exit_code == 1
    assert "ran out of memory" in result.output and "Traceback" not in result.output
    assert sorted(p.name for p in tmp_path.iterdir()) == ["mini_site"]
