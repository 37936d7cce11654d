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
