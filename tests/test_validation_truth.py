"""Tests of the synthetic-truth generator (geo3d.validation): geometry, physics, files, units."""

from __future__ import annotations

import json
import warnings

import numpy as np
import pandas as pd
import pytest

from geo3d.validation.forward import (
    GAMMA_W,
    ProbeSettings,
    cylinder_shape_factor,
    dissipation_record,
    injection_log,
    slug_test_k,
)
from geo3d.validation.geology import Body, Geology, random_geology
from geo3d.validation.sitefolder import write_site
from geo3d.validation.truth import FACIES, draw_site, height_fraction, truth_volumes

IMPERIAL = {
    "length": "ft",
    "pressure": "psi",
    "pressure_reference": "gauge",
    "flow": "gal/min",
    "ec": "uS/cm",
    "k": "ft/d",
}
METRIC = {
    "length": "m",
    "pressure": "kPa",
    "pressure_reference": "absolute",
    "flow": "L/min",
    "ec": "mS/m",
    "k": "cm/s",
}


@pytest.fixture(scope="module")
def small_site():
    return draw_site(7, n_borings=12, units=IMPERIAL)


@pytest.fixture(scope="module")
def small_volumes(small_site):
    return truth_volumes(small_site)


def uniform_log(
    probe: ProbeSettings,
    log10_k: float,
    ec: float,
    *,
    total_depth: float,
    depth_to_water: float,
    p_atm: float,
    seed: int = 0,
) -> pd.DataFrame:
    """Injection log of a uniform soil pushed in 1 cm steps one metre past ``total_depth``."""
    depth = np.arange(0.0, total_depth + 1.0, 0.01)
    return injection_log(
        depth,
        np.full(depth.size, log10_k),
        np.full(depth.size, ec),
        total_depth=total_depth,
        depth_to_water=depth_to_water,
        p_atm=p_atm,
        skin=1.0,
        unsaturated_factor=0.5,
        probe=probe,
        rng=np.random.default_rng(seed),
    )


def test_shape_factor_matches_hvorslev_worked_value():
    # REFERENCES.md (V): cylinder L = 0.30 m, D = 0.05 m gives F = 0.756470 m (Hvorslev 1951)
    assert cylinder_shape_factor(0.30, 0.05) == pytest.approx(0.756470, abs=5e-7)


def test_height_fraction_of_partly_covered_cells():
    # geometry: a cell [0, 1] between 0.25 and 1.5 is 75 % covered; [1, 2] is 50 % covered
    assert height_fraction(np.array([0.5, 1.5]), 1.0, 0.25, 1.5).tolist() == [0.75, 0.5]


def test_injection_log_inverts_to_the_true_k_in_uniform_soil():
    # Hvorslev (1951) steady injection: K = Q gamma_w / (F P_net) must return the true K
    probe = ProbeSettings(sensor_noise=1e-9, resolution=0.02)
    log = uniform_log(probe, -5.0, 20.0, total_depth=5.0, depth_to_water=2.0, p_atm=101.325)
    below = log[(log["depth"] > 2.5)]
    p_net = below["pressure"] - 101.325 - GAMMA_W * (below["depth"] - 2.0)
    k = below["flow"] * GAMMA_W / (probe.shape_factor * p_net)
    # per-sample log10 K noise of 0.03 (the generator's setting): the median is within 0.01
    assert np.median(np.log10(k)) == pytest.approx(-5.0, abs=0.01)
    # the first readings (flow not yet on) are barometric
    assert log["pressure"].iloc[0] == pytest.approx(101.325, abs=1e-6)


def test_tight_soil_holds_the_pressure_under_the_limit_and_cuts_the_flow():
    probe = ProbeSettings(sensor_noise=1e-9, pressure_limit=1000.0)
    log = uniform_log(probe, -9.0, 100.0, total_depth=3.0, depth_to_water=1.0, p_atm=100.0, seed=1)
    on = log[log["depth"] > 0.1]
    assert (on["pressure"] <= 1000.0).all()
    assert (on["pressure"] >= 0.95 * 1000.0 - 1e-6).all()
    assert (on["flow"] < 0.1 * probe.flow).all()


def test_dissipation_record_tends_to_the_hydrostatic_pressure():
    record = dissipation_record(
        8.0, depth_to_water=3.0, p_atm=100.0, noise=1e-9, rng=np.random.default_rng(2)
    )
    # P_static = P_atm + gamma_w (depth - depth to water); at least 5 time lags have passed,
    # so less than exp(-5) < 0.7 % of the excess is left
    p_static = 100.0 + GAMMA_W * 5.0
    excess0 = record["pressure"].iloc[0] - p_static
    assert record["pressure"].iloc[-1] - p_static < 0.007 * excess0


def test_slug_test_is_the_arithmetic_mean_over_the_screen():
    depth = np.arange(0.0, 2.0, 0.01)
    log10_k = np.where(depth < 1.0, -4.0, -6.0)
    k = slug_test_k(depth, log10_k, 0.5, 1.49, rng=np.random.default_rng(0), error=0.0)
    # half the screen at 1e-4, half at 1e-6 m/s: arithmetic mean of layered K (flow parallel
    # to layers, Freeze & Cherry 1979 eq. 2.31)
    assert k == pytest.approx(0.5 * (1e-4 + 1e-6), rel=0.02)


