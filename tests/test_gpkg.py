"""GeoPackage layers read back with geopandas in the site CRS, with their attributes."""

from types import SimpleNamespace

import geopandas as gpd
import numpy as np
import pandas as pd
import pyogrio
import pyproj
import pytest
import shapely
import xarray as xr

from geo3d.io.gpkg import (
    boring_summary,
    contour_levels,
    contour_lines,
    injection_points_layer,
    write_geopackage,
    zones_layer,
)

CRS = "EPSG:32631"


def borings():
    return pd.DataFrame(
        {
            "boring_id": ["B1", "B2"],
            "x": [100.0, 110.0],
            "y": [200.0, 205.0],
            "ground_elev": [12.0, 11.0],
        }
    )


def samples():
    return pd.DataFrame(
        {
            "boring_id": ["B1"] * 4 + ["B2"] * 3,
            "depth": [0.0, 1.0, 2.0, 3.0, 0.0, 1.0, 2.5],
            "depth_to_water": [1.5] * 4 + [1.2] * 3,
            "log10_k": [-4.0, -5.0, -6.0, -7.0, -4.0, -4.0, -4.0],
            "spike": [False, True, False, True, False, False, False],
            "ec_above_trend": [False] * 7,
        }
    )


def intervals():
    return pd.DataFrame(
        {
            "boring_id": ["B1", "B1", "B2"],
            "top": [0.0, 1.5, 0.0],
            "bottom": [1.5, 3.0, 2.5],
            "facies": ["transmissive", "storage", "transmissive"],
        }
    )


def test_boring_summary():
    water = pd.DataFrame({"boring_id": ["B2"], "depth_to_water": [1.3]})
    gdf = boring_summary(
        borings(), crs=CRS, samples=samples(), intervals=intervals(), water_levels=water
    )
    b1, b2 = gdf.iloc[0], gdf.iloc[1]
    # Hand-counted from the tables above.
    assert (b1.total_depth, b2.total_depth) == (3.0, 2.5)
    assert (b1.transmissive_thickness, b2.transmissive_thickness) == (1.5, 2.5)
    assert (b1.n_spike, b2.n_spike) == (2, 0)
    assert (b1.n_samples, b2.n_samples) == (4, 3)
    assert b1.mean_log10_k == pytest.approx(-5.5)
    # Measured water level wins over the interpolated surface where a test exists.
    assert (b1.depth_to_water, b1.water_level_source) == (1.5, "surface")
    assert (b2.depth_to_water, b2.water_level_source) == (1.3, "dissipation")
    assert gdf.geometry.iloc[1].equals(shapely.Point(110, 205))


def test_boring_summary_takes_the_water_level_nearest_the_water_table():
    # B2 has a shallow test (1.3 m) and a deep one in an upward gradient (0.9 m): the median
    # of the two would shift the water table; the per-boring level from the tests nearest it
    # (geo3d.logs.water_level.boring_water_levels) is carried instead, with its gradient.
    tests = pd.DataFrame({"boring_id": ["B2", "B2"], "depth_to_water": [1.3, 0.9]})
    per_boring = pd.DataFrame(
        {"boring_id": ["B2"], "depth_to_water": [1.3], "vertical_gradient": [-0.05]}
    )
    reference = pd.DataFrame(
        {"boring_id": ["B1", "B2"], "p_atm_source": ["collar_flow_off", "standard_atmosphere"]}
    )
    gdf = boring_summary(
        borings(),
        crs=CRS,
        samples=samples(),
        water_levels=tests,
        boring_levels=per_boring,
        reference_pressure=reference,
    )
    b1, b2 = gdf.iloc[0], gdf.iloc[1]
    assert (b2.depth_to_water, b2.water_level_source) == (1.3, "dissipation")
    assert b2.vertical_gradient == pytest.approx(-0.05)
    assert np.isnan(b1.vertical_gradient)
    assert list(gdf["p_atm_source"]) == ["collar_flow_off", "standard_atmosphere"]


