import math

import gstools as gs
import numpy as np
import pytest
from gstools_models import to_gstools
from hypothesis import given, settings
from hypothesis import strategies as st

from geo3d.errors import ModelError
from geo3d.geostats.covariance import KINDS, CovarianceModel, correlation


@pytest.mark.parametrize("kind", KINDS)
def test_covariance_equals_gstools_anisotropic(kind):
    # Reference: gstools' own model definitions (Mueller et al. 2022), rotated and scaled.
    model = CovarianceModel(
        kind, sill=2.0, nugget=0.3, range_h=100.0, range_v=5.0, azimuth=30.0, minor_ratio=0.5
    )
    rng = np.random.default_rng(0)
    lags = rng.normal(size=(200, 3)) * [60.0, 60.0, 3.0]
    ours = model.covariance(np.linalg.norm(model.scaled(lags), axis=1))
    theirs = to_gstools(model).cov_spatial(lags.T)
    np.testing.assert_allclose(ours, theirs, rtol=1e-10, atol=1e-12)


def test_practical_ranges():
    # Spherical reaches the sill at the range; exponential and Gaussian reach 95 % of it there
    # (Journel and Huijbregts 1978, ch. II); Matern scaled to correlation 0.05 (our definition).
    assert correlation("spherical", np.array(1.0)) == 0.0
    assert correlation("spherical", np.array(2.0)) == 0.0
    assert float(correlation("exponential", np.array(1.0))) == pytest.approx(math.exp(-3.0))
    assert float(correlation("gaussian", np.array(1.0))) == pytest.approx(math.exp(-3.0))
    assert float(correlation("matern", np.array(1.0), nu=2.5)) == pytest.approx(0.05, abs=1e-9)
    # Matern with nu = 0.5 is the exponential model (Stein 1999, sec. 2.7): exp(-s h), s = ln 20.
    h = np.linspace(0.0, 2.0, 11)
    np.testing.assert_allclose(
        correlation("matern", h, nu=0.5), np.exp(-math.log(20.0) * h), rtol=1e-9
    )


def test_spherical_formula_by_hand():
    # 1 - 1.5 h + 0.5 h^3 at h = 0.5 -> 0.3125 (Journel and Huijbregts 1978, eq. II.19).
    model = CovarianceModel("spherical", sill=2.0, nugget=1.0, range_h=10.0, range_v=1.0)
    assert float(model.covariance(np.array(0.5))) == pytest.approx(2.0 * 0.3125)
    # The nugget only counts at zero distance.
    assert float(model.covariance(np.array(0.0))) == pytest.approx(3.0)
    assert float(model.variogram(np.array(0.5))) == pytest.approx(3.0 - 0.625)


def test_scaling_and_rotation():
    # Azimuth 90 = major axis along +x (east): 60 m east is 60/100 of a range; 60 m north is
    # 60/(100*0.5). Vertical 2 m is 2/4 of the vertical range. Geometry by hand.
    model = CovarianceModel(
        "exponential", range_h=100.0, range_v=4.0, azimuth=90.0, minor_ratio=0.5
    )
    s = model.scaled(np.array([[60.0, 0.0, 0.0], [0.0, 60.0, 0.0], [0.0, 0.0, 2.0]]))
    np.testing.assert_allclose(np.linalg.norm(s, axis=1), [0.6, 1.2, 0.5], atol=1e-12)


@settings(max_examples=40, deadline=None)
@given(
    kind=st.sampled_from(KINDS),
    h=st.lists(st.floats(0.0, 10.0), min_size=2, max_size=20),
)
def test_covariance_monotone_and_bounded(kind, h):
    model = CovarianceModel(kind, sill=1.5, nugget=0.5, range_h=3.0, range_v=1.0)
    hs = np.sort(np.asarray(h))
    c = model.covariance(hs)
    assert np.all(c <= model.total_sill + 1e-12)
    assert np.all(c >= -1e-12)
    assert np.all(np.diff(c) <= 1e-12)


@pytest.mark.parametrize(
    "kwargs",
    [
        {"kind": "cubic"},
        {"kind": "spherical", "sill": 0.0},
        {"kind": "spherical", "range_v": -1.0},
        {"kind": "spherical", "nugget": -0.1},
        {"kind": "spherical", "minor_ratio": float("nan")},
    ],
)
def test_bad_parameters_raise(kwargs):
    with pytest.raises(ModelError):
        CovarianceModel(**kwargs)


def test_gstools_class_and_angle():
    model = CovarianceModel("gaussian", range_h=10.0, range_v=2.0, azimuth=0.0)
    g = to_gstools(model)
    assert isinstance(g, gs.Gaussian)
    # Azimuth 0 (north) is 90 degrees counter-clockwise from +x in gstools' convention.
    assert g.angles[0] == pytest.approx(math.pi / 2)
