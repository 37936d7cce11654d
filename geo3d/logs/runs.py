"""Composite log samples within facies runs, never across a contact.

Fixed-length compositing averages the samples of a bin whatever lies in it, so a bin that
straddles a contact between sand and clay gets a K in between: spurious transitional material.
Here each sample is classified first (log-derived K, or the resolution bound of a sample the
probe cannot resolve), runs thinner than ``min_thickness`` are merged into their neighbours
(:func:`geo3d.facies.apply_min_thickness`), and the samples of each run are composited into
intervals of about ``interval`` length that start at the run's top and end at its bottom.  Each
interval keeps its run's facies; an interval with no resolved K takes its samples' bound and is
marked censored (``upper``: K is at most the bound; ``lower``: at least).

References
----------
.. [1] Deutsch, C.V., Journel, A.G. (1998) GSLIB, 2nd ed. Oxford University Press, sec. II.1.2
   (compositing within geological units).
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np
import pandas as pd

from geo3d.errors import LogFormatError
from geo3d.facies import apply_min_thickness, classify_thresholds

__all__ = ["composite_runs"]

_REQUIRED = ("boring_id", "depth", "elev", "x", "y", "log10_k", "ec")


def _sample_values(samples: pd.DataFrame) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """log10 K per sample (exact, or the bound), and the low / high censoring masks."""
    n = len(samples)

    def flag(name: str) -> np.ndarray:
        return samples[name].to_numpy(bool) if name in samples else np.zeros(n, bool)

    above = flag("above_water")
    low, high = flag("out_of_range_low") & ~above, flag("out_of_range_high") & ~above
    exact = samples["log10_k"].to_numpy(float)
    exact = np.where(flag("sensor_check_failed") | above, np.nan, exact)
    bound = samples.get("log10_k_bound", pd.Series(np.nan, index=samples.index)).to_numpy(float)
    value = np.where(np.isfinite(exact), exact, np.where(low | high, bound, np.nan))
    return value, low & ~np.isfinite(exact), high & ~np.isfinite(exact)


def _half_spacing(depth: np.ndarray, boring: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Top and bottom of each sample's share of the log (midpoints between samples)."""
    new = np.r_[True, boring[1:] != boring[:-1]]
    end = np.r_[new[1:], True]
    mid = np.r_[depth[:-1] + 0.5 * np.diff(depth), np.nan]
    top = np.where(new, depth, np.r_[np.nan, mid[:-1]])
    bottom = np.where(end, depth, mid)
    step = np.median(np.diff(depth)[~new[1:]]) if len(depth) > 1 else 0.0
    top = np.where(new, depth - 0.5 * step, top)
    bottom = np.where(end, depth + 0.5 * step, bottom)
    return np.maximum(top, 0.0), bottom


def composite_runs(
    samples: pd.DataFrame,
    classes: Sequence[Any],
    *,
    interval: float,
    min_thickness: float,
) -> pd.DataFrame:
    """Classify samples, cut the logs into facies runs and composite within each run.

    Parameters
    ----------
    samples
        The logs stage's per-sample table (``boring_id, depth, elev, x, y, log10_k, ec``, the
        flags and ``log10_k_bound``), sorted by boring and depth.
    classes
        Facies classes from the lowest K up (``name``, ``log10_k_max``).
    interval
        Target interval length (m); a run is cut into ``round(thickness / interval)`` equal
        intervals (at least one).
    min_thickness
        Runs thinner than this (m) merge into their neighbours.

    Returns
    -------
    pandas.DataFrame
        ``boring_id, x, y, top, bottom, z_mid, log10_k, ec, n_samples, k_censored,
        facies_code, facies``; unclassified ground (above the water table) as intervals with
        ``facies_code = -1`` and NaN ``log10_k``, its EC kept.
    """
    missing = [c for c in _REQUIRED if c not in samples.columns]
    if missing:
        msg = f"per-sample table: missing column(s) {missing}; expected {list(_REQUIRED)}"
        raise LogFormatError(msg)
    table = samples.sort_values(["boring_id", "depth"], kind="stable").reset_index(drop=True)
    boring = table["boring_id"].astype(str).to_numpy()
    depth = table["depth"].to_numpy(float)
    value, low, high = _sample_values(table)
    codes = classify_thresholds(value, classes)
    top, bottom = _half_spacing(depth, boring)
    codes = apply_min_thickness(codes, top, bottom, boring, min_thickness=min_thickness)
    new_run = np.r_[True, (boring[1:] != boring[:-1]) | (codes[1:] != codes[:-1])]
    run = np.cumsum(new_run) - 1
    run_top = pd.Series(top).groupby(run).transform("min").to_numpy()
    run_bottom = pd.Series(bottom).groupby(run).transform("max").to_numpy()
    pieces = np.maximum(np.round((run_bottom - run_top) / interval), 1.0)
    length = (run_bottom - run_top) / pieces
    piece = np.minimum(np.floor((depth - run_top) / length), pieces - 1).astype(int)
    spike = table["spike"].to_numpy(bool) if "spike" in table else np.zeros(len(table), bool)
    frame = pd.DataFrame(
        {
            "run": run, "piece": piece, "boring_id": boring, "x": table["x"].to_numpy(float),
            "y": table["y"].to_numpy(float), "ground": table["elev"].to_numpy(float) + depth,
            "k": np.where(low | high, np.nan, value), "bound": np.where(low | high, value, np.nan),
            "low": low.astype(float), "high": high.astype(float),
            "ec": np.where(spike, np.nan, table["ec"].to_numpy(float)), "code": codes,
            "top": run_top + piece * length, "bottom": run_top + (piece + 1) * length,
        }
    )  # fmt: skip
    out = frame.groupby(["run", "piece"], sort=True).agg(
        boring_id=("boring_id", "first"), x=("x", "first"), y=("y", "first"),
        ground=("ground", "mean"), top=("top", "first"), bottom=("bottom", "first"),
        log10_k=("k", "mean"), bound=("bound", "mean"), low=("low", "sum"),
        high=("high", "sum"), ec=("ec", "mean"), n_samples=("k", "size"), code=("code", "first"),
    )  # fmt: skip
    censored = out["log10_k"].isna() & out["bound"].notna() & (out["code"] >= 0)
    out["k_censored"] = np.where(
        censored, np.where(out["low"] >= out["high"], "upper", "lower"), ""
    )
    out["log10_k"] = np.where(censored, out["bound"], out["log10_k"])
    out["z_mid"] = out["ground"] - 0.5 * (out["top"] + out["bottom"])
    out["facies_code"] = out["code"].astype(int)
    names = [str(c.name) for c in classes]
    out["facies"] = [names[c] if c >= 0 else "" for c in out["facies_code"]]
    columns = ["boring_id", "x", "y", "top", "bottom", "z_mid", "log10_k", "ec", "n_samples",
               "k_censored", "facies_code", "facies"]  # fmt: skip
    return out.reset_index(drop=True)[columns]
