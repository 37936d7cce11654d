import warnings

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from geo3d.errors import Geo3dWarning, WaterLevelError
from geo3d.logs.water_level import (
    aitken_extrapolation,
    depth_to_water,
    fit_water_table,
    gradient_plane,
    piezometric_profiles,
    static_pressure,
    water_levels,
)

GAMMA_W = 9.80665  # kPa/m (NIST SP 811 standard gravity, water 1000 kg/m3)
P_ATM = 101.325  # kPa, standard atmosphere (NIST SP 811)


def test_short_record_is_extrapolated_to_150_kpa_and_gives_7_04_m():
    # P(t) = 150 + 40 exp(-t/30) sampled to t = 40 s only: P_inf = 150 kPa (by construction);
    # depth to water = 12.0 - (150 - 101.325)/9.80665 = 7.04 m (hand computation)
    t = np.arange(0.0, 40.01, 1.0)
    with pytest.warns(Geo3dWarning, match="extrapolated"):
        result = static_pressure(t, 150.0 + 40.0 * np.exp(-t / 30.0))
    assert result.method == "exponential"
    assert result.p_static == pytest.approx(150.0, abs=0.5)
    assert result.fraction_dissipated == pytest.approx(1 - np.exp(-40 / 30), abs=1e-3)
    assert result.aitken == pytest.approx(150.0, abs=0.5)
    assert depth_to_water(12.0, result.p_static, P_ATM) == pytest.approx(7.04, abs=0.005)


def test_short_noisy_record_stays_within_half_a_kpa():
    rng = np.random.default_rng(1)
    t = np.arange(0.0, 40.01, 0.5)
    p = 150.0 + 40.0 * np.exp(-t / 30.0) + rng.normal(0.0, 0.1, t.size)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", Geo3dWarning)
        result = static_pressure(t, p)
    assert result.p_static == pytest.approx(150.0, abs=0.5)  # by construction
    assert result.fit_rmse == pytest.approx(0.1, rel=0.3)  # the added noise SD


def test_aitken_is_exact_for_an_exponential():
    # Aitken (1926): exact for equally spaced samples of an exponential approach
    p = 150.0 + 40.0 * np.exp(-np.array([0.0, 20.0, 40.0]) / 30.0)
    assert aitken_extrapolation(*p) == pytest.approx(150.0, abs=1e-9)
    assert np.isnan(aitken_extrapolation(1.0, 2.0, 3.0))  # a straight line has no limit


def test_record_at_equilibrium_uses_its_tail():
    t = np.arange(0.0, 400.0, 2.0)
    rng = np.random.default_rng(2)
    p = 120.0 + 30.0 * np.exp(-t / 20.0) + rng.normal(0, 0.02, t.size)
    result = static_pressure(t, p)
    assert result.method == "tail"
    assert result.p_static == pytest.approx(120.0, abs=0.02)
    assert result.fraction_dissipated > 0.999


def test_flat_record_is_already_static():
    t = np.arange(0.0, 60.0, 5.0)
    result = static_pressure(t, np.full(t.size, 133.3))
    assert (result.method, result.p_static, result.fraction_dissipated) == ("tail", 133.3, 1.0)


def test_records_too_short_to_trust_are_refused():
    t = np.arange(0.0, 5.01, 0.25)  # 15 % of the excess gone
    with pytest.raises(WaterLevelError, match="too short"):
        static_pressure(t, 150.0 + 40.0 * np.exp(-t / 30.0), label="boring B4, test 2")
    with pytest.raises(WaterLevelError, match="at least 5"):
        static_pressure([0, 1, 2], [3.0, 2.0, 1.5])


@settings(max_examples=25, deadline=None)
@given(
    p_inf=st.floats(100.0, 300.0),
    excess=st.floats(-50.0, 80.0).filter(lambda v: abs(v) > 2.0),
    time_constant=st.floats(5.0, 60.0),
)
def test_exponential_records_are_recovered(p_inf, excess, time_constant):
    # invariant: a noise-free exponential sampled to 80 % dissipation gives its limit back
    duration = -time_constant * np.log(0.2)
    t = np.linspace(0.0, duration, 60)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", Geo3dWarning)
        result = static_pressure(t, p_inf + excess * np.exp(-t / time_constant))
    assert result.p_static == pytest.approx(p_inf, abs=1e-3)


