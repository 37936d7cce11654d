import warnings

import numpy as np
import pandas as pd
import pytest

from geo3d.errors import Geo3dWarning
from geo3d.logs.calibration import calibrate, physics_coefficients, screen_samples
from geo3d.logs.hydraulic import GAMMA_W, k_from_injection, shape_factor

F_SPHERE = shape_factor("sphere", diameter=0.02)


def test_hvorslev_worked_values():
    # Hvorslev (1951) cylinder F = 2 pi L / ln(L/D + sqrt(1 + (L/D)^2)), L = 0.30 m,
    # D = 0.05 m: F = 0.756470 m (computed by hand from the equation)
    assert shape_factor("cylinder", length=0.30, diameter=0.05) == pytest.approx(0.756470, abs=5e-7)
    # sphere limit F = 4 pi r (Hvorslev 1951), r = 1 cm
    assert F_SPHERE == pytest.approx(4 * np.pi * 0.01)
    # K = Q gamma_w / (F P): Q = 0.25 L/min, P = 50 kPa -> 6.503e-6 m/s (hand computation)
    assert k_from_injection(0.25e-3 / 60.0, 50.0, F_SPHERE) == pytest.approx(6.503e-6, rel=1e-4)


def test_physics_coefficients_reproduce_hvorslev_k():
    # log10 K = log10(gamma_w/F) + log10(Q/P) is K = Q gamma_w/(F P) (Hvorslev 1951)
    a, b = physics_coefficients(F_SPHERE)
    q_over_p = 0.25e-3 / 60.0 / 50.0
    assert b == 1.0
    assert 10 ** (a + b * np.log10(q_over_p)) == pytest.approx(6.503e-6, rel=1e-4)


def _synthetic(a, b, *, n_tests=6, noise=0.0, seed=0):
    """Logs and slug tests built from log10 K = a + b log10(Q/P) (synthetic case)."""
    rng = np.random.default_rng(seed)
    rows, tests = [], []
    for i in range(n_tests):
        depth = np.arange(2.0, 6.0, 0.02)
        x = -9.0 + 1.5 * np.sin(depth * (1.0 + 0.4 * i)) + 0.3 * i
        rows.append(pd.DataFrame({"boring_id": f"B{i}", "depth": depth, "q_over_p": 10**x}))
        top, bottom = 3.0, 3.6
        inside = (depth >= top) & (depth <= bottom)
        k = np.mean(10 ** (a + b * x[inside]))  # arithmetic mean over the screen
        tests.append((f"B{i}", top, bottom, k * 10 ** rng.normal(0, noise)))
    samples = pd.concat(rows, ignore_index=True)
    slug = pd.DataFrame(tests, columns=["boring_id", "top_depth", "bottom_depth", "k"])
    return samples, slug


def test_calibration_recovers_known_coefficients():
    samples, slug = _synthetic(3.2, 0.85)  # invented a, b
    cal = calibrate(samples, slug, shape_factor_m=F_SPHERE)
    assert cal.method == "slug_tests"
    assert cal.a == pytest.approx(3.2, abs=1e-5)
    assert cal.b == pytest.approx(0.85, abs=1e-6)
    assert cal.n_tests == 6
    assert cal.r2 == pytest.approx(1.0, abs=1e-9)
    assert max(abs(r["log10_residual"]) for r in cal.residuals) < 1e-6


def test_calibration_with_noise_brackets_the_truth():
    samples, slug = _synthetic(3.2, 0.85, n_tests=12, noise=0.05, seed=4)
    cal = calibrate(samples, slug, shape_factor_m=F_SPHERE)
    assert abs(cal.b - 0.85) < 3 * cal.se_b
    assert abs(cal.a - 3.2) < 3 * cal.se_a
    assert 0 < cal.se_b < 0.5


def test_screen_means_are_arithmetic_not_geometric():
    # a screen over two layers, K 1e-4 and 1e-6: arithmetic mean 5.05e-5 (layers in parallel)
    samples = pd.DataFrame(
        {"boring_id": "B", "depth": [1.0, 1.1, 1.2, 1.3], "q_over_p": [1e-8, 1e-8, 1e-10, 1e-10]}
    )
    slug = pd.DataFrame({"boring_id": ["B"], "top_depth": [0.9], "bottom_depth": [1.4], "k": [1.0]})
    groups = screen_samples(samples, slug)
    a, _ = physics_coefficients(F_SPHERE)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", Geo3dWarning)
        cal = calibrate(samples, slug, shape_factor_m=F_SPHERE, min_slug_tests=3)
    k1, k2 = 10 ** (a - 8), 10 ** (a - 10)
    assert cal.residuals[0]["k_predicted"] == pytest.approx((2 * k1 + 2 * k2) / 4, rel=1e-9)
    assert groups[0].size == 4


