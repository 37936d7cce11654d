"""A US-unit site end to end: every output in the declared CRS and units.

One invented site is written twice: in NAD83 / California zone 3 in metres (EPSG:26943) with SI
units, and in the same projection in US survey feet (EPSG:2227) with psi, US gal/min and ft/d,
every number converted (NIST SP 811: 1 US survey ft = 1200/3937 m, 1 ft = 0.3048 m,
1 psi = 6.894757 kPa, 1 US gal = 3.785411784 L).  Both are run through the library; each output
of the US run is opened in its reader and compared with the metric run's output converted:
coordinates through PROJ (EPSG:26943 -> EPSG:2227; PROJ's inverse-then-forward projection
agrees with the exact foot scaling to about 1e-10, so coordinates are compared to 1e-3 ft),
lengths to ft, volumes to US gal.

The site lies in the Pacific Ocean about 130 km west of the coast, at no property.
"""

from __future__ import annotations

import json
import re
import sqlite3
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pyproj
import pytest
import pyvista as pv
import rasterio
import xarray as xr

from geo3d.config import _LENGTHS, _PRESSURES, SiteConfig
from geo3d.io.output_frame import OutputFrame
from geo3d.pipeline import run

USFT = 1200.0 / 3937.0  # m per US survey foot (NIST SP 811)
FT = 0.3048  # m per international foot (NIST SP 811)
PSI = 6.894757  # kPa per psi (NIST SP 811)
GAL = 3.785411784e-3  # m3 per US gallon (NIST SP 811)
GPM = GAL / 60.0  # m3/s per US gal/min
ML_MIN = 1e-6 / 60.0  # m3/s per mL/min (SI prefixes)
DAY = 86400.0  # s

METRIC_CRS, US_CRS = "EPSG:26943", "EPSG:2227"
X0, Y0 = 1_700_000.0, 600_000.0  # m in EPSG:26943: open Pacific, about 123.9 W, 37.4 N
BORINGS = {"U1": (12.0, 14.0, 8.0), "U2": (61.0, 22.0, 8.4), "U3": (33.0, 71.0, 7.9)}
DEPTHS = np.round(np.arange(0.3, 3.01, 0.1), 3)
DTW = 1.2  # m, invented
GAMMA_W, P_ATM = 9.80665, 101.325  # kPa/m and kPa (NIST SP 811)
#: Settings in [units] length or pressure (beyond the defaults, so both sites match).
FORMATS = ["vtk", "geotiff", "gpkg", "netcdf", "csv", "report"]
SETTINGS = {"grid": {"cell_size": [10.0, 10.0, 0.5]}, "composite": {"interval": 0.2}}


def _log(index: int) -> pd.DataFrame:
    head = GAMMA_W * np.clip(DEPTHS - DTW, 0.0, None)
    p_net = 30.0 + 8.0 * index + 12.0 * np.sin(2.0 * DEPTHS + index)
    return pd.DataFrame(
        {
            "depth": DEPTHS,
            "pressure": P_ATM + head + p_net,
            "flow": np.full(DEPTHS.size, 300.0 * ML_MIN),
            "ec": 20.0 + 4.0 * DEPTHS + index,
            "time": DEPTHS / 0.02,
        }
    )


def _settings(length: float, pressure: float) -> dict[str, dict]:
    """Every length and pressure setting, default or not, in the site's units."""
    values: dict[str, dict] = {}
    for table, size in ((_LENGTHS, length), (_PRESSURES, pressure)):
        for section, keys in table.items():
            model = SiteConfig.model_fields[section].default_factory()
            for key in keys:
                value = SETTINGS.get(section, {}).get(key, getattr(model, key))
                if isinstance(value, list | tuple):
                    value = [v / size for v in value]
                elif not isinstance(value, str):
                    value = value / size
                values.setdefault(section, {})[key] = value
    return values