def test_contours_of_a_plane():
    # f(x, y) = x on a regular grid: the contour at level L is the vertical line x = L.
    x = np.arange(0.0, 10.0)
    y = np.arange(0.0, 5.0)
    da = xr.DataArray(
        np.broadcast_to(x, (5, 10)).copy(),
        dims=("y", "x"),
        coords={"y": y, "x": x},
        attrs={"units": "m"},
    )
    da[0, :] = np.nan  # outside the site
    lines = contour_lines({"plane": da}, crs=CRS, levels={"plane": [2.5, 7.0]})
    assert sorted(set(lines["level"])) == [2.5, 7.0]
    for geom, level in zip(lines.geometry, lines["level"], strict=True):
        xs, ys = np.asarray(geom.coords).T
        np.testing.assert_allclose(xs, level)
        # NaN row masked: the line runs from y = 1 to y = 4 only.
        assert ys.min() == pytest.approx(1.0) and ys.max() == pytest.approx(4.0)
    assert set(lines["units"]) == {"m"}
    auto = contour_lines({"plane": da}, crs=CRS)
    # MaxNLocator picks round steps of 1 inside (0, 9) (matplotlib ticker documentation).
    assert sorted(set(auto["level"])) == [1.0, 2, 3, 4, 5, 6, 7, 8]


def test_contour_levels_constant_map():
    assert contour_levels(np.full(4, 3.0)).size == 0
    assert contour_levels(np.full(4, np.nan)).size == 0


def test_geopackage_round_trip(tmp_path):
    zones = gpd.GeoDataFrame(
        {"name": ["Z1", "Z2"], "top": [1.0, 2.0], "bottom": [3.0, 4.0], "reference": ["depth"] * 2},
        geometry=[shapely.box(0, 0, 10, 10), shapely.box(20, 0, 30, 10)],
        crs=CRS,
    )
    # zone_volumes layout: one row per zone, depth band and facies (invented numbers).
    volumes = pd.DataFrame(
        {
            "zone": ["Z1", "Z1", "Z1", "Z2", "site"],
            "band": ["all", "all", "all", "all", "all"],
            "facies": ["storage", "transmissive", "all", "all", "all"],
            "bulk_volume_m3": [10.0, 20.0, 30.0, 40.0, 99.0],
            "bulk_volume_m3_p10": [8.0, 18.0, 28.0, 38.0, 90.0],
            "effective_pore_volume_m3": [0.5, 5.0, 5.5, 6.0, 9.0],
            "pore_volume_m3": [4.5, 6.4, 10.9, 12.0, 40.0],
        }
    )
    plans = {"Z1": SimpleNamespace(summary={"design_volume_m3": 1.1, "n_points": 12})}
    zl = zones_layer(zones, crs=CRS, volumes=volumes, plans=plans)
    z1 = zl.set_index("name").loc["Z1"]
    assert z1["transmissive_bulk_volume_m3"] == 20.0
    assert z1["storage_bulk_volume_m3_p10"] == 8.0
    assert z1["total_pore_volume_m3"] == 10.9
    assert (z1["plan_design_volume_m3"], z1["plan_n_points"]) == (1.1, 12)
    assert np.isnan(zl.set_index("name").loc["Z2", "plan_n_points"])
    assert len(zl) == 2  # the whole-site row is not a zone
    plan = SimpleNamespace(
        points=gpd.GeoDataFrame(
            {"volume_m3": [1.0, 2.0]}, geometry=gpd.points_from_xy([1, 2], [1, 2]), crs=CRS
        )
    )
    pts = injection_points_layer({"Z1": plan, "Z2": SimpleNamespace(points=None)}, crs=CRS)
    assert pts["zone"].tolist() == ["Z1", "Z1"]
    x = np.arange(5.0)
    da = xr.DataArray(np.add.outer(x, x), dims=("y", "x"), coords={"y": x, "x": x})
    layers = {
        "borings": boring_summary(borings(), crs=CRS, samples=samples()),
        "zones": zl,
        "injection_points": pts,
        "contours": contour_lines({"sum": da}, crs=CRS),
        "empty": gpd.GeoDataFrame({"a": []}, geometry=gpd.GeoSeries([], crs=CRS), crs=CRS),
    }
    path = write_geopackage(tmp_path / "site.gpkg", layers)
    names = [name for name, _ in pyogrio.list_layers(path)]
    assert sorted(names) == ["borings", "contours", "injection_points", "zones"]
    for name in names:
        back = gpd.read_file(path, layer=name)
        assert pyproj.CRS(back.crs).equals(pyproj.CRS(CRS))
        assert len(back) == len(layers[name])
    back = gpd.read_file(path, layer="zones")
    assert back.loc[back.name == "Z1", "transmissive_bulk_volume_m3"].item() == 20.0
    back = gpd.read_file(path, layer="borings")
    assert back["n_spike"].tolist() == [2, 0]
    # Writing again replaces the file instead of appending duplicate layers.
    write_geopackage(path, {"borings": layers["borings"]})
    assert [n for n, _ in pyogrio.list_layers(path)] == ["borings"]