def test_bodies_paint_over_the_layer_cake():
    layers = Body("layers", (0, 2), {"contacts": (5.0,)})
    lens = Body("lens", (1,), {"cx": 10.0, "cy": 10.0, "cz": 2.0, "azimuth": 0.0, "a": 4.0,
                               "b": 2.0, "c": 1.0})  # fmt: skip
    geology = Geology((layers, lens))
    codes = geology.lithology_at(
        np.array([0.0, 0.0, 10.0, 13.9, 14.1]), 10.0, np.array([4.0, 6.0, 2.0, 2.0, 2.0])
    )
    # below the contact clay (0), above it sand (2); inside the ellipsoid silt (1)
    assert codes.tolist() == [0, 2, 1, 1, 0]


def test_random_geology_refuses_unknown_styles():
    with pytest.raises(ValueError, match="unknown geology style"):
        random_geology(np.random.default_rng(0), size=(50, 50), top=10, base=0, styles=["reef"])


def test_truth_volumes_add_up(small_site, small_volumes):
    v = small_volumes.set_index(["zone", "part", "facies"])["volume_m3"]
    for zone in small_volumes["zone"].unique():
        for part in ("saturated", "unsaturated", "all"):
            assert sum(v[(zone, part, f)] for f in FACIES) == pytest.approx(v[(zone, part, "all")])
        for f in (*FACIES, "all"):
            both = v[(zone, "saturated", f)] + v[(zone, "unsaturated", f)]
            assert both == pytest.approx(v[(zone, "all", f)])


def test_site_volume_is_area_times_mean_thickness(small_site, small_volumes):
    # a plane integrates over a polygon to its value at the centroid times the area
    # (geometry), so the site's volume is area * (ground at the centroid - base).  Cells cut
    # by the boundary take the ground at their centre: at most perimeter * dx * |grad| * dx / 2
    # off, with |grad| <= 0.015 (the generator's ground tilt is at most 1 % along each axis)
    b = small_site.boundary
    c = b.centroid
    expected = b.area * (small_site.plane("ground", c.x, c.y) - small_site.base)
    dx = small_site.lattice["x"][1] - small_site.lattice["x"][0]
    total = small_volumes.query("zone == 'site' and part == 'all' and facies == 'all'")
    tolerance = b.length * dx * 0.015 * dx / 2
    assert float(total["volume_m3"].iloc[0]) == pytest.approx(float(expected), abs=tolerance)


def test_zone_volume_is_area_times_height(small_site, small_volumes):
    for zone in small_site.zones:
        row = small_volumes.query(f"zone == '{zone.name}' and part == 'all' and facies == 'all'")
        height = abs(zone.bottom - zone.top)
        # zones lie inside the site and above the base: area * height (geometry)
        assert float(row["volume_m3"].iloc[0]) == pytest.approx(zone.polygon.area * height)


def test_same_seed_same_site():
    a = draw_site(3, n_borings=6, units=METRIC)
    b = draw_site(3, n_borings=6, units=METRIC)
    pd.testing.assert_frame_equal(a.borings, b.borings)
    pd.testing.assert_frame_equal(a.logs["B-01"], b.logs["B-01"])
    assert np.array_equal(a.lattice["facies"], b.lattice["facies"])


@pytest.mark.parametrize("units", [IMPERIAL, METRIC], ids=["imperial", "metric"])
def test_written_site_reads_back_in_si(tmp_path, units):
    from geo3d.site import read_site

    truth = draw_site(11, n_borings=8, units=units)
    folder = write_site(truth, tmp_path / "site")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        site = read_site(folder)
    got = site.borings.set_index("boring_id")
    want = truth.borings.set_index("boring_id")
    # coordinates: the local origin plus the local position, in the CRS's metre version
    np.testing.assert_allclose(got["x"], truth.origin[0] + want["x"], atol=2e-3)
    np.testing.assert_allclose(got["ground_elev"], want["ground_elev"], atol=2e-4)
    log = site.samples[site.samples["boring_id"] == "B-02"].reset_index(drop=True)
    true_log = truth.logs["B-02"]
    np.testing.assert_allclose(log["depth"], true_log["depth"], atol=1e-4)
    np.testing.assert_allclose(log["flow"], true_log["flow"], rtol=1e-5, atol=1e-12)
    np.testing.assert_allclose(log["ec"], true_log["ec"], rtol=1e-4, atol=1e-3)
    expected_p = true_log["pressure"]
    if units["pressure_reference"] == "gauge":
        expected_p = expected_p - truth.p_atm[str(want.loc["B-02", "date"])]
    np.testing.assert_allclose(log["pressure"], expected_p, atol=2e-3)
    np.testing.assert_allclose(
        site.slug_tests["k"].to_numpy(), truth.slug_tests["k"].to_numpy(), rtol=1e-4
    )
    zones = site.zones.set_index("name")
    for zone in truth.zones:
        assert zones.loc[zone.name, "top"] == pytest.approx(zone.top, abs=1e-3)
        assert zones.loc[zone.name].geometry.area == pytest.approx(zone.polygon.area, rel=1e-4)
    stored = json.loads((folder / "truth" / "truth.json").read_text())
    assert {row["zone"] for row in stored["volumes"]} == {"site"} | {z.name for z in truth.zones}