def _toml(crs: str, units: dict[str, str], settings: dict[str, dict]) -> str:
    lines = ['[site]\nname = "Units site"', f'crs = "{crs}"', "[units]"]
    lines += [f'{k} = "{v}"' for k, v in units.items()]
    lines += [
        "[files]",
        'borings = "borings.csv"\nlogs = "logs/*.csv"\ndissipation = "dissipation.csv"',
        'slug_tests = ""\nsensor_checks = "sensor_checks.csv"',
        'boundary = "boundary.geojson"\nzones = "zones.geojson"',
        '[logs]\ntime = "time"',
    ]
    for section, values in settings.items():
        lines.append(f"[{section}]")
        lines += [f"{k} = {json.dumps(v)}" for k, v in values.items()]
    lines += ["[simulation]", "realizations = 2", "[output]", f"formats = {json.dumps(FORMATS)}"]
    return "\n".join(lines) + "\n"


def _geojson(path: Path, crs: str, rings: list, props: list[dict]) -> None:
    features = [
        {"type": "Feature", "properties": p, "geometry": {"type": "Polygon", "coordinates": [r]}}
        for r, p in zip(rings, props, strict=True)
    ]
    code = crs.split(":")[1]
    doc = {"type": "FeatureCollection", "features": features}
    doc["crs"] = {"type": "name", "properties": {"name": f"urn:ogc:def:crs:EPSG::{code}"}}
    path.write_text(json.dumps(doc))


def _square(x0, y0, x1, y1, size):
    corners = ((x0, y0), (x1, y0), (x1, y1), (x0, y1), (x0, y0))
    return [[(X0 + x) / size, (Y0 + y) / size] for x, y in corners]


def write_site(root: Path, *, us: bool) -> Path:
    """Write the site in metres and SI (``us=False``) or in US survey feet and US units."""
    length = USFT if us else 1.0
    pressure, flow = (PSI, GPM) if us else (1.0, ML_MIN)
    units = {"length": "us_survey_ft", "pressure": "psi", "flow": "gal/min", "k": "ft/d"}
    units |= {"output_length": "ft", "output_volume": "gal"}
    if not us:
        units = {"length": "m", "pressure": "kPa", "flow": "mL/min", "k": "m/s"}
    (root / "logs").mkdir(parents=True)
    (root / "site.toml").write_text(
        _toml(US_CRS if us else METRIC_CRS, units, _settings(length, pressure))
    )
    rows = [
        {"boring_id": b, "x": (X0 + x) / length, "y": (Y0 + y) / length, "ground_elev": z / length}
        for b, (x, y, z) in BORINGS.items()
    ]
    pd.DataFrame(rows).to_csv(root / "borings.csv", index=False, float_format="%.17g")
    for index, boring in enumerate(BORINGS):
        log = _log(index)
        log["depth"] /= length
        log["pressure"] /= pressure
        log["flow"] /= flow
        log.to_csv(root / "logs" / f"{boring}.csv", index=False, float_format="%.17g")
    tests = []
    for boring, depth in (("U1", 2.5), ("U2", 2.2), ("U3", 2.8)):
        static = P_ATM + GAMMA_W * (depth - DTW)
        for t in (0.0, 30.0, 60.0, 120.0, 240.0):
            p = (static + 25.0 * np.exp(-t / 40.0)) / pressure
            tests.append({"boring_id": boring, "depth": depth / length, "time_s": t, "pressure": p})
    pd.DataFrame(tests).to_csv(root / "dissipation.csv", index=False, float_format="%.17g")
    checks = pd.DataFrame(
        {
            "boring_id": ["U1", "U2"],
            "sensor": ["pressure", "flow"],
            "stage": ["pre", "post"],
            "measured": [101.0 / pressure, 250.0 * ML_MIN / flow],  # U2's flow check fails
            "expected": [101.3 / pressure, 300.0 * ML_MIN / flow],
            "tolerance": [1.0 / pressure, 15.0 * ML_MIN / flow],
        }
    )
    checks.to_csv(root / "sensor_checks.csv", index=False, float_format="%.17g")
    crs = US_CRS if us else METRIC_CRS
    _geojson(root / "boundary.geojson", crs, [_square(0, 0, 80, 90, length)], [{"name": "site"}])
    zone = {"name": "Z1", "top": 1.2 / length, "bottom": 2.6 / length, "reference": "depth"}
    _geojson(root / "zones.geojson", crs, [_square(5, 5, 60, 60, length)], [zone])
    return root


