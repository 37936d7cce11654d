import json
import warnings

import numpy as np
import pytest

from geo3d.errors import Geo3dWarning, WaterLevelError
from geo3d.logs.process import LogResults, process_logs
from geo3d.report.log_figure import facies_colour, log_figure, log_figure_pngs
from geo3d.site import read_site

GAMMA_W = 9.80665  # kPa/m (NIST SP 811 standard gravity)
MINI_DEPTH_TO_WATER = 1.5  # m, the mini site's invented water level (tests/conftest.py)


def _process(site):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", Geo3dWarning)
        return process_logs(site)


@pytest.fixture
def mini_results(mini_site):
    return _process(read_site(mini_site))


def test_water_level_and_net_pressure_of_the_mini_site(mini_results):
    result = mini_results
    assert isinstance(result, LogResults)
    # the mini site's records are exponentials toward the hydrostatic static pressure
    np.testing.assert_allclose(
        result.water_levels["depth_to_water"], MINI_DEPTH_TO_WATER, atol=0.1 / GAMMA_W
    )
    s = result.samples
    # B3 has no test: with two wells the surface is flat at their mean water-table
    # elevation, (48.5 + 49.0)/2 = 48.75 m, so B3 (collar 49.8 m) has 1.05 m to water
    b3 = s["boring_id"] == "B3"
    np.testing.assert_allclose(s.loc[b3, "depth_to_water"], 1.05, atol=0.02)
    below = ~s["above_water"] & ~b3
    # the mini logs are P_atm + hydrostatic + (40 + 10 i + 5 sin depth) kPa, invented
    index = s["boring_id"].map({"B1": 0, "B2": 1, "B3": 2})
    expected = 40.0 + 10.0 * index + 5.0 * np.sin(s["depth"])
    np.testing.assert_allclose(s.loc[below, "p_net"], expected[below], atol=0.02)
    assert (s["depth"] < s["depth_to_water"]).eq(s["above_water"]).all()
    assert s.loc[s["above_water"], "k_log"].isna().all()


def test_per_sample_and_interval_tables_follow_the_contract(mini_results):
    s, iv = mini_results.samples, mini_results.intervals
    for column in [
        "boring_id", "depth", "elev", "pressure", "flow", "ec", "x", "y", "depth_to_water",
        "wt_elev", "p_atm", "p_hydrostatic", "p_net", "q_over_p", "k_log", "log10_k",
        "above_water", "out_of_range_high", "out_of_range_low", "spike", "ec_above_trend",
        "sensor_check_failed",
    ]:  # fmt: skip
        assert column in s.columns, column
    for column in [
        "boring_id", "x", "y", "top", "bottom", "z_mid", "log10_k", "ec", "n_samples",
        "frac_above_water", "frac_spike", "frac_ec_above_trend", "facies", "facies_code",
    ]:  # fmt: skip
        assert column in iv.columns, column
    # physics K: log10 K = log10(Q gamma_w/(F P_net)) (Hvorslev 1951) with b = 1
    calibration = mini_results.calibration
    assert calibration.method == "physics"  # two slug tests, fewer than the default 3
    ok = s["q_over_p"].notna()
    np.testing.assert_allclose(
        s.loc[ok, "k_log"],
        s.loc[ok, "flow"] * GAMMA_W / (mini_results.shape_factor * s.loc[ok, "p_net"]),
        rtol=1e-9,
    )
    assert set(iv["facies_code"]) <= {-1, 0, 1, 2}
    # the mini site's pre/post checks are within tolerance
    assert not s["sensor_check_failed"].any()
    assert mini_results.sensor_checks["passed"].all()


def test_calibration_record_is_plain_json(mini_results):
    record = json.loads(json.dumps(mini_results.calibration_record(), allow_nan=True))
    assert record["method"] == "physics" and record["n_tests"] == 2
    assert record["shape_factor_m"] == mini_results.shape_factor
    assert record["water_table"]["method"] == mini_results.water_table.method
    # physics-only K: a = log10(gamma_w / F) (Hvorslev 1951)
    assert mini_results.physics_a == pytest.approx(np.log10(GAMMA_W / mini_results.shape_factor))


@pytest.mark.slow
def test_log_figures_drawn_for_every_boring(mini_results):
    pngs = log_figure_pngs(mini_results.samples, mini_results.intervals)
    assert list(pngs) == ["B1", "B2", "B3"]
    assert all(png[:8] == b"\x89PNG\r\n\x1a\n" for png in pngs.values())


def test_given_depth_to_water_and_gauge_pressure(mini_site):
    site = read_site(mini_site)
    water = site.config.water.model_copy(update={"depth_to_water": 2.0})
    units = site.config.units.model_copy(update={"pressure_reference": "gauge"})
    site.config = site.config.model_copy(update={"water": water, "units": units})
    site.samples = site.samples.assign(pressure=site.samples["pressure"] - 101.325)
    result = _process(site)
    assert (result.samples["p_atm"] == 0.0).all()
    assert result.water_levels["method"].eq("given").all()
    np.testing.assert_allclose(result.samples["depth_to_water"], 2.0)


def test_no_dissipation_and_no_given_level_is_refused(mini_site):
    site = read_site(mini_site)
    site.dissipation = site.dissipation.iloc[0:0]
    with pytest.raises(WaterLevelError, match="depth_to_water"):
        _process(site)


def test_log_figure_draws_every_panel(mini_results):
    s, iv = mini_results.samples, mini_results.intervals
    fig = log_figure(s[s["boring_id"] == "B2"], iv[iv["boring_id"] == "B2"], boring_id="B2")
    # tracks: hydrofacies, K, net pressure, recorded pressure, flow, EC
    assert len(fig.axes) == 6
    assert fig.axes[1].get_xscale() == "log"
    assert fig.axes[4].get_xlabel() == "injection flow (mL/min)"
    assert fig._suptitle.get_text() == "Boring B2"
    # Okabe & Ito (2008) palette: vermillion for the lowest-K class, blue for the highest
    assert facies_colour(0) == "#D55E00" and facies_colour(-1) == "#BBBBBB"
