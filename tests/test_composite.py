import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from geo3d.errors import LogFormatError
from geo3d.logs.composite import composite


def _samples(depth, log10_k, ec, **flags):
    depth = np.asarray(depth, dtype=float)
    df = pd.DataFrame(
        {
            "boring_id": "B1",
            "depth": depth,
            "elev": 30.0 - depth,
            "x": 500.0,
            "y": 800.0,
            "log10_k": log10_k,
            "ec": ec,
        }
    )
    for name, values in flags.items():
        df[name] = np.asarray(values, dtype=bool)
    return df


def test_log10_k_is_averaged_in_log_space_and_ec_arithmetically():
    # K 1e-5 and 1e-3 -> geometric mean 1e-4 (mean of the logs, by definition)
    out = composite(_samples([0.02, 0.08], [-5.0, -3.0], [10.0, 30.0]), interval=0.15)
    assert len(out) == 1
    row = out.iloc[0]
    assert row["log10_k"] == pytest.approx(-4.0)
    assert row["ec"] == pytest.approx(20.0)
    assert (row["top"], row["bottom"]) == pytest.approx((0.0, 0.15))
    assert row["z_mid"] == pytest.approx(30.0 - 0.075)  # collar 30 m minus mid depth
    assert (row["x"], row["y"], row["n_samples"]) == (500.0, 800.0, 2)


def test_flagged_samples_leave_only_what_they_distort():
    df = _samples(
        [0.01, 0.04, 0.07, 0.10],
        [-5.0, -5.0, -1.0, -4.0],
        [10.0, 500.0, 10.0, 10.0],
        spike=[False, True, False, False],
        out_of_range_high=[False, False, True, False],
        ec_above_trend=[False, False, False, True],
    )
    row = composite(df, interval=0.15).iloc[0]
    # spike out of EC, kept in K; out-of-range out of K, kept in EC; EC above trend kept in both
    assert row["ec"] == pytest.approx(10.0)
    assert row["log10_k"] == pytest.approx((-5.0 - 5.0 - 4.0) / 3)
    assert (row["n_samples"], row["n_k"], row["n_ec"]) == (4, 3, 3)
    assert row["frac_spike"] == row["frac_out_of_range_high"] == row["frac_ec_above_trend"] == 0.25


def test_an_interval_with_no_usable_k_is_nan():
    df = _samples([0.01, 0.05], [-5.0, -5.0], [10.0, 12.0], above_water=[True, True])
    row = composite(df, interval=0.15).iloc[0]
    assert np.isnan(row["log10_k"]) and row["ec"] == pytest.approx(11.0)


def test_bad_input_is_refused():
    with pytest.raises(LogFormatError, match="log10_k"):
        composite(pd.DataFrame({"boring_id": ["B"], "depth": [1.0]}))
    with pytest.raises(LogFormatError, match="interval"):
        composite(_samples([0.1], [-5.0], [1.0]), interval=0.0)


@settings(max_examples=30, deadline=None)
@given(
    depths=st.lists(st.floats(0.0, 20.0), min_size=1, max_size=60, unique=True),
    interval=st.floats(0.05, 1.0),
)
def test_intervals_partition_the_samples(depths, interval):
    # invariants: every sample in exactly one interval; averages within the sample range
    depth = np.sort(np.asarray(depths))
    log10_k = -7.0 + np.sin(depth)
    out = composite(_samples(depth, log10_k, 5.0 + depth), interval=interval)
    assert out["n_samples"].sum() == depth.size
    assert (out["bottom"] - out["top"]).to_numpy() == pytest.approx(interval)
    assert (out["log10_k"] >= log10_k.min() - 1e-12).all()
    assert (out["log10_k"] <= log10_k.max() + 1e-12).all()
    assert out["top"].is_monotonic_increasing


def test_intervals_of_unresolved_samples_keep_their_resolution_bound():
    # all four samples too tight to resolve: K is at most the bound (censored, not dropped)
    df = _samples(
        [0.01, 0.04, 0.07, 0.10, 0.16, 0.19],
        [np.nan, -8.5, np.nan, -8.1, np.nan, -5.0],
        [90.0] * 6,
        out_of_range_low=[True, True, True, True, False, False],
        out_of_range_high=[False, False, False, False, True, False],
    )
    df["log10_k_bound"] = [-7.5, -8.5, -7.5, -8.1, -2.0, np.nan]
    out = composite(df, interval=0.15)
    first, second = out.iloc[0], out.iloc[1]
    assert first["k_censored"] == "upper"
    assert first["log10_k"] == pytest.approx(np.mean([-7.5, -8.5, -7.5, -8.1]))
    # a resolved sample in the interval wins over the bounds
    assert second["k_censored"] == "" and second["log10_k"] == pytest.approx(-5.0)