@pytest.fixture(scope="module")
def runs(tmp_path_factory):
    base = tmp_path_factory.mktemp("units")
    metric_site = write_site(base / "metric", us=False)
    # the metric run's report is not compared, only the US one's is read
    exports = [f for f in FORMATS if f != "report"]
    metric = run(metric_site, base / "metric-out", n_realizations=2, formats=exports)
    us = run(write_site(base / "us", us=True), base / "us-out", n_realizations=2)
    return metric, us


def to_us(x, y):
    """Metric output coordinates (EPSG:26943) in the declared CRS (EPSG:2227) through PROJ."""
    transformer = pyproj.Transformer.from_crs(METRIC_CRS, US_CRS, always_xy=True)
    return transformer.transform(np.asarray(x, float), np.asarray(y, float))


def test_frame_uses_the_declared_crs_and_units(runs):
    _, us = runs
    frame = OutputFrame.from_site(us.site)
    assert frame.crs.equals(pyproj.CRS(US_CRS))
    assert (frame.coordinate_unit, frame.length_unit, frame.volume_unit) == (
        "us_survey_ft",
        "ft",
        "gal",
    )
    assert frame.label == "NAD83 / California zone 3 (ftUS) (EPSG:2227)"
    assert frame.is_scaling


@pytest.mark.slow
def test_geotiffs_in_the_declared_crs_and_feet(runs):
    metric, us = runs
    names = sorted(p.name for p in (metric.out_dir / "maps").glob("*.tif"))
    assert "transmissive_thickness.tif" in names and "wt_elev.tif" in names
    for name in names:
        with (
            rasterio.open(metric.out_dir / "maps" / name) as m,
            rasterio.open(us.out_dir / "maps" / name) as u,
        ):
            assert pyproj.CRS.from_wkt(u.crs.to_wkt()).equals(pyproj.CRS(US_CRS))
            west, north = to_us(m.transform.c, m.transform.f)
            assert (u.transform.c, u.transform.f) == pytest.approx((west, north), abs=1e-3)
            assert u.transform.a == pytest.approx(m.transform.a / USFT, rel=1e-9)
            unit = m.tags(1)["units"]
            scale = 1.0 / FT if unit == "m" else 1.0
            assert u.tags(1)["units"] == ("ft" if unit == "m" else unit)
            np.testing.assert_allclose(
                u.read(1), m.read(1) * scale, rtol=1e-5, atol=1e-6, equal_nan=True
            )


@pytest.mark.slow
def test_geopackage_in_the_declared_crs_and_feet(runs):
    metric, us = runs
    m = gpd.read_file(metric.out_dir / "site.gpkg", layer="borings").sort_values("boring_id")
    u = gpd.read_file(us.out_dir / "site.gpkg", layer="borings").sort_values("boring_id")
    assert pyproj.CRS(u.crs).equals(pyproj.CRS(US_CRS))
    x, y = to_us(m.geometry.x, m.geometry.y)
    np.testing.assert_allclose(u.geometry.x, x, atol=1e-3)
    np.testing.assert_allclose(u.geometry.y, y, atol=1e-3)
    np.testing.assert_allclose(u["x_usft"], x, atol=1e-3)
    for field in ("depth_to_water", "total_depth", "transmissive_thickness", "ground_elev"):
        np.testing.assert_allclose(u[f"{field}_ft"], m[f"{field}_m"] / FT, rtol=1e-6)
    zm = gpd.read_file(metric.out_dir / "site.gpkg", layer="zones")
    zu = gpd.read_file(us.out_dir / "site.gpkg", layer="zones")
    np.testing.assert_allclose(zu["top_ft"], zm["top_m"] / FT, rtol=1e-9)
    volume = [c for c in zm.columns if c.endswith("_m3")]
    assert volume
    for column in volume:
        gallons = column.replace("_m3", "_gal")
        np.testing.assert_allclose(zu[gallons], zm[column] / GAL, rtol=1e-5)
    with sqlite3.connect(us.out_dir / "site.gpkg") as db:
        rows = dict(db.execute("select table_name, description from gpkg_contents"))
    assert "EPSG:2227" in rows["borings"] and "lengths in ft" in rows["borings"]
    assert "volumes in US gal" in rows["zones"]


