import gstools as gs
import numpy as np
import pytest
from gstools_models import to_gstools

from geo3d.errors import ModelError
from geo3d.geostats.covariance import CovarianceModel
from geo3d.geostats.crossval import leave_one_group_out
from geo3d.geostats.kriging import OrdinaryKriging

TRUTH = CovarianceModel("exponential", sill=1.0, nugget=0.05, range_h=80.0, range_v=4.0)


def _borings(seed, n_borings=30):
    rng = np.random.default_rng(seed)
    xy = rng.uniform(0, 300, size=(n_borings, 2))
    z = np.arange(0.0, 10.0, 0.5)
    coords = np.array([[x, y, zz] for x, y in xy for zz in z])
    groups = np.repeat(np.array([f"B{i:02d}" for i in range(n_borings)]), len(z))
    values = gs.SRF(to_gstools(TRUTH), seed=seed)(coords.T)
    return coords, values, groups


def test_standardized_errors_near_0_and_1_with_true_model():
    # With the true model the standardized errors have mean 0 and variance 1 (Kitanidis 1997,
    # sec. 3.5). Pooled over 3 simulated fields of 600 samples; tolerances from the spread seen
    # across seeds (errors within a boring are correlated): |mean| < 0.15, variance 0.75-1.3.
    std = []
    for seed in range(3):
        coords, values, groups = _borings(seed)
        cv = leave_one_group_out(coords, values, groups, model=TRUTH, neighbors=24, max_per_group=6)
        std.append(cv.samples["std_error"].to_numpy())
        assert cv.summary["n"] == len(values)
    std = np.concatenate(std)
    assert abs(std.mean()) < 0.15
    assert 0.75 < std.var() < 1.3


def test_wrong_sill_is_detected():
    # A model with 4x the sill overstates the kriging variance: var of std. errors well below 1.
    coords, values, groups = _borings(0)
    wrong = CovarianceModel("exponential", sill=4.0, nugget=0.2, range_h=80.0, range_v=4.0)
    cv = leave_one_group_out(coords, values, groups, model=wrong, neighbors=24)
    assert cv.summary["var_std_error"] < 0.5


def test_tables_and_one_group_by_hand():
    coords, values, groups = _borings(1, n_borings=8)
    cv = leave_one_group_out(coords, values, groups, model=TRUTH, neighbors=16)
    assert len(cv.per_group) == 8
    assert list(cv.samples.columns[:2]) == ["group", "x"]
    # The rows of boring B03 equal kriging from the other seven borings.
    out = groups == "B03"
    est, var = (
        OrdinaryKriging(TRUTH, neighbors=16).fit(coords[~out], values[~out]).predict(coords[out])
    )
    rows = cv.samples[cv.samples["group"] == "B03"]
    np.testing.assert_allclose(rows["estimate"], est)
    np.testing.assert_allclose(rows["error"], est - values[out])
    np.testing.assert_allclose(rows["std_error"], (est - values[out]) / np.sqrt(var))
    b03 = cv.per_group.set_index("group").loc["B03"]
    assert b03["rmse"] == pytest.approx(np.sqrt(np.mean((est - values[out]) ** 2)))
    assert cv.summary["rmse"] == pytest.approx(np.sqrt(np.mean(cv.samples["error"] ** 2)))


def test_single_group_raises():
    coords, values, _ = _borings(0, n_borings=2)
    with pytest.raises(ModelError, match="2 groups"):
        leave_one_group_out(coords, values, np.zeros(len(values)), model=TRUTH)


def _refit_per_fold(coords, values, groups, model, **options):
    """Reference: a new estimator fitted to the other groups for every fold."""
    est = np.full(len(values), np.nan)
    var = np.full(len(values), np.nan)
    for g in np.unique(groups):
        out = groups == g
        ok = OrdinaryKriging(model, **options).fit(coords[~out], values[~out], groups[~out])
        est[out], var[out] = ok.predict(coords[out])
    return est, var


@pytest.mark.parametrize(
    "options",
    [
        {"neighbors": 16, "max_per_group": 0},
        {"neighbors": 24, "max_per_group": 6},
        {"neighbors": 400, "max_per_group": 5},
        {"neighbors": 20, "max_per_group": 4, "drift": "linear_z"},
        {"neighbors": 16, "max_per_group": 4, "max_distance": 0.6},
        {"global_mode": True},
    ],
)
def test_one_fit_equals_a_refit_per_fold(options):
    # Leave-one-group-out from one fit (search without the left-out boring; the block form of
    # Dubrule's 1983 formulas in a global neighbourhood) must equal refitting per fold.
    coords, values, groups = _borings(7, n_borings=12)
    cv = leave_one_group_out(coords, values, groups, model=TRUTH, **options)
    est, var = _refit_per_fold(coords, values, groups, TRUTH, **options)
    got = cv.samples
    np.testing.assert_allclose(got["estimate"], est, rtol=0, atol=1e-9)
    np.testing.assert_allclose(got["variance"], var, rtol=0, atol=1e-9)
    assert np.isnan(got["estimate"]).sum() == np.isnan(est).sum()


def test_predict_without_group_says_what_is_wrong():
    coords, values, groups = _borings(2, n_borings=4)
    ok = OrdinaryKriging(TRUTH, neighbors=8).fit(coords, values, groups)
    with pytest.raises(ModelError, match="not among"):
        ok.predict_without_group(coords[:3], "B99")
    no_groups = OrdinaryKriging(TRUTH, neighbors=8).fit(coords, values)
    with pytest.raises(ModelError, match="group labels"):
        no_groups.predict_without_group(coords[:3], "B01")