def test_too_few_slug_tests_fall_back_to_physics():
    samples, slug = _synthetic(3.2, 0.85, n_tests=2)
    with pytest.warns(Geo3dWarning, match="physics"):
        cal = calibrate(samples, slug, shape_factor_m=F_SPHERE, min_slug_tests=3)
    assert cal.method == "physics"
    assert (cal.a, cal.b) == physics_coefficients(F_SPHERE)
    assert cal.n_tests == 2 and len(cal.residuals) == 2
    with pytest.warns(Geo3dWarning, match="no slug tests"):
        assert calibrate(samples, None, shape_factor_m=F_SPHERE).method == "physics"


def test_unusable_samples_are_left_out_of_the_screens():
    samples, slug = _synthetic(3.2, 0.85, n_tests=4)
    usable = np.ones(len(samples), bool)
    usable[samples["boring_id"].eq("B0").to_numpy()] = False
    with pytest.warns(Geo3dWarning, match="left out"):
        cal = calibrate(samples, slug, shape_factor_m=F_SPHERE, usable=usable)
    assert cal.n_tests == 3
    assert cal.b == pytest.approx(0.85, abs=1e-5)


def test_log10_k_is_nan_for_non_positive_ratio():
    a, b = physics_coefficients(F_SPHERE)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", Geo3dWarning)
        cal = calibrate(pd.DataFrame(), None, shape_factor_m=F_SPHERE)
    out = cal.log10_k([1e-8, 0.0, -1.0, np.nan])
    assert out[0] == pytest.approx(a - 8 * b)
    assert np.isnan(out[1:]).all()


def test_an_undetermined_slope_is_held_at_the_physical_value():
    # slug tests scattered around physics (b = 1) by 0.3 log units: the fitted slope is not
    # distinguishable from 1 at two standard errors, so only a is fitted
    samples, slug = _synthetic(2.5, 1.0, n_tests=5, noise=0.3, seed=8)
    cal = calibrate(samples, slug, shape_factor_m=F_SPHERE)
    assert cal.method == "slug_tests" and cal.slope_fixed and cal.b == 1.0
    offsets = [r["log10_residual"] for r in cal.residuals]
    assert np.mean(offsets) == pytest.approx(0.0, abs=1e-9)  # least squares in a alone
    free = calibrate(samples, slug, shape_factor_m=F_SPHERE, slope="free")
    assert not free.slope_fixed and abs(free.b - 1.0) <= 2 * free.se_b
    with pytest.raises(ValueError, match="slope"):
        calibrate(samples, slug, shape_factor_m=F_SPHERE, slope="maybe")


def test_residuals_carry_the_physics_only_screen_mean():
    # k_physics is the arithmetic mean over the screen of Hvorslev K = Q gamma_w / (F P),
    # i.e. 10**(log10(gamma_w / F) + log10(Q/P)) (Hvorslev 1951), over the samples the fit used.
    samples, slug = _synthetic(3.2, 0.85)  # invented a, b
    cal = calibrate(samples, slug, shape_factor_m=F_SPHERE)
    a_phys = np.log10(GAMMA_W / F_SPHERE)
    for row, test in zip(cal.residuals, slug.itertuples(index=False), strict=True):
        inside = (
            (samples["boring_id"] == test.boring_id)
            & (samples["depth"] >= test.top_depth)
            & (samples["depth"] <= test.bottom_depth)
        )
        expected = np.mean(10 ** (a_phys + np.log10(samples.loc[inside, "q_over_p"])))
        assert row["k_physics"] == pytest.approx(expected, rel=1e-9)


def test_log10_k_error_from_slug_test_residuals():
    # residuals +-0.2 about a level fitted with the slope held (one coefficient): s^2 =
    # sum(r^2) / (n - 1) = 4 * 0.04 / 3, offset s / sqrt(4) (Draper & Smith 1998, sec. 1.4)
    from geo3d.logs.calibration import Calibration

    residuals = [{"log10_residual": r} for r in (0.2, -0.2, 0.2, -0.2)]
    cal = Calibration("slug_tests", -1.0, 1.0, n_tests=4, residuals=residuals, slope_fixed=True)
    offset, scatter = cal.log10_k_error()
    assert scatter == pytest.approx(np.sqrt(0.16 / 3))
    assert offset == pytest.approx(np.sqrt(0.16 / 3) / 2)


def test_log10_k_error_falls_back_to_physics_without_enough_tests():
    from geo3d.logs.calibration import PHYSICS_ERROR, Calibration

    residuals = [{"log10_residual": 0.1}, {"log10_residual": -0.1}]
    cal = Calibration("slug_tests", -1.0, 0.9, n_tests=2, residuals=residuals)
    assert cal.log10_k_error() == PHYSICS_ERROR
