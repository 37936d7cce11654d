"""Composite log samples into depth intervals.

Each boring's samples are grouped into intervals of fixed length aligned on the collar
(``[0, L), [L, 2L), ...`` in depth).  Log10 K is averaged in log space (the geometric mean of
K), EC arithmetically; each interval keeps its sample count and the fraction of its samples
carrying each flag.  Flagged samples are left out of what they would distort: samples above
water or out of range do not enter log10 K, EC spikes do not enter EC.  An interval below the
water table whose samples are mostly out of range, with none resolved, would otherwise be lost
from the model exactly where the soil is tightest or most permeable: it takes the mean of its
samples' resolution bounds (``log10_k_bound``) and is marked ``k_censored = "upper"`` (K is
at most this: too tight to resolve) or ``"lower"`` (K is at least this).  The interval's
coordinates are the boring's ``x, y`` and the elevation of its middle, ``z_mid``, in the site
CRS (elevation upward).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from geo3d.errors import LogFormatError
from geo3d.logs.flags import FLAGS

__all__ = ["K_EXCLUDING_FLAGS", "EC_EXCLUDING_FLAGS", "composite"]

#: Flags whose samples are left out of the log10 K average.
K_EXCLUDING_FLAGS: tuple[str, ...] = ("above_water", "out_of_range_high", "out_of_range_low")
#: Flags whose samples are left out of the EC average.
EC_EXCLUDING_FLAGS: tuple[str, ...] = ("spike",)

_REQUIRED = ("boring_id", "depth", "elev", "x", "y", "log10_k", "ec")


def _prepared(
    samples: pd.DataFrame,
    flags: list[str],
    interval: float,
    k_excluding: tuple[str, ...],
    ec_excluding: tuple[str, ...],
    bound_column: str,
) -> pd.DataFrame:
    """Return the samples with their bin, ground, and the values each average may use."""
    df = samples[[*_REQUIRED, *flags]].copy()
    depth = df["depth"].to_numpy(dtype=float)
    # small tolerance so that a sample exactly on a boundary falls in the lower interval
    df["_bin"] = np.floor(depth / interval + 1e-9).astype(np.int64)
    df["_ground"] = df["elev"].to_numpy(dtype=float) + depth
    k_bad = np.zeros(len(df), dtype=bool)
    for f in k_excluding:
        if f in df:
            k_bad |= df[f].to_numpy(dtype=bool)
    ec_bad = np.zeros(len(df), dtype=bool)
    for f in ec_excluding:
        if f in df:
            ec_bad |= df[f].to_numpy(dtype=bool)
    df["_k"] = np.where(k_bad, np.nan, df["log10_k"].to_numpy(dtype=float))

    def flag(name: str) -> np.ndarray:
        return df[name].to_numpy(dtype=bool) if name in df else np.zeros(len(df), dtype=bool)

    above, low, high = flag("above_water"), flag("out_of_range_low"), flag("out_of_range_high")
    if bound_column in samples.columns:
        bound = samples[bound_column].to_numpy(dtype=float)
    else:
        bound = np.full(len(df), np.nan)
    df["_bound"] = np.where((low | high) & ~above, bound, np.nan)
    df["_sat"] = (~above).astype(float)
    df["_low"] = (low & ~above).astype(float)
    df["_high"] = (high & ~above).astype(float)
    df["_ec"] = np.where(ec_bad, np.nan, df["ec"].to_numpy(dtype=float))
    for f in flags:
        df[f] = df[f].astype(float)
    return df


#: Aggregates per interval: output column -> (sample column, function).
_AGGREGATES: dict[str, tuple[str, str]] = {
    "x": ("x", "first"),
    "y": ("y", "first"),
    "_ground": ("_ground", "mean"),
    "log10_k": ("_k", "mean"),
    "ec": ("_ec", "mean"),
    "n_samples": ("depth", "size"),
    "n_k": ("_k", "count"),
    "n_ec": ("_ec", "count"),
    "_bound": ("_bound", "mean"),
    "_sat": ("_sat", "sum"),
    "_low": ("_low", "sum"),
    "_high": ("_high", "sum"),
}

#: Columns of the intervals table before the flag fractions.
_COLUMNS = (
    "boring_id",
    "x",
    "y",
    "top",
    "bottom",
    "z_mid",
    "log10_k",
    "ec",
    "n_samples",
    "n_k",
    "n_ec",
    "k_censored",
)


def composite(
    samples: pd.DataFrame,
    *,
    interval: float = 0.15,
    k_excluding: tuple[str, ...] = K_EXCLUDING_FLAGS,
    ec_excluding: tuple[str, ...] = EC_EXCLUDING_FLAGS,
    bound_column: str = "log10_k_bound",
) -> pd.DataFrame:
    """Average per-sample log10 K and EC over depth intervals of each boring.

    Parameters
    ----------
    samples
        Per-sample table with at least ``boring_id, depth, elev, x, y, log10_k, ec`` and any
        boolean flag columns among :data:`geo3d.logs.flags.FLAGS`.
    interval
        Interval length, m (> 0).
    k_excluding, ec_excluding
        Flags whose samples are left out of the log10 K and EC averages.
    bound_column
        Per-sample log10 K resolution bound of out-of-range samples (NaN elsewhere); used for
        intervals with no resolved sample when present.

    Returns
    -------
    DataFrame
        ``boring_id, x, y, top, bottom, z_mid, log10_k, ec, n_samples, n_k, n_ec,
        k_censored`` and one ``frac_<flag>`` per flag present; sorted by boring and depth.
        ``log10_k`` (``ec``) is NaN where no sample may enter it.

    Raises
    ------
    LogFormatError
        If a required column is missing or ``interval`` is not positive.

    Examples
    --------
    >>> df = pd.DataFrame({"boring_id": "B1", "depth": [0.01, 0.05, 0.12, 0.16],
    ...                    "elev": [9.99, 9.95, 9.88, 9.84], "x": 0.0, "y": 0.0,
    ...                    "log10_k": [-5.0, -3.0, -4.0, -6.0], "ec": [10.0, 20.0, 30.0, 5.0]})
    >>> composite(df, interval=0.15)[["top", "log10_k", "ec", "n_samples"]].round(3).values.tolist()
    [[0.0, -4.0, 20.0, 3.0], [0.15, -6.0, 5.0, 1.0]]
    """
    missing = [c for c in _REQUIRED if c not in samples.columns]
    if missing:
        msg = f"per-sample table: missing column(s) {missing}; expected {list(_REQUIRED)}"
        raise LogFormatError(msg)
    if not interval > 0:
        msg = f"[composite] interval: expected a length > 0 m, got {interval}"
        raise LogFormatError(msg)
    flags = [f for f in FLAGS if f in samples.columns]
    df = _prepared(samples, flags, interval, k_excluding, ec_excluding, bound_column)
    agg = dict(_AGGREGATES)
    agg.update({f"frac_{f}": (f, "mean") for f in flags})
    out = df.groupby(["boring_id", "_bin"], sort=True).agg(**agg).reset_index()
    out["top"] = out["_bin"] * interval
    out["bottom"] = out["top"] + interval
    out["z_mid"] = out["_ground"] - 0.5 * (out["top"] + out["bottom"])
    censor = (
        (out["n_k"] == 0)
        & out["_bound"].notna()
        & (out["_low"] + out["_high"] >= 0.5 * out["_sat"])
        & (out["_sat"] > 0)
    )
    out["k_censored"] = np.where(
        censor, np.where(out["_low"] >= out["_high"], "upper", "lower"), ""
    )
    out["log10_k"] = np.where(censor, out["_bound"], out["log10_k"])
    columns = [*_COLUMNS, *[f"frac_{f}" for f in flags]]
    return out[columns].reset_index(drop=True)
