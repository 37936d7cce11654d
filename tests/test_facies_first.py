"""Tests of the facies-first voxel model (geo3d.facies_first)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import shapely

from geo3d.facies import DEFAULT_CLASSES
from geo3d.facies_first import build_facies_first_model


class _FlatWater:
    """Water table at 6 m elevation everywhere."""

    def elevation(self, x, y):
        return np.full(np.shape(x), 6.0)


def _intervals() -> pd.DataFrame:
    # 6 borings, ground at 10 m: sand (code 2) above 5 m elevation, clay (code 0) below;
    # above the water table (6 m) no K and no facies, only EC
    rows = []
    for b, (x, y) in enumerate([(5, 5), (25, 5), (45, 5), (5, 35), (25, 35), (45, 35)]):
        for i in range(40):
            top = i * 0.25
            z = 10.0 - top - 0.125
            dry = z > 6.0
            code = -1 if dry else (2 if z > 5.0 else 0)
            rows.append({
                "boring_id": f"B{b}", "x": float(x), "y": float(y), "top": top,
                "bottom": top + 0.25, "z_mid": z,
                "log10_k": np.nan if dry else (-4.0 if code == 2 else -7.5),
                "k_censored": "upper" if code == 0 else "",
                "ec": 8.0 if z > 5.0 else 90.0, "facies_code": code,
            })  # fmt: skip
    return pd.DataFrame(rows)


@pytest.fixture(scope="module")
def model():
    table = _intervals()
    borings = table.groupby("boring_id").agg(x=("x", "first"), y=("y", "first")).reset_index()
    borings["ground_elev"] = 10.0
    return build_facies_first_model(
        table,
        boundary=shapely.box(0, 0, 50, 40),
        borings=borings,
        crs="EPSG:32631",
        cell_size=(5.0, 5.0, 0.5),
        facies_classes=list(DEFAULT_CLASSES),
        water_table=_FlatWater(),
        n_realizations=3,
        seed=1,
    ).dataset


def test_probabilities_are_frequencies_over_the_realizations(model):
    mask = model["mask"].values
    total = sum(model[f"prob_{c.name}"].values[mask] for c in DEFAULT_CLASSES)
    np.testing.assert_allclose(total, 1.0)
    assert model["facies_realizations"].shape[0] == 3
    assert (model["facies_realizations"].values[:, ~mask] == -1).all()


def test_cells_of_borings_keep_the_logged_facies(model):
    # the column next to boring B4 (25, 35): clay below 5 m elevation in every realization
    sims = model["facies_realizations"].sel(x=27.5, y=37.5, method="nearest")
    clay = sims.sel(z=slice(0.0, 4.5)).values
    assert (clay[clay >= 0] == 0).all()


def test_no_k_above_the_water_table_and_facies_there_marked_from_ec(model):
    mask = model["mask"].values
    dry = mask & ~model["saturated"].values
    assert dry.any()
    assert np.isnan(model["log10_k"].values[dry]).all()
    assert (model["facies_source"].values[dry] == 2).all()
    wet = mask & model["saturated"].values
    assert (model["facies_source"].values[wet] == 1).all()
    assert np.isfinite(model["log10_k"].values[wet]).all()


def test_log10_k_within_facies_uses_the_censored_expectation(model):
    # clay values are all censored at -7.5 (upper, K at most the bound): with no exact value
    # the values stay at their bound, never above it
    wet_clay = model["saturated"].values & (model["prob_storage"].values == 1.0)
    assert (model["log10_k"].values[wet_clay] <= -7.5 + 1e-9).all()


def _run_table(values, boring="A") -> pd.DataFrame:
    codes = DEFAULT_CLASSES.classify(np.asarray(values, float)).astype(int)
    return pd.DataFrame(
        {"boring_id": boring, "log10_k": values, "facies_code": codes, "k_censored": ""}
    )


def test_data_facies_draws_follow_the_normal_normal_posterior():
    # prior of the values N(-6, 0.5) (3000 intervals, each its own run); one run measured at
    # -6.8 with scatter 0.3: the posterior is normal with mean (0.25 * -6.8 + 0.09 * -6) / 0.34
    # = -6.588 and sd sqrt(0.25 * 0.09 / 0.34) = 0.2572 (conjugate normal model, Gelman et al.
    # 2013, Bayesian Data Analysis, sec. 2.5), so P(true < -7) = Phi(-1.602) = 0.0546
    from geo3d.facies_first import data_facies_draws

    rng = np.random.default_rng(3)
    values = np.r_[rng.normal(-6.0, 0.5, 3000), -6.8]
    table = _run_table(values)
    table["boring_id"] = [f"B{i}" for i in range(len(table))]
    codes = data_facies_draws(
        table, DEFAULT_CLASSES, n_realizations=3000, error=(0.0, 0.3), rng=rng
    )
    assert (codes[:, -1] == 0).mean() == pytest.approx(0.0546, abs=0.012)


def test_a_run_far_from_a_threshold_never_flips():
    from geo3d.facies_first import data_facies_draws

    table = pd.concat([_run_table([-6.9]), _run_table([-4.0], boring="B")], ignore_index=True)
    codes = data_facies_draws(
        table, DEFAULT_CLASSES, n_realizations=500, error=(0.0, 0.2),
        rng=np.random.default_rng(5),
    )  # fmt: skip
    assert (codes[:, 1] == 2).all()  # two units above the -5 threshold


def test_data_facies_draws_keep_censored_and_unclassified_intervals_and_share_the_offset():
    from geo3d.facies_first import data_facies_draws

    table = _run_table([-6.95, -6.95, -7.5, np.nan])
    table.loc[2, "k_censored"] = "upper"
    table["boring_id"] = ["A", "B", "C", "D"]
    codes = data_facies_draws(
        table, DEFAULT_CLASSES, n_realizations=500, error=(0.3, 0.0),
        rng=np.random.default_rng(2),
    )  # fmt: skip
    assert (codes[:, 2] == 0).all() and (codes[:, 3] == -1).all()
    # no scatter: the two equal values move together with the site-wide offset
    assert (codes[:, 0] == codes[:, 1]).all()
    assert 0.3 < (codes[:, 0] == 0).mean() < 0.7


def test_no_error_keeps_the_logged_facies():
    from geo3d.facies_first import data_facies_draws

    table = _run_table([-6.9, -5.1, -4.0])
    codes = data_facies_draws(
        table, DEFAULT_CLASSES, n_realizations=3, error=(0.0, 0.0), rng=np.random.default_rng(0)
    )
    assert (codes == table["facies_code"].to_numpy()).all()


def test_model_carries_the_facies_cross_validation():
    table = _intervals()
    borings = table.groupby("boring_id").agg(x=("x", "first"), y=("y", "first")).reset_index()
    borings["ground_elev"] = 10.0
    result = build_facies_first_model(
        table, boundary=shapely.box(0, 0, 50, 40), borings=borings, crs="EPSG:32631",
        cell_size=(5.0, 5.0, 0.5), facies_classes=list(DEFAULT_CLASSES),
        water_table=_FlatWater(), n_realizations=2, seed=1, data_error=(0.1, 0.1),
    )  # fmt: skip
    cv = result.facies_crossval
    assert cv is not None
    # sand over clay, the same at every boring: each boring is predicted from the others
    assert cv.accuracy() == 1.0
    assert cv.brier_skill() > 0.9
    assert result.dataset.attrs["data_error_log10"] == [0.1, 0.1]
