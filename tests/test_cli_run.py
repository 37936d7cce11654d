"""The run, stage and demo commands through click's test runner."""

import json
import tomllib
from pathlib import Path

import geopandas as gpd
import pyproj
import pytest
import pyvista as pv
import rasterio
import xarray as xr
from click.testing import CliRunner

import geo3d
from geo3d.cli import demo_site_path, main
from geo3d.errors import SiteFileError

DEMO = Path(geo3d.__file__).resolve().parent.parent / "demo_site"


def test_broken_site_clean_message_no_output(mini_site, tmp_path):
    (mini_site / "borings.csv").write_text("boring_id,x,y\nB1,1,2\n")  # no ground_elev
    out = tmp_path / "out"
    result = CliRunner().invoke(main, ["run", str(mini_site), "-o", str(out), "--no-progress"])
    assert result.exit_code == 2, result.output
    assert "ground_elev" in result.output and "borings.csv" in result.output
    assert "Traceback" not in result.output
    assert not out.exists()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["mini_site"]


def test_existing_output_refused_then_overwritten(mini_site, tmp_path):
    out = tmp_path / "out"
    out.mkdir()
    (out / "old.txt").write_text("x")
    runner = CliRunner()
    args = ["logs", str(mini_site), "-o", str(out), "--no-progress"]
    result = runner.invoke(main, args)
    assert result.exit_code == 2
    assert "overwrite" in result.output and "Traceback" not in result.output
    assert (out / "old.txt").exists()
    # --overwrite does not replace a folder geo3d did not write
    result = runner.invoke(main, [*args, "--overwrite"])
    assert result.exit_code == 2
    assert "did not write" in result.output and "old.txt" in result.output
    assert (out / "old.txt").read_text() == "x"
    # it does replace the results of an earlier run
    (out / "old.txt").unlink()
    assert runner.invoke(main, args).exit_code == 0
    result = runner.invoke(main, [*args, "--overwrite"])
    assert result.exit_code == 0, result.output
    assert (out / "intervals.csv").exists() and (out / "run.log").exists()
    assert "Outputs in" in result.output


def test_demo_site_missing_is_a_clear_error(monkeypatch, tmp_path):
    monkeypatch.setattr(geo3d, "__file__", str(tmp_path / "pkg" / "geo3d" / "__init__.py"))
    with pytest.raises(SiteFileError, match="demo site was not found"):
        demo_site_path()
    result = CliRunner().invoke(main, ["demo", "-o", str(tmp_path / "d"), "--no-progress"])
    assert result.exit_code == 2
    assert "demo site was not found" in result.output


EXPECTED = {
    "model.vti",
    "borings.vtp",
    "site.vtm",
    "model.nc",
    "site.gpkg",
    "report.html",
    "intervals.csv",
    "samples.csv",
    "volumes.csv",
    "volumes.json",
    "injection_plan.csv",
    "crossval.csv",
    "water_levels.csv",
    "calibration.json",
    "run.log",
    "run.json",
    "maps",
}


def check_outputs(out: Path, crs: pyproj.CRS, *, realizations: int) -> None:
    """Every output is there and opens in its usual reader, in the site CRS."""
    names = {p.name for p in out.iterdir()}
    assert EXPECTED <= names, EXPECTED - names
    image = pv.read(out / "model.vti")
    assert "log10_k" in image.cell_data
    blocks = pv.read(out / "site.vtm")
    assert {"model", "borings", "water_table"} <= set(blocks.keys())
    with xr.open_dataset(out / "model.nc") as ds:
        assert pyproj.CRS.from_cf(ds["spatial_ref"].attrs).equals(crs)
        assert ds.sizes["realization"] == realizations
    tifs = sorted((out / "maps").glob("*.tif"))
    assert {"transmissive_thickness.tif", "wt_elev.tif"} <= {t.name for t in tifs}
    for tif in tifs:
        with rasterio.open(tif) as src:
            assert pyproj.CRS.from_wkt(src.crs.to_wkt()).equals(crs)
    borings = gpd.read_file(out / "site.gpkg", layer="borings")
    assert pyproj.CRS(borings.crs).equals(crs)
    meta = json.loads((out / "run.json").read_text())
    assert meta["stages"] == ["check", "logs", "model", "volumes", "export", "report"]
    assert "<html" in (out / "report.html").read_text(encoding="utf-8")[:500].lower()
    # Nothing left beside the output folder.
    assert not list(out.parent.glob(".geo3d-*"))


@pytest.mark.slow
def test_run_end_to_end_on_the_mini_site(mini_site, tmp_path):
    out = tmp_path / "out"
    result = CliRunner().invoke(
        main, ["run", str(mini_site), "-o", str(out), "--realizations", "2", "--no-progress"]
    )
    assert result.exit_code == 0, result.output
    assert "Run complete." in result.output and "Headline volumes (m\u00b3)" in result.output
    check_outputs(out, pyproj.CRS("EPSG:32631"), realizations=2)


@pytest.mark.slow
def test_demo_run_end_to_end(tmp_path):
    out = tmp_path / "demo-out"
    result = CliRunner().invoke(
        main, ["demo", "-o", str(out), "--realizations", "2", "--no-progress"]
    )
    assert result.exit_code == 0, result.output
    assert "Headline volumes" in result.output
    crs = pyproj.CRS.from_user_input(tomllib.loads((DEMO / "site.toml").read_text())["site"]["crs"])
    check_outputs(out, crs, realizations=2)
