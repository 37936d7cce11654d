"""The logs stage on the demo site, measured against the demo's synthetic truth.

The demo site (demo_site/, made by scripts/make_demo_site.py) is invented; its truth
(demo_site/truth/truth.json and truth.nc) records the water table, the dense brine layers
(EC above the site's EC-K trend), the run of missing EC (a logger dropout) and the true log10 K
field, so these tests measure how close the logs stage gets.
"""

import json
import warnings
from pathlib import Path

import numpy as np
import pytest
import xarray as xr

from geo3d.errors import Geo3dWarning
from geo3d.facies import classify_mixture
from geo3d.logs.process import process_logs
from geo3d.logs.water_level import boring_water_levels
from geo3d.site import read_site

pytestmark = pytest.mark.slow

DEMO = Path(__file__).resolve().parents[1] / "demo_site"


@pytest.fixture(scope="module")
def truth():
    return json.loads((DEMO / "truth" / "truth.json").read_text())


@pytest.fixture(scope="module")
def result():
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", Geo3dWarning)
        return process_logs(read_site(DEMO))


def test_water_levels_within_a_decimetre(result, truth):
    per_boring = boring_water_levels(result.water_levels)
    errors = [
        row.depth_to_water - truth["borings"][row.boring_id]["true_depth_to_water"]
        for row in per_boring.itertuples()
    ]
    assert len(errors) >= 15
    assert np.max(np.abs(errors)) < 0.1  # the site's acceptance limit
    # borings without a test take the water level of the site plane
    s = result.samples.groupby("boring_id").first()
    for boring_id in truth["borings_without_dissipation_test"]:
        true = truth["borings"][boring_id]["true_depth_to_water"]
        assert abs(s.loc[boring_id, "depth_to_water"] - true) < 0.1


def test_water_table_gradient_and_direction(result, truth):
    true = truth["water_table"]
    # level errors of a few cm over ~200 m change a 0.005 gradient by a few percent
    assert result.water_table.gradient == pytest.approx(true["gradient"], rel=0.15)
    assert abs(result.water_table.flow_direction_deg - true["flow_direction_deg"]) < 10.0


def test_brine_layers_are_flagged_there_and_nowhere_else(result, truth):
    # the brine's EC sits above the site's EC-K trend: the EC-above-trend flag (``ec_above_trend``)
    s = result.samples
    inside = np.zeros(len(s), dtype=bool)
    for boring_id, layer in truth["brine"]["borings"].items():
        in_boring = (s["boring_id"] == boring_id).to_numpy()
        top, bottom = layer["top_depth"], layer["bottom_depth"]
        # the anomaly tapers over 0.15 m at each end (generator); allow one taper each side
        inside |= in_boring & s["depth"].between(top - 0.15, bottom + 0.15).to_numpy()
        core = in_boring & s["depth"].between(top + 0.15, bottom - 0.15).to_numpy()
        transmissive = (s["log10_k"] >= -5.0).to_numpy()
        assert s.loc[core & transmissive, "ec_above_trend"].mean() > 0.8, boring_id
    assert not s.loc[~inside, "ec_above_trend"].any()


def test_ec_dropout_is_missing_not_zero(result, truth):
    gap = truth["ec_dropout"]
    s = result.samples
    at = (s["boring_id"] == gap["boring_id"]) & s["depth"].between(
        gap["top_depth"], gap["bottom_depth"]
    )
    assert at.sum() == gap["n_samples"]
    # missing EC stays missing: never a zero, never flagged as a spike or above the trend
    assert s.loc[at, "ec"].isna().all()
    assert not s.loc[at, ["spike", "ec_above_trend"]].any().any()
    assert (s["ec"].dropna() > 0).all()
    # K is still logged through the gap (pressure and flow were recorded)
    assert s.loc[at, "log10_k"].notna().mean() > 0.9
    # intervals inside the gap carry no EC and say so; their K is kept
    iv = result.intervals
    within = (
        (iv["boring_id"] == gap["boring_id"])
        & (iv["top"] >= gap["top_depth"])
        & (iv["bottom"] <= gap["bottom_depth"])
    )
    assert within.sum() >= 4
    assert iv.loc[within, "ec"].isna().all() and (iv.loc[within, "n_ec"] == 0).all()
    assert iv.loc[within, "log10_k"].notna().all()


def test_spikes_are_rare_in_the_clean_logs(result):
    # the demo plants no EC spike: at most 1 in 2000 samples (natural EC layering mistaken
    # for a spike, common practice for a Hampel filter at k = 4)
    assert result.samples["spike"].mean() < 5e-4


def _true_log10_k(x, y, z):
    with xr.open_dataset(DEMO / "truth" / "truth.nc") as ds:
        return (
            ds["log10_k"]
            .sel(x=xr.DataArray(x), y=xr.DataArray(y), z=xr.DataArray(z), method="nearest")
            .values.astype(float)
        )


def _correlation(intervals):
    true = _true_log10_k(
        intervals["x"].to_numpy(), intervals["y"].to_numpy(), intervals["z_mid"].to_numpy()
    )
    measured = intervals["log10_k"].to_numpy()
    ok = np.isfinite(true) & np.isfinite(measured)
    return np.corrcoef(measured[ok], true[ok])[0, 1], np.median(measured[ok] - true[ok])