@pytest.mark.slow
def test_vtk_in_the_declared_crs_and_its_feet(runs):
    metric, us = runs
    mi, ui = pv.read(metric.out_dir / "model.vti"), pv.read(us.out_dir / "model.vti")
    np.testing.assert_allclose(ui.spacing, np.asarray(mi.spacing) / USFT, rtol=1e-9)
    ox, oy = to_us(mi.origin[0], mi.origin[1])
    assert ui.origin == pytest.approx((ox, oy, mi.origin[2] / USFT), abs=1e-3)
    np.testing.assert_allclose(ui.cell_data["log10_k"], mi.cell_data["log10_k"], rtol=1e-5)
    assert "EPSG:2227" in str(ui.field_data["crs"][0])
    mb, ub = pv.read(metric.out_dir / "borings.vtp"), pv.read(us.out_dir / "borings.vtp")
    x, y = to_us(mb.points[:, 0], mb.points[:, 1])
    np.testing.assert_allclose(ub.points[:, 0], x, atol=1e-3)
    np.testing.assert_allclose(ub.points[:, 1], y, atol=1e-3)
    np.testing.assert_allclose(ub.points[:, 2], mb.points[:, 2] / USFT, rtol=1e-6)
    np.testing.assert_allclose(ub.point_data["depth_usft"], mb.point_data["depth_m"] / USFT)
    assert any("depth_usft: ftUS" in str(v) for v in ub.field_data["units"])
    site = pv.read(us.out_dir / "site.vtm")
    assert "wt_elev_usft" in site["water_table"].point_data


@pytest.mark.slow
def test_netcdf_in_the_declared_crs_and_feet(runs):
    metric, us = runs
    with (
        xr.open_dataset(metric.out_dir / "model.nc") as m,
        xr.open_dataset(us.out_dir / "model.nc") as u,
    ):
        assert pyproj.CRS.from_cf(u["spatial_ref"].attrs).equals(pyproj.CRS(US_CRS))
        assert (u["x"].attrs["units"], u["y"].attrs["units"]) == ("US_survey_foot",) * 2
        assert u["z"].attrs["units"] == "ft"
        x, _ = to_us(m["x"].values, np.full(m.sizes["x"], m["y"].values[0]))
        np.testing.assert_allclose(u["x"].values, x, atol=1e-3)
        np.testing.assert_allclose(u["z"].values, m["z"].values / FT, rtol=1e-9)
        np.testing.assert_allclose(u["ground_elev"].values, m["ground_elev"].values / FT, rtol=1e-6)
        assert u["ground_elev"].attrs["units"] == "ft"
        np.testing.assert_allclose(u["log10_k"].values, m["log10_k"].values, rtol=1e-5)


@pytest.mark.slow
def test_tables_in_feet_and_gallons(runs):
    metric, us = runs
    m = pd.read_csv(metric.out_dir / "intervals.csv")
    u = pd.read_csv(us.out_dir / "intervals.csv")
    np.testing.assert_allclose(u["top_ft"], m["top_m"] / FT, rtol=1e-9)
    x, y = to_us(m["x_m"], m["y_m"])
    np.testing.assert_allclose(u["x_usft"], x, atol=1e-3)
    np.testing.assert_allclose(u["y_usft"], y, atol=1e-3)
    vm = pd.read_csv(metric.out_dir / "volumes.csv")
    vu = pd.read_csv(us.out_dir / "volumes.csv")
    np.testing.assert_allclose(vu["bulk_volume_gal"], vm["bulk_volume_m3"] / GAL, rtol=1e-5)


# A length, area or volume labelled in metres: "m", "m2", "m3", "m²", "m³" standing alone
# (K in m/s and EC in mS/m are not lengths and stay).
METRE_LABEL = re.compile(r"(?<![\w/.\-])m(?:2|3|\u00b2|\u00b3)?(?![\w/])")


