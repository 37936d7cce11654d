"""The pipeline: stages in order, outputs in one folder, nothing left behind on failure."""

import json

import geopandas as gpd
import numpy as np
import pandas as pd
import pyogrio
import pyproj
import pytest

from geo3d.errors import Geo3dError, OutputExistsError
from geo3d.pipeline import STAGES, headline_volumes, planned_stages, run


def test_planned_stages():
    # Each stage needs the ones before it; tables are written by the export stage.
    assert planned_stages(STAGES) == list(STAGES)
    assert planned_stages(["logs"]) == ["check", "logs", "export"]
    assert planned_stages(["volumes"]) == ["check", "logs", "model", "volumes", "export"]
    assert planned_stages(["report"]) == ["check", "logs", "model", "volumes", "report"]
    with pytest.raises(ValueError, match="stage"):
        planned_stages(["paint"])


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
    # One log figure per boring, each a PNG file (signature from the PNG specification).
    figures = sorted((out / "figures" / "logs").glob("*.png"))
    assert [p.stem for p in figures] == sorted(results.site.borings["boring_id"])
    assert all(p.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n" for p in figures)
    intervals = pd.read_csv(out / "intervals.csv")
    # Lengths in feet: 1 ft = 0.3048 m (NIST SP 811).
    expected = results.logs.intervals["top"].to_numpy() / 0.3048
    assert intervals["top_ft"].to_numpy() == pytest.approx(expected, rel=1e-5)
    meta = json.loads((out / "run.json").read_text())
    assert meta["stages"] == ["check", "logs", "export"]
    assert set(meta["timings_s"]) >= {"check", "logs", "export", "total"}
    log = (out / "run.log").read_text()
    assert "stage logs: done" in log
    # Warnings of the run are kept in the log (the mini site has only 2 slug tests).
    assert "Geo3dWarning" in log and "slug test" in log
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


def synthetic_model(site, logs):
    """A layered voxel model over the mini site: invented values, real grid and facies code."""
    from geo3d.grid import build_mask, make_grid
    from geo3d.model import ModelResult, facies_probabilities

    table = logs.facies_classes
    grid = make_grid(site.boundary, cell_size=(10.0, 10.0, 0.5), top=50.5, base=46.5, crs=site.crs)
    ground = np.full((grid.sizes["y"], grid.sizes["x"]), 50.0)
    mask = build_mask(grid, site.boundary, ground=ground, base=46.5).values
    z = grid["z"].values[:, None, None] + 0 * grid["x"].values
    x = grid["x"].values
    interface = 47.5 + 0.02 * (x - x.min()) + 0 * grid["y"].values[:, None]  # 47.5 to 49.3 m
    log10_k = np.where(mask, np.where(z > interface, -4.0, -8.0), np.nan)
    variance = np.where(mask, 0.25, np.nan)
    prob = facies_probabilities(log10_k, variance, table)
    ds = grid.assign(
        mask=(("z", "y", "x"), mask),
        ground_elev=(("y", "x"), ground),
        log10_k=(("z", "y", "x"), log10_k),
        log10_k_var=(("z", "y", "x"), variance),
        k=(("z", "y", "x"), 10**log10_k),
        ec=(("z", "y", "x"), np.where(mask, 20.0, np.nan)),
        ec_var=(("z", "y", "x"), np.where(mask, 1.0, np.nan)),
        facies_code=(("z", "y", "x"), table.classify(log10_k)),
        saturated=(("z", "y", "x"), mask & (z < 48.75)),
        realizations=(("realization", "z", "y", "x"), np.stack([log10_k, log10_k + 0.5])),
    )
    for i, name in enumerate(table.names):
        ds[f"prob_{name}"] = (("z", "y", "x"), prob[i])
    ds.attrs.update(table.attrs())
    return ModelResult(dataset=ds)


def test_volumes_and_export_on_a_layered_model(mini_site, tmp_path):
    from geo3d.pipeline import RunResults, run_check, run_export, run_logs, run_volumes

    site = run_check(mini_site)
    logs = run_logs(site)
    model = synthetic_model(site, logs)
    maps, volumes, plans = run_volumes(site, logs, model)
    # Transmissive over storage: their thicknesses fill the 3.5 m column (46.5 to 50 m), and
    # the transmissive thickness is the count of 0.5 m cells above the interface.
    inside = model.dataset["mask"].any("z").values
    transmissive = maps["transmissive_thickness"].values[inside]
    storage = maps["storage_thickness"].values[inside]
    assert transmissive + storage == pytest.approx(3.5)
    ds = model.dataset
    expected = (ds["facies_code"] == 2).sum("z").values * 0.5
    assert transmissive == pytest.approx(expected[inside])
    assert transmissive.min() < transmissive.max()
    assert maps["wt_elev"].values[inside] == pytest.approx(48.75)  # flat water table
    assert set(plans) == {"Z1"}
    results = RunResults(
        site=site, logs=logs, model=model, maps=maps, volumes=volumes, injection=plans
    )
    out = tmp_path / "export"
    written = run_export(results, out, formats=["csv", "vtk", "geotiff", "gpkg", "netcdf"])
    names = {p.relative_to(out).as_posix() for p in written}
    assert {
        "model.vti",
        "borings.vtp",
        "site.vtm",
        "model.nc",
        "site.gpkg",
        "volumes.csv",
        "injection_plan.csv",
        "maps/transmissive_thickness.tif",
        "maps/wt_elev.tif",
    } <= names
    layers = {name for name, _ in pyogrio.list_layers(out / "site.gpkg")}
    assert {"borings", "zones", "injection_points", "contours"} <= layers
    zones = gpd.read_file(out / "site.gpkg", layer="zones")
    assert pyproj.CRS(zones.crs).equals(site.crs)
    headline = headline_volumes(results).set_index("zone")
    assert set(headline.index) == {"site", "Z1"}
    storage = volumes[
        (volumes.zone == "Z1") & (volumes.facies == "storage") & (volumes.band == "all")
    ]
    assert headline.loc["Z1", "storage_volume_m3"] == storage["bulk_volume_m3"].item()
    assert headline.loc["Z1", "storage_volume_m3_p90"] == storage["bulk_volume_m3_p90"].item()
    assert headline.loc["Z1", "design_volume_m3"] == plans["Z1"].summary["design_volume_m3"]
    assert np.isnan(headline.loc["site", "design_volume_m3"])
