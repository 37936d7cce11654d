"""Tests of censored normal fits and of facies from EC."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.stats import norm

from geo3d.ec_facies import EcFaciesClassifier
from geo3d.geostats.censored import censored_expectation, fit_censored_normal


def test_censored_fit_recovers_the_normal_law():
    rng = np.random.default_rng(0)
    x = rng.normal(-6.0, 0.5, 4000)
    bound = -6.2
    censored = np.where(x < bound, "upper", "")
    values = np.where(x < bound, bound, x)
    mu, sigma = fit_censored_normal(values, censored)
    # Tobin (1958): the censored likelihood is consistent; 4000 values -> errors ~ 0.01
    assert mu == pytest.approx(-6.0, abs=0.03)
    assert sigma == pytest.approx(0.5, abs=0.03)
    naive = values.mean()
    assert naive > -6.0 + 0.05  # setting censored values at the bound biases the mean up


def test_all_censored_values_stay_at_their_bounds():
    mu, sigma = fit_censored_normal(np.full(10, -7.5), np.full(10, "upper"))
    assert (mu, sigma) == (-7.5, 1e-3)


def test_truncated_expectations():
    # Johnson, Kotz & Balakrishnan (1994) sec. 10.1: E[X | X <= 0] = -phi(0)/Phi(0) =
    # -sqrt(2/pi) for the standard normal; E[X | X >= 1] = phi(1) / (1 - Phi(1))
    out = censored_expectation(np.array([0.0, 1.0, 3.0]), np.array(["upper", "lower", ""]), 0, 1)
    assert out[0] == pytest.approx(-np.sqrt(2 / np.pi))
    assert out[1] == pytest.approx(norm.pdf(1) / norm.sf(1))
    assert out[2] == 3.0


def test_ec_classifier_gives_probabilities_that_separate_the_classes():
    rng = np.random.default_rng(1)
    codes = rng.integers(0, 3, 600)
    ec = 10 ** (np.array([2.0, 1.5, 0.9])[codes] + rng.normal(0, 0.08, 600))
    clf = EcFaciesClassifier(3).fit(ec, codes)
    prob = clf.predict_proba(np.array([100.0, 31.6, 8.0, np.nan]))
    np.testing.assert_allclose(prob.sum(axis=1), 1.0)
    assert prob[:3].argmax(axis=1).tolist() == [0, 1, 2]
    # missing EC: the training shares
    np.testing.assert_allclose(prob[3], np.bincount(codes, minlength=3) / 600)
