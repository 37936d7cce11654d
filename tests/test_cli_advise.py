"""The advise command through click's test runner, on the mini site."""

import json

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest
from click.testing import CliRunner
from conftest import MINI_BORINGS, _square, polygon_feature, write_geojson

from geo3d.cli import main


def _advise(site, out, *extra):
    args = ["advise", str(site), "-o", str(out), "--realizations", "2", "--no-progress"]
    return CliRunner().invoke(main, [*args, *extra])


@pytest.mark.slow
def test_advise_writes_every_output_and_respects_the_constraints(mini_site, tmp_path):
    accessible = tmp_path / "access.geojson"
    # accessible: the western 60 m of the site only (x < 500050 in EPSG:32631)
    write_geojson(accessible, [polygon_feature(_square(499990.0, 4999990.0, 500050.0, 5000090.0))])
    out = tmp_path / "out"
    result = _advise(mini_site, out, "--borings", "2", "--spacing", "10", "--min-distance",
                     "15", "--accessible", str(accessible))  # fmt: skip
    assert result.exit_code == 0, result.output
    assert "Proposed borings" in result.output
    names = {p.name for p in out.iterdir()}
    assert {"proposed_borings.csv", "advice_candidates.csv", "advice_zones.csv", "advice.gpkg",
            "advice_map.png", "advice.html", "run.json", "run.log"} <= names  # fmt: skip
    proposed = pd.read_csv(out / "proposed_borings.csv")
    assert list(proposed["rank"]) == [1, 2]
    assert {"x_m", "y_m", "p10_p90_before_m3", "p10_p90_after_m3", "driver_zone"} <= set(
        proposed.columns
    )
    xy = proposed[["x_m", "y_m"]].to_numpy()
    existing = np.array([v[:2] for v in MINI_BORINGS.values()])
    assert np.all(xy[:, 0] <= 500050.0)
    for point in xy:
        assert np.hypot(*(existing - point).T).min() >= 15.0 - 1e-6
    assert np.hypot(*(xy[0] - xy[1])) >= 15.0 - 1e-6
    assert (proposed["p10_p90_after_m3"] <= proposed["p10_p90_before_m3"] + 1e-9).all()
    layer = gpd.read_file(out / "advice.gpkg", layer="proposed_borings")
    assert len(layer) == 2 and layer.crs.to_epsg() == 32631
    zones = pd.read_csv(out / "advice_zones.csv")
    assert list(zones["zone"]) == ["Z1"]
    html = (out / "advice.html").read_text()
    assert "data:image/png;base64," in html and "Christakos" in html
    meta = json.loads((out / "run.json").read_text())
    assert "advise" in meta["timings_s"] and "proposed_borings.csv" in meta["outputs"]
    # a second run may replace the first one's folder
    again = _advise(mini_site, out, "--borings", "1", "--spacing", "10", "--overwrite")
    assert again.exit_code == 0, again.output
    assert len(pd.read_csv(out / "proposed_borings.csv")) == 1


def test_advise_bad_inputs_are_clear_errors_and_write_nothing(mini_site, tmp_path):
    points = tmp_path / "points.geojson"
    points.write_text(json.dumps({
        "type": "FeatureCollection",
        "crs": {"type": "name", "properties": {"name": "urn:ogc:def:crs:EPSG::32631"}},
        "features": [{"type": "Feature", "properties": {},
                      "geometry": {"type": "Point", "coordinates": [500000.0, 5000000.0]}}],
    }))  # fmt: skip
    out = tmp_path / "out"
    result = _advise(mini_site, out, "--accessible", str(points), "--spacing", "10")
    assert result.exit_code == 2, result.output
    assert "points.geojson" in result.output and "expected a polygon" in result.output
    assert "Traceback" not in result.output and not out.exists()
    result = _advise(mini_site, out, "--zone", "nowhere", "--spacing", "10")
    assert result.exit_code == 2 and "nowhere" in result.output and not out.exists()
    # a minimum distance that leaves no candidate
    result = _advise(mini_site, out, "--min-distance", "500", "--spacing", "10")
    assert result.exit_code == 2 and "no admissible candidate" in result.output
    assert not out.exists()