def _record(boring_id, test_id, depth, dtw, *, duration=300.0, time_constant=25.0):
    t = np.arange(0.0, duration, 2.0)
    static = P_ATM + GAMMA_W * (depth - dtw)
    return pd.DataFrame(
        {
            "boring_id": boring_id,
            "test_id": test_id,
            "depth": depth,
            "time_s": t,
            "pressure": static + 35.0 * np.exp(-t / time_constant),
        }
    )


BORINGS = pd.DataFrame(
    {
        "boring_id": ["A", "B", "C"],
        "x": [0.0, 100.0, 0.0],
        "y": [0.0, 0.0, 100.0],
        "ground_elev": [20.0, 21.0, 19.5],
    }
)


def test_water_levels_table_recovers_depth_and_elevation():
    # synthetic records built from the hydrostatic relation with known depths to water
    dissipation = pd.concat(
        [_record("A", 1, 8.0, 3.2), _record("B", 2, 9.0, 4.1), _record("C", 3, 7.5, 2.6)]
    )
    levels = water_levels(dissipation, BORINGS, p_atm=P_ATM)
    expected = "boring_id test_id x y depth p_static depth_to_water wt_elev fraction_dissipated"
    assert list(levels.columns[:11]) == [*expected.split(), "method", "fit_rmse"]
    # tolerance: the tail method averages readings within 0.1 kPa (1 cm of water) of static
    tol = 0.1 / GAMMA_W
    assert set(levels["method"]) == {"tail"}
    np.testing.assert_allclose(levels["depth_to_water"], [3.2, 4.1, 2.6], atol=tol)
    np.testing.assert_allclose(levels["wt_elev"], [16.8, 16.9, 16.9], atol=tol)


def test_untrusted_tests_are_left_out_with_a_warning():
    short = _record("B", 2, 9.0, 4.1, duration=6.0, time_constant=60.0)
    dissipation = pd.concat([_record("A", 1, 8.0, 3.2), short])
    with pytest.warns(Geo3dWarning, match="left out"):
        levels = water_levels(dissipation, BORINGS, p_atm={"A": P_ATM, "B": P_ATM})
    assert levels["test_id"].tolist() == [1]
    with pytest.raises(WaterLevelError, match="could be trusted"), warnings.catch_warnings():
        warnings.simplefilter("ignore", Geo3dWarning)
        water_levels(short, BORINGS, p_atm=P_ATM)
    with pytest.raises(WaterLevelError, match="no dissipation test"):
        water_levels(short.iloc[0:0], BORINGS, p_atm=P_ATM)


def test_piezometric_profile_gives_the_vertical_gradient():
    # two tests 5 m apart in one boring; heads 16.8 m (shallow) and 16.3 m (deep):
    # dh/dz = (16.8 - 16.3) / 5 = +0.1 (head rises upward: upward flow), hand computation
    dissipation = pd.concat([_record("A", 1, 6.0, 3.2), _record("A", 2, 11.0, 3.7)])
    levels = water_levels(dissipation, BORINGS, p_atm=P_ATM)
    prof = piezometric_profiles(levels, BORINGS)
    assert prof["vertical_gradient"].iloc[0] == pytest.approx(0.1, abs=1e-3)
    np.testing.assert_allclose(prof["head"], [16.8, 16.3], atol=0.1 / GAMMA_W)


def test_three_wells_give_the_textbook_plane():
    # heads 100.0 m at (0, 0), 99.0 m at (200, 0), 99.5 m at (0, 100): by hand,
    # h = 100 - 0.005 x - 0.005 y; gradient sqrt(2)*0.005 = 0.0070711; flow toward
    # azimuth 45 deg (north-east), the classic three-point problem
    a, b, c, magnitude, direction = gradient_plane([0, 200, 0], [0, 0, 100], [100.0, 99.0, 99.5])
    assert (a, b, c) == pytest.approx((-0.005, -0.005, 100.0), abs=1e-12)
    assert magnitude == pytest.approx(0.0070711, abs=1e-7)
    assert direction == pytest.approx(45.0, abs=1e-9)


