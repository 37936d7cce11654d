"""The pipeline: stages in order, outputs in one folder, nothing left behind on failure."""

import json

import pandas as pd
import pytest

from geo3d.errors import Geo3dError, OutputExistsError
from geo3d.pipeline import STAGES, planned_stages, run


def test_planned_stages():
    # Each stage needs the ones before it; tables are written by the export stage.
    assert planned_stages(STAGES) == list(STAGES)
    assert planned_stages(["logs"]) == ["check", "logs", "export"]
    assert planned_stages(["volumes"]) == ["check", "logs", "model", "volumes", "export"]
    assert planned_stages(["report"]) == ["check", "logs", "model", "volumes", "report"]
    with pytest.raises(ValueError, match="stage"):
        planned_stages(["paint"])


@pytest.mark.slow
def test_logs_stage_writes_tables_in_output_units(mini_site, tmp_path):
    text = (mini_site / "site.toml").read_text()
    (mini_site / "site.toml").write_text(
        text.replace('ec = "mS/m"\n', 'ec = "mS/m"\noutput_length = "ft"\n', 1)
    )
    out = tmp_path / "out"
    results = run(mini_site, out, stages=["logs"])
    names = {p.name for p in out.iterdir()}
    assert {"intervals.csv", "samples.csv", "water_levels.csv", "calibration.json"} <= names
    assert {"run.log", "run.json"} <= names
    assert "model.vti" not in names and results.model is None
    intervals = pd.read_csv(out / "intervals.csv")
    # Lengths in feet: 1 ft = 0.3048 m (NIST SP 811).
    expected = results.logs.intervals["top"].to_numpy() / 0.3048
    assert intervals["top_ft"].to_numpy() == pytest.approx(expected, rel=1e-5)
    meta = json.loads((out / "run.json").read_text())
    assert meta["stages"] == ["check", "logs", "export"]
    assert set(meta["timings_s"]) >= {"check", "logs", "export", "total"}
    log = (out / "run.log").read_text()
    assert "stage logs: done" in log
    # No staging folder left beside the output.
    assert sorted(p.name for p in tmp_path.iterdir()) == ["mini_site", "out"]


def test_broken_site_leaves_no_output(mini_site, tmp_path):
    borings = mini_site / "borings.csv"
    borings.write_text(borings.read_text().replace("500060.0", "not-a-number"))
    out = tmp_path / "out"
    with pytest.raises(Geo3dError, match="borings.csv"):
        run(mini_site, out)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["mini_site"]


def test_existing_output_needs_overwrite(mini_site, tmp_path):
    out = tmp_path / "out"
    out.mkdir()
    (out / "keep.txt").write_text("earlier run")
    with pytest.raises(OutputExistsError):
        run(mini_site, out, stages=["logs"])
    assert (out / "keep.txt").read_text() == "earlier run"
