"""The committed demo site: reproducible from its generator, complete, and true to its truth.

The demo site is invented data (scripts/make_demo_site.py); these tests check that the committed
files are what the generator writes for the default seed, that they parse with the counts the
generator reports, and that the recorded data agree with the saved truth through published
physics (hydrostatics, Hvorslev's steady-injection equation, the exponential time lag).
"""

from __future__ import annotations

import hashlib
import importlib.util
import json
import math
import sys
import tomllib
from pathlib import Path

import geopandas as gpd
import lasio
import numpy as np
import pandas as pd
import pytest
import xarray as xr
from hypothesis import given, settings
from hypothesis import strategies as st
from shapely.geometry import Point

from geo3d.logs.hydraulic import GAMMA_W, k_from_injection

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "demo_site"
SCRIPT = ROOT / "scripts" / "make_demo_site.py"
TEMPLATE = ROOT / "geo3d" / "templates" / "site.toml"
NOT_GENERATED = {"README.md"}


def _load_generator():
    spec = importlib.util.spec_from_file_location("make_demo_site", SCRIPT)
    module = importlib.util.module_from_spec(spec)
    sys.modules.setdefault(spec.name, module)  # dataclasses look their module up here
    spec.loader.exec_module(module)
    return module


@pytest.fixture(scope="module")
def generator():
    return _load_generator()


@pytest.fixture(scope="module")
def truth() -> dict:
    return json.loads((DEMO / "truth" / "truth.json").read_text())


@pytest.fixture(scope="module")
def borings() -> pd.DataFrame:
    return pd.read_csv(DEMO / "borings.csv", dtype={"boring_id": str})


@pytest.fixture(scope="module")
def logs(truth) -> dict[str, pd.DataFrame]:
    out = {}
    for path in sorted((DEMO / "logs").glob("*.csv")):
        out[path.stem] = pd.read_csv(path)
    for path in sorted((DEMO / "logs").glob("*.las")):
        out[path.stem] = lasio.read(path).df().reset_index().rename(columns=str.lower)
    return out


@pytest.fixture(scope="module")
def dissipation() -> pd.DataFrame:
    return pd.read_csv(DEMO / "dissipation.csv", dtype={"boring_id": str})