def test_log_derived_k_correlates_with_the_true_field(result):
    iv = result.intervals[result.intervals["log10_k"].notna()]
    r_all, bias = _correlation(iv)
    r_resolved, _ = _correlation(iv[iv["k_censored"] == ""])
    # The truth grid (2 m x 2 m x 0.25 m, nearest cell) is coarser than the 0.15 m intervals
    # and misplaces layer boundaries by up to 0.125 m, so even exact logs cannot reach r = 1.
    # Floors: r >= 0.85 over all intervals (censored clay at its bound included; the log
    # explains >= 70 % of the variance; measured 0.94) and r >= 0.6 within the resolved
    # intervals alone, where the contrast is smaller (measured 0.74).
    assert r_all > 0.85
    assert r_resolved > 0.6
    # the slug-test calibration keeps the level: median offset within a third of a decade
    assert abs(bias) < 0.33


def test_facies_k_ranges_fall_in_the_published_ranges(result):
    # Freeze & Cherry (1979) Table 2.2 (from memory), log10 K in m/s: silt 1e-9..1e-5 (with
    # silty clay, what storage stands for here), silty sand 1e-7..1e-3 (transitional), clean
    # sand 1e-6..1e-2 (transmissive). Central 90 % of each class: the minimum layer thickness
    # moves a few thin intervals across the thresholds.
    ranges = {"storage": (-9.0, -5.0), "transitional": (-7.0, -3.0), "transmissive": (-6.0, -2.0)}
    iv = result.intervals
    for name, (low, high) in ranges.items():
        values = iv.loc[iv["facies"] == name, "log10_k"].dropna()
        assert len(values) > 50, name
        q05, q95 = np.quantile(values, [0.05, 0.95])
        assert low <= q05 and q95 <= high, (name, q05, q95)


def test_mixture_finds_the_three_hydrofacies_of_the_demo(result, truth):
    iv = result.intervals
    codes, names = classify_mixture(
        iv["log10_k"].to_numpy(),
        iv["ec"].to_numpy(),
        k_only=iv["frac_ec_above_trend"].to_numpy() >= 0.5,
    )
    assert names == ["storage", "transitional", "transmissive"]
    # the demo has three saturated populations: the silty clay at the probe's resolution bound
    # (storage), the silty-sand unit (log10 K around -5.8, transitional) and the sands
    # (transmissive); the mixture, with its class count chosen by BIC, finds all three
    assert "silty_sand" in truth["facies"]
    thresholds = iv["facies_code"].to_numpy()
    both = (codes >= 0) & (thresholds >= 0)
    counts = {c: int((codes[both] == c).sum()) for c in range(3)}
    print(f"mixture classes {counts}, threshold classes", np.bincount(thresholds[both]).tolist())
    assert all(n > 200 for n in counts.values()), counts
    # Agreement with the threshold classes (storage < -7 <= transitional < -5 <= transmissive,
    # common practice): measured 0.958 of 2783 intervals overall, and 0.983 (storage), 0.942
    # (transitional) and 0.946 (transmissive) within each threshold class on the committed
    # demo (the brine layers' intervals that the EC-above-trend flag marks are classed by K
    # alone; the few at the sand's base that it does not mark weigh on the transitional and
    # transmissive classes). The mixture also weighs EC, so intervals near a threshold (the sand
    # lenses' K straddles 1e-5 m/s, the tightest sands reach the silty sand's K) may go either
    # way: floors
    # of 0.9 overall and 0.85 per class leave room for that, and still fail when a population
    # is merged into another or split across two (a trial variant of the demo, whose censored
    # storage intervals sit on thin strips at their resolution bounds, gave a broad component
    # that took 23 % of the storage intervals: 0.89 overall, 0.77 for storage).
    agreement = (codes[both] == thresholds[both]).mean()
    print(f"mixture agrees with the thresholds on {agreement:.3f} of {both.sum()} intervals")
    assert agreement > 0.9
    for code in range(3):
        mine = both & (thresholds == code)
        assert (codes[mine] == code).mean() > 0.85, (names[code], (codes[mine] == code).mean())


def test_failed_sensor_check_flags_that_log_only(result, truth):
    failed = truth["sensor_check_failed"]["boring_id"]
    s = result.samples
    assert s.loc[s["boring_id"] == failed, "sensor_check_failed"].all()
    assert not s.loc[s["boring_id"] != failed, "sensor_check_failed"].any()
    assert result.sensor_checks.loc[~result.sensor_checks["passed"], "boring_id"].eq(failed).all()


def test_calibration_rests_on_the_slug_tests(result, truth):
    calibration = result.calibration
    assert calibration.method == "slug_tests"
    assert calibration.n_tests == len(truth["slug_tests"])
    # the generator's logs follow Hvorslev physics (b = 1, a = log10(gamma_w / F)) and its
    # slug tests carry errors of a few tens of percent: the fit must land near physics
    physics_a = np.log10(9.80665 / truth["probe"]["shape_factor_m"])
    assert calibration.b == pytest.approx(1.0, abs=0.2)
    assert calibration.a == pytest.approx(physics_a, abs=0.25)