def test_more_wells_give_the_least_squares_plane():
    rng = np.random.default_rng(3)
    x, y = rng.uniform(0, 200, 12), rng.uniform(0, 150, 12)
    head = 30.0 + 0.004 * x - 0.002 * y + rng.normal(0, 0.02, 12)
    a, b, c, magnitude, direction = gradient_plane(x, y, head)
    # reference: numpy.linalg.lstsq on the same design matrix
    ref, *_ = np.linalg.lstsq(np.column_stack([x, y, np.ones(12)]), head, rcond=None)
    assert (a, b, c) == pytest.approx(tuple(ref), rel=1e-9, abs=1e-9)
    assert magnitude == pytest.approx(np.hypot(ref[0], ref[1]))
    # down-gradient along (-a, -b) = (-, +): toward the north-west quadrant
    assert 270.0 < direction < 360.0


def test_collinear_or_too_few_wells_are_refused():
    with pytest.raises(WaterLevelError, match="straight line"):
        gradient_plane([0, 1, 2], [0, 1, 2], [1.0, 2.0, 3.0])
    with pytest.raises(WaterLevelError, match="at least 3"):
        gradient_plane([0, 1], [0, 1], [1.0, 2.0])


def test_water_table_surfaces():
    x = np.array([0.0, 200.0, 0.0, 200.0, 90.0])
    y = np.array([0.0, 0.0, 150.0, 150.0, 70.0])
    z = 20.0 - 0.003 * x + 0.001 * y + np.array([0.0, 0.02, -0.01, 0.0, 0.05])
    plane = fit_water_table(x, y, z, method="plane")
    assert plane.method == "plane"
    assert plane.gradient == pytest.approx(np.hypot(plane.a, plane.b))
    kriged = fit_water_table(x, y, z, method="kriging")
    # universal kriging honours the data (exact interpolator, pykrige exact_values=True)
    np.testing.assert_allclose(kriged.elevation(x, y), z, atol=1e-6)
    assert kriged.flow_direction_deg == plane.flow_direction_deg
    with pytest.warns(Geo3dWarning, match="flat"):
        flat = fit_water_table([0.0, 10.0], [0.0, 0.0], [5.0, 5.2])
    assert flat.method == "constant"
    np.testing.assert_allclose(flat.elevation([3.0], [4.0]), [5.1])
    with pytest.raises(WaterLevelError, match="unknown method"):
        fit_water_table(x, y, z, method="spline")


def test_standard_error_of_the_static_pressure_matches_its_scatter():
    # Monte Carlo: the covariance of a least-squares fit predicts the scatter of P_inf over
    # repeated noisy records (Gauss-Markov; nonlinear least squares to first order)
    rng = np.random.default_rng(5)
    t = np.arange(0.0, 40.01, 0.5)
    errors, ses = [], []
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", Geo3dWarning)
        for _ in range(100):
            p = 150.0 + 40.0 * np.exp(-t / 30.0) + rng.normal(0.0, 0.1, t.size)
            result = static_pressure(t, p)
            errors.append(result.p_static - 150.0)
            ses.append(result.p_static_se)
    assert np.std(errors) == pytest.approx(np.mean(ses), rel=0.25)


@settings(max_examples=40, deadline=None)
@given(
    a=st.floats(-0.02, 0.02),
    b=st.floats(-0.02, 0.02),
    c=st.floats(-50.0, 500.0),
    seed=st.integers(0, 2**16),
)
def test_plane_through_exact_heads_is_recovered(a, b, c, seed):
    # invariant: heads lying on a plane give that plane back, and water flows down-gradient
    rng = np.random.default_rng(seed)
    x, y = rng.uniform(0, 300, 6), rng.uniform(0, 200, 6)
    fa, fb, fc, magnitude, direction = gradient_plane(x, y, a * x + b * y + c)
    assert (fa, fb) == pytest.approx((a, b), abs=1e-9)
    assert fc == pytest.approx(c, abs=1e-6)
    assert magnitude == pytest.approx(np.hypot(a, b), abs=1e-9)
    if magnitude > 1e-6:
        step = np.array([np.sin(np.radians(direction)), np.cos(np.radians(direction))])
        assert a * step[0] + b * step[1] == pytest.approx(-magnitude, rel=1e-6)