def _sha256(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def _files(folder: Path) -> set[str]:
    return {
        p.relative_to(folder).as_posix()
        for p in folder.rglob("*")
        if p.is_file() and p.name not in NOT_GENERATED
    }


# ---------------------------------------------------------------------------------------------
# reproducibility
# ---------------------------------------------------------------------------------------------


@pytest.mark.slow
def test_generator_rewrites_the_committed_site_byte_for_byte(generator, tmp_path):
    out = tmp_path / "demo"
    generator.build_demo_site(out, seed=generator.DEFAULT_SEED, write_truth_grid=False)
    written = _files(out)
    committed = _files(DEMO) - {"truth/truth.nc"}
    assert written == committed
    for name in sorted(committed):
        assert _sha256(out / name) == _sha256(DEMO / name), f"{name} differs from the generator"


def test_truth_grid_is_the_generator_truth(generator, truth):
    """A random sample of truth.nc cells equals the generator's truth at the cell centres."""
    ds = xr.open_dataset(DEMO / "truth" / "truth.nc")
    grid = truth["truth_grid"]
    assert [ds.sizes[d] for d in ("z", "y", "x")] == grid["shape_zyx"]
    dx, dy, dz = grid["cell_size"]
    assert np.allclose(np.diff(ds.x), dx) and np.allclose(np.diff(ds.y), dy)
    assert np.allclose(np.diff(ds.z), dz)
    assert (ds.x[0], ds.y[0], ds.z[0]) == pytest.approx((grid["x0"], grid["y0"], grid["z0"]))
    rng = np.random.default_rng(0)
    iz, iy, ix = (rng.integers(0, n, 1500) for n in grid["shape_zyx"])
    model = generator.Truth(truth["seed"])
    x = ds.x.values[ix] - generator.ORIGIN[0]
    y = ds.y.values[iy] - generator.ORIGIN[1]
    unit, log10_k, _ = model.evaluate(x, y, ds.z.values[iz])
    stored_k = ds.log10_k.values[iz, iy, ix]
    stored_unit = ds.facies_code.values[iz, iy, ix]
    np.testing.assert_array_equal(stored_unit, unit)
    # log10_k is stored with netCDF "least_significant_digit = 2" quantization (step 2**-7)
    np.testing.assert_allclose(stored_k, log10_k, atol=2.0**-7, equal_nan=True)
    codes = ds.hydrofacies_code.values[iz, iy, ix]
    finite = np.isfinite(log10_k)
    # storage < -7 <= transitional < -5 <= transmissive (common practice; geo3d defaults)
    expected = np.digitize(log10_k[finite].astype(np.float32), [-7.0, -5.0])
    np.testing.assert_array_equal(codes[finite], expected)
    assert np.all(codes[~finite] == -1)


@settings(max_examples=50, deadline=None)
@given(
    x=st.floats(min_value=-50.0, max_value=250.0),
    y=st.floats(min_value=-50.0, max_value=200.0),
)
def test_water_table_plane_in_world_coordinates_matches_the_truth(generator, x, y):
    plane = generator.water_table_plane_world()
    world_x, world_y = x + generator.ORIGIN[0], y + generator.ORIGIN[1]
    expected = plane["a"] * world_x + plane["b"] * world_y + plane["c"]
    assert float(generator.water_table(x, y)) == pytest.approx(expected, abs=1e-6)


def test_the_seed_changes_the_truth(generator):
    x, y, z = np.array([10.0, 90.0]), np.array([20.0, 70.0]), np.array([95.0, 88.0])
    first = generator.Truth(generator.DEFAULT_SEED).field(x, y, z)
    again = generator.Truth(generator.DEFAULT_SEED).field(x, y, z)
    other = generator.Truth(generator.DEFAULT_SEED + 1).field(x, y, z)
    np.testing.assert_array_equal(first, again)
    assert not np.allclose(first, other)


# ---------------------------------------------------------------------------------------------
# the files and their counts
# ---------------------------------------------------------------------------------------------


def test_site_toml_has_the_template_keys():
    def keys(table: dict, prefix: str = "") -> set[str]:
        out = set()
        for key, value in table.items():
            # a barometric pressure may be one number or a table of values (a leaf either way)
            if isinstance(value, dict) and f"{prefix}{key}" != "probe.barometric_pressure":
                out |= keys(value, f"{prefix}{key}.")
            elif isinstance(value, list) and value and isinstance(value[0], dict):
                out |= keys(value[0], f"{prefix}{key}[].")
            else:
                out.add(prefix + key)
        return out

    demo = tomllib.loads((DEMO / "site.toml").read_text())
    template = tomllib.loads(TEMPLATE.read_text())
    assert keys(demo) == keys(template)
    assert demo["site"]["crs"] == "EPSG:32633"
    assert demo["files"]["logs"] == ["logs/*.csv", "logs/*.las"]


def test_borings_and_logs(truth, borings, logs):
    counts = truth["counts"]
    assert len(borings) == counts["borings"] == 25
    assert list(borings.columns) == ["boring_id", "x", "y", "ground_elev", "date"]
    assert borings["boring_id"].is_unique
    assert set(logs) == set(borings["boring_id"])
    assert len(list((DEMO / "logs").glob("*.las"))) == counts["log_files_las"] == 1
    assert len(list((DEMO / "logs").glob("*.csv"))) == counts["log_files_csv"] == 24
    assert sum(len(v) for v in logs.values()) == counts["samples"]
    # extent about 200 m x 150 m, relief of a couple of metres (the site's specification)
    assert 150 < np.ptp(borings["x"]) <= 210 and 100 < np.ptp(borings["y"]) <= 160
    assert 1.0 < np.ptp(borings["ground_elev"]) < 3.0
    spacing, speeds = [], []
    for boring_id, log in logs.items():
        assert list(log.columns) == ["depth", "pressure", "flow", "ec", "time"], boring_id
        assert np.all(np.diff(log["depth"]) > 0) and np.all(np.diff(log["time"]) > 0)
        assert 15.0 <= log["depth"].max() <= 25.0
        spacing.append(np.median(np.diff(log["depth"])))
        speeds.append(np.median(np.diff(log["depth"]) / np.diff(log["time"])))
    # a 2 cm/s push (ASTM D8037 section 1.1), a sample every ~1.5 cm (common practice)
    assert np.median(spacing) == pytest.approx(0.015, rel=0.05)
    assert np.median(speeds) == pytest.approx(0.02, rel=0.05)


def test_las_boring_matches_its_header(truth):
    path = DEMO / "logs" / f"{truth['las_boring']}.las"
    las = lasio.read(path)
    assert las.version["VERS"].value == 2.0
    assert las.well["WELL"].value == path.stem
    assert [c.mnemonic for c in las.curves] == ["DEPTH", "PRESSURE", "FLOW", "EC", "TIME"]
    assert [c.unit for c in las.curves] == ["m", "kPa", "mL/min", "mS/m", "s"]


def test_tests_and_checks_counts(truth, dissipation):
    counts = truth["counts"]
    assert list(dissipation.columns) == ["boring_id", "test_id", "depth", "time_s", "pressure"]
    assert len(dissipation) == counts["dissipation_rows"]
    assert dissipation["test_id"].nunique() == counts["dissipation_tests"]
    per_boring = dissipation.groupby("boring_id")["test_id"].nunique()
    assert per_boring.between(1, 3).all() and len(per_boring) >= 20  # "most borings"
    slug = pd.read_csv(DEMO / "slug_tests.csv")
    assert len(slug) == counts["slug_tests"] and 4 <= len(slug) <= 6
    length = slug["bottom_depth"] - slug["top_depth"]
    assert length.between(0.5, 1.5 + 1e-9).all()
    checks = pd.read_csv(DEMO / "sensor_checks.csv")
    assert len(checks) == counts["sensor_checks"] == 25 * 3 * 2
    failed = checks[(checks["measured"] - checks["expected"]).abs() > checks["tolerance"]]
    expected = truth["sensor_check_failed"]
    assert failed[["boring_id", "sensor", "stage"]].values.tolist() == [
        [expected["boring_id"], expected["sensor"], expected["stage"]]
    ]


def test_boundary_and_zones_carry_the_crs(borings, truth):
    boundary = gpd.read_file(DEMO / "boundary.geojson")
    zones = gpd.read_file(DEMO / "zones.geojson")
    assert boundary.crs.to_epsg() == 32633 and zones.crs.to_epsg() == 32633
    polygon = boundary.geometry.iloc[0]
    assert len(boundary) == 1 and polygon.geom_type == "Polygon"
    assert all(polygon.contains(Point(x, y)) for x, y in borings[["x", "y"]].to_numpy())
    assert len(zones) == truth["counts"]["zones"] == 2
    for column in ["name", "top", "bottom", "reference", "design_fraction", "radius_of_influence"]:
        assert column in zones.columns
    assert set(zones["reference"]) <= {"depth", "elevation"}
    assert all(polygon.contains(z) for z in zones.geometry)
    brine = borings.set_index("boring_id").loc[truth["brine"]["central_boring"]]
    assert zones.geometry.iloc[0].contains(Point(brine["x"], brine["y"]))


def test_site_lies_in_open_water(borings):
    # The invented site must point at no real property: its borings fall in the open Baltic
    # Sea, between Bornholm (east end about 15.2 E), Oland (south end about 56.2 N) and the
    # Polish coast (about 54.6 N at 16.5 E) (coastline positions from memory).
    from pyproj import Transformer

    to_lonlat = Transformer.from_crs("EPSG:32633", "EPSG:4326", always_xy=True)
    lon, lat = to_lonlat.transform(borings["x"].to_numpy(), borings["y"].to_numpy())
    assert (15.8 < lon).all() and (lon < 17.0).all()
    assert (55.2 < lat).all() and (lat < 55.9).all()


def test_demo_site_stays_small():
    total = sum(p.stat().st_size for p in DEMO.rglob("*") if p.is_file())
    assert total < 5e6  # a few MB at most


# ---------------------------------------------------------------------------------------------
# the data agree with the truth
# ---------------------------------------------------------------------------------------------


def test_water_table_plane(truth, borings):
    wt = truth["water_table"]
    # plane slope = gradient magnitude; down-gradient azimuth = atan2(-a, -b) clockwise from
    # north (the three-point problem, common practice)
    assert math.hypot(wt["a"], wt["b"]) == pytest.approx(wt["gradient"], rel=1e-9)
    azimuth = math.degrees(math.atan2(-wt["a"], -wt["b"])) % 360
    assert azimuth == pytest.approx(wt["flow_direction_deg"], abs=1e-6)
    assert 0.002 <= wt["gradient"] <= 0.01  # "gentle" (~0.005, the site's specification)
    for row in borings.itertuples():
        plane = wt["a"] * row.x + wt["b"] * row.y + wt["c"]
        depth_to_water = truth["borings"][row.boring_id]["true_depth_to_water"]
        assert row.ground_elev - plane == pytest.approx(depth_to_water, abs=0.01)
        assert 2.5 <= depth_to_water <= 5.5  # ~3-5 m below ground (specification)


def test_dissipation_records_approach_the_true_static_pressure(truth, dissipation, borings):
    noise = truth["probe"]["pressure_noise"]
    wt = truth["water_table"]
    collars = borings.set_index("boring_id")
    n_incomplete = 0
    for test in truth["dissipation_tests"]:
        record = dissipation[dissipation["test_id"] == test["test_id"]]
        assert record["boring_id"].iloc[0] == test["boring_id"]
        assert record["depth"].iloc[0] == pytest.approx(test["depth"])
        # hydrostatics: P_static = P_atm + gamma_w * (depth - depth_to_water), gamma_w from
        # NIST SP 811 (g = 9.80665 m/s2); depth to water from the truth's plane
        collar = collars.loc[test["boring_id"]]
        plane = wt["a"] * collar["x"] + wt["b"] * collar["y"] + wt["c"]
        depth_to_water = collar["ground_elev"] - plane
        p_static = test["p_atm"] + GAMMA_W * (test["depth"] - depth_to_water)
        assert p_static == pytest.approx(test["p_static"], abs=0.1)
        t = record["time_s"].to_numpy()
        p = record["pressure"].to_numpy()
        # exponential approach to the static pressure (Hvorslev 1951 time lag):
        # P(t) = P_static + (P_start - P_static) * exp(-t / T0); residuals are sensor noise
        expected = p_static + (test["p_start"] - p_static) * np.exp(-t / test["time_constant_s"])
        residual = p - expected
        assert abs(residual.mean()) < 4 * noise / np.sqrt(t.size) + 0.01
        assert residual.std() == pytest.approx(noise, rel=0.5)
        if test["complete"]:
            tail = p[t >= 0.8 * t[-1]]
            # the mean of n noisy readings is within 4 standard errors of the truth, plus what
            # is left of the excess pressure
            left = (test["p_start"] - p_static) * np.exp(-0.8 * t[-1] / test["time_constant_s"])
            assert abs(tail.mean() - p_static) < 4 * noise / np.sqrt(tail.size) + left + 0.02
        else:
            n_incomplete += 1
            # stopped before equilibrium: a share of the initial excess pressure remains
            excess = test["p_start"] - p_static
            assert excess > 20 * noise  # an excess clearly above the noise was watched
            remaining = (p[-3:].mean() - p_static) / excess
            assert 0.05 < remaining < 0.5
            assert 0.5 <= test["fraction_dissipated"] < 0.9
    assert n_incomplete >= 3


def test_slug_tests_agree_with_the_truth(generator, truth, borings):
    slug = pd.read_csv(DEMO / "slug_tests.csv")
    ds = xr.open_dataset(DEMO / "truth" / "truth.nc")
    collars = borings.set_index("boring_id")
    ranges = truth["facies"]
    low = min(r["log10_k_range"][0] for r in ranges.values())
    high = max(r["log10_k_range"][1] for r in ranges.values())
    for row, record in zip(slug.itertuples(), truth["slug_tests"], strict=True):
        assert row.k == pytest.approx(record["true_mean_k"] * record["error_factor"], rel=2e-3)
        assert 10**low <= row.k <= 10**high
        assert 0.5 < record["error_factor"] < 2.0  # small lognormal error
        collar = collars.loc[row.boring_id]
        # slug-test K is the arithmetic mean of K over the screen (Butler 1998, from memory):
        # recompute it along the boring from the generator's truth, 1 cm steps
        depth = np.arange(row.top_depth, row.bottom_depth + 1e-9, 0.01)
        x = np.full(depth.size, collar["x"] - generator.ORIGIN[0])
        y = np.full(depth.size, collar["y"] - generator.ORIGIN[1])
        _, log10_k, _ = generator.Truth(truth["seed"]).evaluate(x, y, collar["ground_elev"] - depth)
        assert np.mean(10.0**log10_k) == pytest.approx(record["true_mean_k"], rel=2e-3)
        if record["majority_unit"] not in ("sand_gravel", "silty_sand", "lower_sand"):
            continue  # thin lenses do not survive the 2 m grid
        column = ds.log10_k.sel(x=collar["x"], y=collar["y"], method="nearest")
        top = collar["ground_elev"] - row.top_depth
        bottom = collar["ground_elev"] - row.bottom_depth
        cells = column.where((column.z <= top) & (column.z >= bottom), drop=True)
        grid_mean = float(np.mean(10.0**cells.values))
        # the nearest 2 m x 2 m x 0.25 m cells differ from the boring's own column a little
        assert abs(np.log10(row.k / grid_mean)) < 0.5


def _net_pressure_and_k(log, boring, f_shape):
    depth = log["depth"].to_numpy()
    p_hydrostatic = GAMMA_W * np.clip(depth - boring["true_depth_to_water"], 0.0, None)
    p_net = log["pressure"].to_numpy() - boring["p_atm_first"] - p_hydrostatic
    k = k_from_injection(log["flow"].to_numpy() * 1e-6 / 60.0, p_net, f_shape)
    return p_net, k


def test_logs_follow_hvorslev_physics(truth, logs, borings):
    """K back-computed from the logs matches the truth grid where the probe can resolve it."""
    ds = xr.open_dataset(DEMO / "truth" / "truth.nc")
    probe = truth["probe"]
    f_shape = probe["shape_factor_m"]
    failed = truth["sensor_check_failed"]["boring_id"]
    limit = probe["pressure_limit"]
    differences = []
    for row in borings.itertuples():
        boring = truth["borings"][row.boring_id]
        log = logs[row.boring_id]
        # the first readings (screen at the surface) are atmospheric pressure, within noise
        first = log["pressure"].iloc[:3].median()
        assert first == pytest.approx(boring["p_atm_first"], abs=3 * probe["pressure_noise"])
        # nothing above the sensor's full scale (noise allowance 4 SD)
        assert log["pressure"].max() <= limit + 4 * probe["pressure_noise"]
        p_net, k = _net_pressure_and_k(log, boring, f_shape)
        column = ds.log10_k.sel(x=row.x, y=row.y, method="nearest")
        truth_k = column.sel(z=row.ground_elev - log["depth"].to_numpy(), method="nearest")
        saturated = log["depth"].to_numpy() > boring["true_depth_to_water"] + 0.3
        resolvable = saturated & (p_net > 3.0) & (log["pressure"] < 0.9 * limit)
        if row.boring_id != failed and resolvable.sum() > 50:
            differences.append(np.nanmedian(np.log10(k[resolvable]) - truth_k.values[resolvable]))
        # where the pump is held near the limit, flow has dropped (steady flow ~ pressure)
        held = log["pressure"] > 0.95 * limit
        if held.any():
            assert log["flow"][held].median() < 0.2 * log["flow"][~held].median()
    # Hvorslev (1951): K = Q*gamma_w/(F*P_net); the median misfit per boring is near zero
    assert len(differences) >= 22
    assert np.max(np.abs(differences)) < 0.2


def test_brine_layers_and_ec_dropout(truth, borings, logs):
    brine = truth["brine"]
    assert len(brine["borings"]) == 4
    collars = borings.set_index("boring_id")
    centre = collars.loc[brine["central_boring"], ["x", "y"]].to_numpy(float)
    for boring_id, layer in brine["borings"].items():
        # adjacent borings: within about two boring spacings of the central one
        assert np.hypot(*(collars.loc[boring_id, ["x", "y"]].to_numpy(float) - centre)) < 50.0
        boring = truth["borings"][boring_id]
        log = logs[boring_id]
        # pooled at the base of the sand and gravel, on the silty sand (its EC fades out over
        # the last 0.075 m above the contact, generator)
        assert layer["bottom_depth"] == pytest.approx(boring["sand_base_depth"] - 0.075, abs=0.01)
        inside = log["depth"].between(layer["top_depth"] + 0.2, layer["bottom_depth"] - 0.2)
        sand = log["depth"].between(boring["true_depth_to_water"] + 0.2, layer["top_depth"] - 0.3)
        assert inside.sum() > 10 and sand.sum() > 100
        # EC well above sand's 1-20 mS/m (Palacky 1987, from memory) while the injection
        # pressure stays that of the clean sand above it: EC above the EC-K trend
        assert log["ec"][inside].median() > 40.0
        assert log["ec"][sand].median() < 20.0
        assert log["pressure"][inside].median() < log["pressure"][sand].median() + 60.0

    dropout = truth["ec_dropout"]
    assert dropout["boring_id"] not in brine["borings"]
    for boring_id, log in logs.items():
        missing = log["ec"].isna()
        if boring_id != dropout["boring_id"]:
            assert not missing.any(), boring_id
            continue
        gap = log["depth"].between(dropout["top_depth"], dropout["bottom_depth"])
        # one run of missing EC, about 1 m long, nothing else missing
        assert missing.sum() == gap.sum() == dropout["n_samples"] > 40
        assert (missing == gap).all()
        assert log.loc[gap, ["pressure", "flow", "depth", "time"]].notna().all().all()


# ---------------------------------------------------------------------------------------------
# read back through geo3d
# ---------------------------------------------------------------------------------------------


def _read_site():
    if importlib.util.find_spec("geo3d.site") is None:
        return None
    module = importlib.import_module("geo3d.site")
    return getattr(module, "read_site", None)


@pytest.mark.skipif(_read_site() is None, reason="geo3d.site.read_site is not available yet")
def test_read_site_gives_the_generator_counts(truth):
    site = _read_site()(DEMO)
    counts = truth["counts"]
    assert len(site.borings) == counts["borings"]
    assert len(site.samples) == counts["samples"]
    assert site.samples["boring_id"].nunique() == counts["borings"]
    assert site.dissipation["test_id"].nunique() == counts["dissipation_tests"]
    assert len(site.dissipation) == counts["dissipation_rows"]
    assert len(site.slug_tests) == counts["slug_tests"]
    assert len(site.sensor_checks) == counts["sensor_checks"]
    assert len(site.zones) == counts["zones"]
    assert site.crs.to_epsg() == 32633
    # mL/min to m3/s on reading: 1 mL = 1e-6 m3 (SI definition)
    las_log = site.samples[site.samples["boring_id"] == truth["las_boring"]]
    raw = lasio.read(DEMO / "logs" / f"{truth['las_boring']}.las").df()
    np.testing.assert_allclose(las_log["flow"].to_numpy(), raw["FLOW"].to_numpy() * 1e-6 / 60)
