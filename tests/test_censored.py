"""Screen means with samples near the pressure floor or beyond the probe's range."""

import numpy as np
import pytest

from geo3d.logs.censored import fit_screen


def _screen(rng, n=400, mu=-6.3, s=0.15, q=5e-6, noise=0.5):
    x = rng.normal(mu, s, n)  # log10 Q/P_net, m3/s/kPa
    p_true = q / 10.0**x
    p_obs = p_true + rng.normal(0.0, noise, n)
    return x, np.full(n, q), p_obs


def test_the_noise_model_recovers_the_mean_ratio_near_the_floor():
    rng = np.random.default_rng(3)
    # Q/P_net ~ 10**-5.7 at Q = 5e-6 m3/s: P_net ~ 2.5 kPa, 5 noise SDs (0.5 kPa)
    x, q, p = _screen(rng, mu=-5.7, noise=0.5)
    resolved = p >= 10 * 0.5
    fit = fit_screen(
        p, q, resolved=resolved, censored_below=np.full(x.size, np.nan), sensor_noise=0.5
    )
    true_mean = np.mean(10.0**x)
    # maximum likelihood with the noise model: within a few percent (normal theory, n = 400)
    assert np.mean(fit.ratio) == pytest.approx(true_mean, rel=0.05)
    assert fit.mu == pytest.approx(-5.7, abs=0.03)
    # the naive mean of Q/P over the positive readings is biased (Jensen), and is not used
    naive = np.mean(q[p > 0] / p[p > 0])
    assert abs(naive / true_mean - 1.0) > 0.05


def test_censored_samples_enter_with_their_expected_value():
    rng = np.random.default_rng(4)
    x = rng.normal(-8.0, 0.5, 600)
    bound = -7.8  # the probe cannot resolve ratios below this (tight soil)
    q = np.full(x.size, 5e-6)
    p = q / 10.0**x
    tight = x < bound
    fit = fit_screen(
        p,
        q,
        resolved=~tight,
        censored_below=np.where(tight, 10.0**bound, np.nan),
        sensor_noise=0.5,
    )
    # Tobit (1958): the censored normal likelihood recovers mu and s
    assert fit.mu == pytest.approx(-8.0, abs=0.06)
    assert fit.s == pytest.approx(0.5, abs=0.05)
    assert np.all(fit.ratio[tight] <= 10.0**bound)
    assert np.mean(fit.ratio) == pytest.approx(np.mean(10.0**x), rel=0.1)
