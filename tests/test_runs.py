"""Tests of compositing within facies runs (geo3d.logs.runs)."""

from __future__ import annotations

import numpy as np
import pandas as pd

from geo3d.facies import DEFAULT_CLASSES
from geo3d.logs.runs import composite_runs


def _samples(log10_k: np.ndarray, step: float = 0.02) -> pd.DataFrame:
    depth = (np.arange(log10_k.size) + 0.5) * step
    return pd.DataFrame(
        {
            "boring_id": "B1",
            "depth": depth,
            "elev": 100.0 - depth,
            "x": 0.0,
            "y": 0.0,
            "log10_k": log10_k,
            "ec": np.where(log10_k < -7, 80.0, 10.0),
        }
    )


def test_no_interval_straddles_a_contact():
    # sand (-4) over clay (-8) with the contact at 1.06 m, not on a 0.15 m bin edge
    k = np.where(np.arange(100) < 53, -4.0, -8.0)
    out = composite_runs(_samples(k), DEFAULT_CLASSES, interval=0.15, min_thickness=0.3)
    assert set(out["log10_k"].round(9)) == {-4.0, -8.0}
    contact = out.loc[out["facies"] == "storage", "top"].min()
    assert contact == np.float64(1.06)
    assert out.loc[out["facies"] == "transmissive", "bottom"].max() == np.float64(1.06)
    # fixed 0.15 m bins would average the 0.90-1.05-1.20 m bins across the contact instead


def test_intervals_tile_each_run_and_keep_its_facies():
    k = np.r_[np.full(40, -4.0), np.full(35, -6.0), np.full(25, -8.0)]
    out = composite_runs(_samples(k), DEFAULT_CLASSES, interval=0.15, min_thickness=0.3)
    np.testing.assert_allclose(out["top"].to_numpy()[1:], out["bottom"].to_numpy()[:-1])
    assert out["top"].iloc[0] == 0.0 and out["bottom"].iloc[-1] == 2.0
    assert out["facies_code"].tolist() == sorted(out["facies_code"], reverse=True)
    lengths = (out["bottom"] - out["top"]).round(9)
    # runs of 0.80, 0.70 and 0.50 m cut into 5, 5 and 3 equal intervals of about 0.15 m
    assert sorted(set(lengths)) == [0.14, 0.16, 0.166666667]


def test_thin_runs_merge_and_censored_values_keep_their_bound():
    k = np.r_[np.full(30, -4.0), np.full(5, -6.0), np.full(30, -4.0), np.full(20, np.nan)]
    samples = _samples(k)
    low = np.r_[np.zeros(65, bool), np.ones(20, bool)]
    samples["out_of_range_low"] = low
    samples["log10_k_bound"] = np.where(low, -7.5, np.nan)
    out = composite_runs(samples, DEFAULT_CLASSES, interval=0.15, min_thickness=0.3)
    # the 0.10 m transitional run is thinner than 0.3 m and joins the sand around it
    assert "transitional" not in set(out["facies"])
    tight = out[out["k_censored"] != ""]
    assert set(tight["k_censored"]) == {"upper"}
    assert set(tight["log10_k"]) == {-7.5}
    assert set(tight["facies"]) == {"storage"}
