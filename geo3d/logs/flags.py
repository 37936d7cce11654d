"""Flags on log samples: what the injection method cannot resolve, and EC that misleads.

Resolution flags (configurable limits):

* ``above_water``: the sample lies above the water table; injection into unsaturated soil does
  not follow the saturated-flow relation, so K is not computed there.
* ``out_of_range_high``: the net injection pressure is within a few times the pressure-sensor
  noise; the soil is too permeable for the probe to resolve K (K is a lower bound).
* ``out_of_range_low``: the flow fell to near zero or the pressure reached the sensor limit;
  the soil is too tight to resolve K (K is an upper bound).

EC flags:

* ``spike``: a narrow EC rise above the levels on both sides (beyond ``k`` scaled median
  absolute deviations of each side window, and at least a doubling) with no matching
  hydraulic change, typically a metal contact; a step at a contact is not a spike.
* ``ec_above_trend``: EC well above the site's EC-vs-log10 K trend (robust Huber fit of log10 EC on
  log10 K) while K is in the transmissive range: conductive pore water (an injected fluid,
  brine, a plume), not fine grains; only over a run of consecutive samples at least
  ``min_thickness`` thick.

Flagged samples are kept and marked; compositing leaves each flag out of what it would distort.

References
----------
.. [1] Hampel, F.R. (1974) The influence curve and its role in robust estimation. J. Am.
   Stat. Assoc. 69: 383-393.
.. [2] Pearson, R.K. (2002) Outliers in process modeling and identification. IEEE Trans.
   Control Syst. Technol. 10: 55-63 (the Hampel identifier as a moving-window filter).
.. [3] Huber, P.J. (1964) Robust estimation of a location parameter. Ann. Math. Stat. 35.
"""

from __future__ import annotations

import logging
import warnings

import numpy as np
from numpy.lib.stride_tricks import sliding_window_view
from sklearn.linear_model import HuberRegressor

__all__ = [
    "FLAGS",
    "MAD_SCALE",
    "resolution_flags",
    "hampel",
    "spike_flags",
    "keep_thick_runs",
    "ec_above_trend_flags",
]

logger = logging.getLogger(__name__)

#: Every per-sample flag, in output order (the boolean columns of the samples table).
FLAGS: tuple[str, ...] = (
    "above_water",
    "out_of_range_high",
    "out_of_range_low",
    "spike",
    "ec_above_trend",
    "sensor_check_failed",
)

#: Factor that makes the median absolute deviation a consistent estimate of a normal SD.
MAD_SCALE: float = 1.4826


def resolution_flags(
    *,
    depth,
    depth_to_water,
    p_net,
    flow,
    pressure,
    sensor_noise: float,
    pressure_limit: float,
    out_of_range_high_factor: float = 3.0,
    min_flow_fraction: float = 0.1,
    pressure_limit_fraction: float = 0.95,
    reference_flow: float | None = None,
) -> dict[str, np.ndarray]:
    """Flag samples whose K the injection method cannot resolve.

    Parameters
    ----------
    depth, depth_to_water
        m.
    p_net
        Net injection pressure, kPa.
    flow
        Injection flow, m3/s.
    pressure
        Recorded pressure, kPa (same reference as ``pressure_limit``).
    sensor_noise
        Pressure-sensor noise, kPa.
    pressure_limit
        Sensor full scale, kPa.
    out_of_range_high_factor
        ``out_of_range_high`` where ``p_net < factor * sensor_noise``.
    min_flow_fraction
        ``out_of_range_low`` where flow is below this share of ``reference_flow``.
    pressure_limit_fraction
        ``out_of_range_low`` where pressure reaches this share of the sensor limit.
    reference_flow
        The set flow; the median of the positive flows when None.

    Returns
    -------
    dict
        ``above_water``, ``out_of_range_high``, ``out_of_range_low``: boolean arrays.
    """
    depth = np.asarray(depth, dtype=float)
    p_net = np.asarray(p_net, dtype=float)
    flow = np.asarray(flow, dtype=float)
    pressure = np.asarray(pressure, dtype=float)
    above = depth < np.asarray(depth_to_water, dtype=float)
    if reference_flow is None:
        positive = flow[np.isfinite(flow) & (flow > 0)]
        reference_flow = float(np.median(positive)) if positive.size else 0.0
    low = (
        ~(flow >= min_flow_fraction * reference_flow)
        | (pressure >= pressure_limit_fraction * pressure_limit)
    ) & ~above
    high = ~above & ~low & ~(p_net >= out_of_range_high_factor * sensor_noise)
    return {"above_water": above, "out_of_range_high": high, "out_of_range_low": low}