def _report_text(path: Path) -> str:
    text = path.read_text(encoding="utf-8")
    text = re.sub(r"data:[^\"')]+", "", text)  # embedded images
    text = re.sub(r"<style.*?</style>", "", text, flags=re.S)
    return re.sub(r"<[^>]+>", " ", text)


@pytest.mark.slow
def test_report_has_no_metre_label_for_a_feet_site(runs):
    _, us = runs
    text = _report_text(us.out_dir / "report.html")
    found = [text[max(0, h.start() - 40) : h.end() + 20] for h in METRE_LABEL.finditer(text)]
    assert not found, found[:5]
    assert "NAD83 / California zone 3 (ftUS) (EPSG:2227)" in text
    assert "metre axes" not in text and "EPSG:26943" not in text
    assert "gal/min" in text  # the failed flow check, in the declared flow unit
    # the pattern is not blind: it finds the labels a metric site's report carries
    for label in ("Borings (x, y in m; ground elevation in m)", "thickness (m)", "1 250 m\u00b3"):
        assert METRE_LABEL.search(label), label


# ---------------------------------------------------------------------------------------------
# [output] crs: another projection
# ---------------------------------------------------------------------------------------------


def test_output_crs_must_be_projected_in_metres_or_feet(tmp_path):
    from geo3d.config import config_from_dict
    from geo3d.errors import Geo3dError

    base = {"site": {"name": "s", "crs": "EPSG:32631"}}
    assert config_from_dict({**base, "output": {"crs": "EPSG:2154"}}).output.crs == "EPSG:2154"
    with pytest.raises(Geo3dError, match="not a projected CRS"):
        config_from_dict({**base, "output": {"crs": "EPSG:4326"}})
    with pytest.raises(Geo3dError, match="cannot read CRS"):
        config_from_dict({**base, "output": {"crs": "EPSG:99999999"}})


def test_grid_in_another_projection_takes_the_nearest_cell():
    # UTM 31N (EPSG:32631) to Lambert-93 (EPSG:2154): another projection, origin and scale
    # factor, so the output cells do not line up with the internal ones; each output cell
    # takes the value of the internal cell that holds its centre (nearest neighbour, no value
    # invented) and cells whose centre falls outside the grid are empty.
    internal = pyproj.CRS("EPSG:32631")
    frame = OutputFrame(internal_crs=internal, crs=pyproj.CRS("EPSG:2154"))
    assert not frame.is_scaling
    x = 500_000.0 + 10.0 * (np.arange(12) + 0.5)
    y = 5_000_000.0 + 10.0 * (np.arange(9) + 0.5)
    values = np.arange(9 * 12, dtype=float).reshape(9, 12)
    da = xr.DataArray(values, dims=("y", "x"), coords={"y": y, "x": x}, attrs={"units": "m"})
    out = frame.grid(da.assign_attrs(cell_size=[10.0, 10.0]))
    assert out.attrs["cell_size"] == [10.0, 10.0]
    xx, yy = np.meshgrid(out["x"].values, out["y"].values)
    back_x, back_y = pyproj.Transformer.from_crs(
        "EPSG:2154", "EPSG:32631", always_xy=True
    ).transform(xx, yy)
    col = np.floor((back_x - 500_000.0) / 10.0).astype(int)
    row = np.floor((back_y - 5_000_000.0) / 10.0).astype(int)
    inside = (col >= 0) & (col < 12) & (row >= 0) & (row < 9)
    assert inside.sum() > 0.8 * values.size
    np.testing.assert_array_equal(out.values[inside], values[row[inside], col[inside]])
    assert np.isnan(out.values[~inside]).all()
    # points go through PROJ exactly
    px, py = frame.xy(x[:3], y[:3])
    ex, ey = pyproj.Transformer.from_crs(internal, "EPSG:2154", always_xy=True).transform(
        x[:3], y[:3]
    )
    np.testing.assert_allclose(px, ex)
    np.testing.assert_allclose(py, ey)
    np.testing.assert_allclose(frame.xy_internal(px, py), (x[:3], y[:3]), atol=1e-6)