def hampel(
    values, *, half_window: int, k: float = 3.0, floor: float = 0.0
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Hampel identifier on a moving window of ``2*half_window + 1`` samples.

    A value is an outlier when ``|x - median| > k * 1.4826 * MAD`` over its window (the
    scale never below ``floor``).  NaN values are ignored and never flagged.

    Parameters
    ----------
    values
        Equally spaced series (one log).
    half_window
        Samples on each side.
    k
        Threshold in scaled MADs.
    floor
        Smallest scale, in the units of ``values`` (guards against a MAD of zero).

    Returns
    -------
    outlier, median, scale : ndarray

    References
    ----------
    .. [1] Hampel (1974); Pearson (2002).

    Examples
    --------
    >>> out, _, _ = hampel([1.0, 1.1, 0.9, 1.0, 9.0, 1.0, 1.1, 0.9, 1.0], half_window=3)
    >>> out.nonzero()[0].tolist()
    [4]
    """
    x = np.asarray(values, dtype=float)
    if x.size == 0:
        empty = np.zeros(0)
        return empty.astype(bool), empty, empty
    h = max(int(half_window), 1)
    if x.size * (2 * h + 1) > EXACT_WINDOW_CELLS:
        median, mad = _rolling_median_mad(x, h)
    else:
        padded = np.concatenate([np.full(h, np.nan), x, np.full(h, np.nan)])
        windows = sliding_window_view(padded, 2 * h + 1)
        with np.errstate(all="ignore"), warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)  # all-NaN windows give NaN
            median = np.nanmedian(windows, axis=1)
            mad = np.nanmedian(np.abs(windows - median[:, None]), axis=1)
    scale = np.maximum(MAD_SCALE * mad, floor)
    outlier = np.abs(x - median) > k * scale
    outlier &= np.isfinite(x) & np.isfinite(median)
    return outlier, median, scale


#: Largest ``samples x window`` for which the Hampel windows are held in memory at once;
#: denser logs use :func:`_rolling_median_mad` (memory proportional to the log's length).
EXACT_WINDOW_CELLS = 20_000_000


def _rolling_median_mad(x: np.ndarray, h: int) -> tuple[np.ndarray, np.ndarray]:
    """Return the rolling median and MAD over ``2h + 1`` samples, in O(n) memory.

    The MAD is the rolling median of the absolute residuals from each sample's own rolling
    median (common practice for long series), instead of from the window centre's median.
    """
    import pandas as pd

    series = pd.Series(x)
    roll = {"window": 2 * h + 1, "center": True, "min_periods": 1}
    median = series.rolling(**roll).median().to_numpy()
    mad = pd.Series(np.abs(x - median)).rolling(**roll).median().to_numpy()
    return median, mad


def _half_window_samples(depth: np.ndarray, half_window_m: float) -> int:
    steps = np.diff(depth)
    steps = steps[np.isfinite(steps) & (steps > 0)]
    if steps.size == 0:
        return 1
    return max(1, int(round(half_window_m / float(np.median(steps)))))


def _side_windows(x: np.ndarray, h: int, gap: int) -> tuple[np.ndarray, np.ndarray]:
    """Windows of ``h`` samples on each side of every sample, ``gap`` samples away from it."""
    pad = np.full(h + gap, np.nan)
    windows = sliding_window_view(np.concatenate([pad, x, pad]), h)
    n = x.size
    return windows[:n], windows[h + 2 * gap + 1 : h + 2 * gap + 1 + n]


def _side_level(windows: np.ndarray, min_count: int) -> tuple[np.ndarray, np.ndarray]:
    with np.errstate(all="ignore"), warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)  # all-NaN windows give NaN
        level = np.nanmedian(windows, axis=1)
        mad = np.nanmedian(np.abs(windows - level[:, None]), axis=1)
    enough = np.isfinite(windows).sum(axis=1) >= min_count
    return np.where(enough, level, np.nan), MAD_SCALE * mad


def _spikes_in_log(
    lec: np.ndarray,
    ec: np.ndarray,
    pressure: np.ndarray,
    *,
    h: int,
    gap: int,
    k: float,
    pk: float,
    floor: float,
    ceiling: float,
    hydraulic_floor: float,
) -> np.ndarray:
    """Spikes of one log (see :func:`spike_flags`); ``lec`` is log10 EC."""
    left, right = _side_windows(lec, h, gap)
    left_level, left_scale = _side_level(left, max(2, h // 2))
    right_level, right_scale = _side_level(right, max(2, h // 2))
    rise = lec - np.fmax(left_level, right_level)
    scale = np.fmax(left_scale, right_scale)
    with np.errstate(invalid="ignore"):
        ec_out = (rise > k * scale) & (rise > floor)
    ec_out &= np.isfinite(left_level) & np.isfinite(right_level)
    hydraulic = pressure
    h_left, h_right = _side_windows(hydraulic, h, gap)
    h_left_level, h_left_scale = _side_level(h_left, max(2, h // 2))
    h_right_level, h_right_scale = _side_level(h_right, max(2, h // 2))
    # a real layer moves the hydraulic signal over the EC rise away from both sides; a
    # metal contact leaves it where it was; so does a peak within the EC range the soil of
    # the site gives
    flagged = np.zeros(lec.size, dtype=bool)
    for start, stop in _runs(ec_out):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            level = np.nanmedian(hydraulic[start:stop])
        moved = min(abs(level - h_left_level[start]), abs(level - h_right_level[stop - 1]))
        scale = max(h_left_scale[start], h_right_scale[stop - 1])
        explained = moved > max(pk * scale, hydraulic_floor) or not np.isfinite(moved)
        if not explained and np.nanmax(ec[start:stop]) > ceiling:
            flagged[start:stop] = True
    return flagged


def spike_flags(
    depth,
    ec,
    pressure,
    groups,
    *,
    half_window: float = 0.15,
    k: float = 4.0,
    pressure_k: float | None = None,
    relative_floor: float = 1.0,
    gap: int = 2,
    ceiling_quantile: float = 0.99,
    hydraulic_floor: float = 0.3,
) -> np.ndarray:
    """Flag EC spikes: narrow EC rises above both neighbours, with no hydraulic change.

    A spike's log10 EC exceeds the median log10 EC of the windows on its left *and* right
    (``half_window`` long, ``gap`` samples away so that a spike a few samples wide is not its
    own neighbour) by ``k`` scaled MADs and by ``log10(1 + relative_floor)``, and its peak
    exceeds the ``ceiling_quantile`` of the site's EC (a metal contact reads above anything the
    soil gives; a thin clay lens reads like the site's other clays).  A step at a contact, or
    the first readings of a log, has no higher side on both sides, so is no spike; nor is a
    rise over which the median hydraulic signal differs from both sides by ``pressure_k``
    (default ``k / 2``) scaled MADs and by ``hydraulic_floor`` (a real layer).  Log10 EC makes
    the test scale-free under the multiplicative noise of EC sensors.

    Parameters
    ----------
    depth, ec, groups
        Depth (m, sorted within each group), bulk EC (mS/m) and boring id of each sample.
    pressure
        The hydraulic signal a real layer also changes, best log10(Q/P_net) (it also tracks
        layers where the pressure is held at the sensor limit and the flow drops).
    half_window, gap
        Side-window length, m, and samples skipped between a sample and its windows.
    k, pressure_k, relative_floor, ceiling_quantile
        Thresholds (see above); only rises are spikes.
    hydraulic_floor
        In the units of ``pressure``: 0.3 log10 units of Q/P_net is a factor of 2 in K (a layer
        that changes EC as much as a spike changes K by more, a drift within a unit by less).

    Returns
    -------
    ndarray of bool

    References
    ----------
    .. [1] Hampel (1974); Pearson (2002) (median/MAD outlier identifiers).
    """
    depth = np.asarray(depth, dtype=float)
    ec = np.asarray(ec, dtype=float)
    pressure = np.asarray(pressure, dtype=float)
    groups = np.asarray(groups)
    pk = 0.5 * k if pressure_k is None else pressure_k
    with np.errstate(divide="ignore", invalid="ignore"):
        lec = np.where(ec > 0, np.log10(ec), np.nan)
    floor = np.log10(1.0 + relative_floor)
    finite = ec[np.isfinite(ec)]
    ceiling = float(np.quantile(finite, ceiling_quantile)) if finite.size else np.inf
    out = np.zeros(depth.size, dtype=bool)
    for gid in np.unique(groups):
        idx = np.flatnonzero(groups == gid)
        h = _half_window_samples(depth[idx], half_window)
        out[idx] = _spikes_in_log(
            lec[idx],
            ec[idx],
            pressure[idx],
            h=h,
            gap=gap,
            k=k,
            pk=pk,
            floor=floor,
            ceiling=ceiling,
            hydraulic_floor=hydraulic_floor,
        )
    return out


def _runs(mask: np.ndarray) -> list[tuple[int, int]]:
    """Start and stop (exclusive) of each run of True in ``mask``."""
    edges = np.diff(np.concatenate([[0], mask.astype(np.int8), [0]]))
    return list(zip(np.flatnonzero(edges == 1), np.flatnonzero(edges == -1), strict=True))


def keep_thick_runs(candidate, depth, *, min_thickness: float, unknown=None) -> np.ndarray:
    """Keep only the runs of consecutive candidate samples at least ``min_thickness`` thick.

    The thickness of a run is the depth span of its samples plus one sample step.  Samples of
    ``unknown`` (no value to test, e.g. an unresolved K) do not break a run between candidates,
    and are flagged with it; they never start or end one.

    Parameters
    ----------
    candidate
        Boolean mask of one log, in depth order.
    depth
        m, increasing.
    min_thickness
        m.
    unknown
        Boolean mask of samples that neither continue nor break a run on their own.

    Returns
    -------
    ndarray of bool
    """
    candidate = np.asarray(candidate, dtype=bool)
    depth = np.asarray(depth, dtype=float)
    unknown = np.zeros_like(candidate) if unknown is None else np.asarray(unknown, bool)
    steps = np.diff(depth)
    step = float(np.median(steps[steps > 0])) if (steps > 0).any() else 0.0
    out = np.zeros_like(candidate)
    for start, stop in _runs(candidate | (unknown & ~candidate)):
        inside = np.flatnonzero(candidate[start:stop]) + start
        if inside.size == 0:
            continue
        first, last = int(inside[0]), int(inside[-1])
        if depth[last] - depth[first] + step >= min_thickness - 1e-9:
            out[first : last + 1] = True
    return out


def _running_median(
    values: np.ndarray, groups: np.ndarray, depth: np.ndarray, window: float
) -> np.ndarray:
    """Return the running median of ``values`` over ``window`` m of depth in each group."""
    smoothed = np.full(values.size, np.nan)
    for gid in np.unique(groups):
        idx = np.flatnonzero(groups == gid)
        h = _half_window_samples(depth[idx], window / 2.0)
        r = values[idx]
        _, med, _ = hampel(r, half_window=h)
        smoothed[idx] = np.where(np.isfinite(r), med, np.nan)
    return smoothed


def _thick_runs(
    above: np.ndarray, groups: np.ndarray, depth: np.ndarray, min_thickness: float, values
) -> np.ndarray:
    """Keep, within each boring, the runs of ``above`` at least ``min_thickness`` thick."""
    thick = np.zeros(above.size, dtype=bool)
    for gid in np.unique(groups):
        idx = np.flatnonzero(groups == gid)
        thick[idx] = keep_thick_runs(
            above[idx], depth[idx], min_thickness=min_thickness, unknown=~np.isfinite(values[idx])
        )
    return thick


def ec_above_trend_flags(
    log10_k,
    ec,
    groups,
    depth,
    *,
    transmissive_min: float,
    sigma: float = 2.5,
    exclude=None,
    smooth_window: float = 0.1,
    min_thickness: float = 0.2,
) -> tuple[np.ndarray, dict]:
    """EC well above the site's EC-vs-log10 K trend where K is transmissive.

    The trend ``log10 EC = c0 + c1*log10 K`` is fitted robustly (Huber) on usable samples;
    the residual scale is ``1.4826 * MAD`` of its residuals (a robust z-score).  Flagged: the
    samples with log10 K at least ``transmissive_min`` in runs at least ``min_thickness`` thick
    (not the few samples at a sharp contact) where the running median of the residual over
    ``smooth_window`` exceeds ``sigma`` scales.  The trend is refitted once without them.

    Parameters
    ----------
    log10_k
        Log-derived log10 K (NaN where unresolved).
    ec
        Bulk EC, mS/m.
    groups, depth
        Boring id and depth (m) of each sample.
    transmissive_min
        Lowest log10 K of the transmissive class.
    sigma
        Threshold in residual scales.
    exclude
        Boolean mask of samples to leave out of the trend (spikes, unresolved K).
    smooth_window, min_thickness
        m: full length of the running median of the residuals; thinnest run flagged.

    Returns
    -------
    flags : ndarray of bool
    trend : dict
        ``intercept``, ``slope``, ``scale`` (log10 mS/m), ``n``.

    References
    ----------
    .. [1] Huber (1964); Archie (1942) Trans. AIME 146 (bulk EC rises with pore-water EC).
    """
    lk = np.asarray(log10_k, dtype=float)
    ec = np.asarray(ec, dtype=float)
    groups = np.asarray(groups)
    depth = np.asarray(depth, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        lec = np.where(ec > 0, np.log10(ec), np.nan)
    usable = np.isfinite(lk) & np.isfinite(lec)
    if exclude is not None:
        usable &= ~np.asarray(exclude, dtype=bool)
    flags = np.zeros(lk.size, dtype=bool)
    trend = {"intercept": float("nan"), "slope": float("nan"), "scale": float("nan"), "n": 0}
    if usable.sum() < 10:
        logger.info("EC trend: %d usable samples, too few to fit one", usable.sum())
        return flags, trend
    fit_set = usable
    for _ in range(2):
        model = HuberRegressor().fit(lk[fit_set, None], lec[fit_set])
        residual = lec - model.predict(np.nan_to_num(lk)[:, None])
        resid_fit = residual[fit_set]
        scale = MAD_SCALE * float(np.median(np.abs(resid_fit - np.median(resid_fit))))
        scale = max(scale, 1e-6)
        valid = np.isfinite(lk) & np.isfinite(lec)
        smoothed = _running_median(np.where(valid, residual, np.nan), groups, depth, smooth_window)
        thick = _thick_runs(smoothed > sigma * scale, groups, depth, min_thickness, smoothed)
        flags = thick & (lk >= transmissive_min) & np.isfinite(lk)
        fit_set = usable & ~flags
        trend = {
            "intercept": float(model.intercept_),
            "slope": float(model.coef_[0]),
            "scale": scale,
            "n": int(fit_set.sum()),
        }
    return flags, trend
