"""Flags on log samples: what the injection method cannot resolve, and EC that misleads.

Resolution flags (configurable limits):

* ``above_water``: the sample lies above the water table; injection into unsaturated soil does
  not follow the saturated-flow relation, so K is not computed there.
* ``out_of_range_high``: the net injection pressure is within a few times the pressure-sensor
  noise; the soil is too permeable for the probe to resolve K (K is a lower bound).
* ``out_of_range_low``: the flow fell to near zero or the pressure reached the sensor limit;
  the soil is too tight to resolve K (K is an upper bound).

EC flags:

* ``spike``: a narrow EC excursion (Hampel filter: beyond ``k`` scaled median absolute
  deviations of the rolling median over a depth window) with no matching pressure change,
  typically a metal contact.
* ``ionic``: EC well above the site's EC-vs-log10 K trend (robust Huber fit of log10 EC on
  log10 K) while K is in the transmissive range: conductive pore water (an injected fluid,
  brine, a plume), not fine grains.

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
from scipy.ndimage import median_filter
from sklearn.linear_model import HuberRegressor

__all__ = [
    "FLAGS",
    "MAD_SCALE",
    "resolution_flags",
    "hampel",
    "spike_flags",
    "ionic_flags",
]

logger = logging.getLogger(__name__)

#: Every per-sample flag, in output order (the boolean columns of the samples table).
FLAGS: tuple[str, ...] = (
    "above_water",
    "out_of_range_high",
    "out_of_range_low",
    "spike",
    "ionic",
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


def _half_window_samples(depth: np.ndarray, half_window_m: float) -> int:
    steps = np.diff(depth)
    steps = steps[np.isfinite(steps) & (steps > 0)]
    if steps.size == 0:
        return 1
    return max(1, int(round(half_window_m / float(np.median(steps)))))


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
) -> np.ndarray:
    """Flag EC spikes: Hampel outliers of EC with no hydraulic outlier at or next to them.

    Parameters
    ----------
    depth
        Sample depth, m (sorted within each group).
    ec
        Bulk EC, mS/m.
    pressure
        The hydraulic signal that a real layer would also change: recorded or net pressure,
        or better the log10 injection ratio log10(Q/P_net), which also tracks layers where
        the pressure is held at the sensor limit and the flow drops instead.
    groups
        Boring id of each sample; the filter runs within each boring.
    half_window
        Half window of the filter, m.
    k
        Threshold in scaled MADs for EC.
    pressure_k
        Threshold (scaled MADs) of a hydraulic excursion that would explain an EC one; half of
        ``k`` when None, so that a modest matching change is enough to call it a layer.
    relative_floor
        Smallest EC rise flagged, as a share of the local median EC: a metal contact
        short-circuits the electrodes and multiplies the reading, while bulk EC rarely doubles
        within a few centimetres without the hydraulic signal noticing.  Only rises are
        spikes.

    Returns
    -------
    ndarray of bool

    References
    ----------
    .. [1] Hampel (1974); Pearson (2002).
    """
    depth = np.asarray(depth, dtype=float)
    ec = np.asarray(ec, dtype=float)
    pressure = np.asarray(pressure, dtype=float)
    groups = np.asarray(groups)
    pk = 0.5 * k if pressure_k is None else pressure_k
    out = np.zeros(depth.size, dtype=bool)
    for gid in np.unique(groups):
        idx = np.flatnonzero(groups == gid)
        h = _half_window_samples(depth[idx], half_window)
        ec_out, ec_median, _ = hampel(ec[idx], half_window=h, k=k)
        floor = relative_floor * np.abs(np.nan_to_num(ec_median))
        ec_out &= ec[idx] - ec_median > np.maximum(floor, 0)
        hydraulic = pressure[idx]
        _, p_median, p_scale = hampel(hydraulic, half_window=h, k=pk)
        # A real layer moves the hydraulic signal over consecutive samples: test the running
        # median of three against the window, so that one noisy reading (common where the net
        # pressure is only a few noise units, as in gravel) cannot pass for a layer.
        short = median_filter(hydraulic, size=3, mode="nearest")
        p_out = np.abs(short - p_median) > pk * p_scale
        # a hydraulic excursion at or next to the EC one explains it (a real layer)
        near_p = p_out.copy()
        near_p[1:] |= p_out[:-1]
        near_p[:-1] |= p_out[1:]
        out[idx] = ec_out & ~near_p
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


def ionic_flags(
    log10_k,
    ec,
    groups,
    depth,
    *,
    transmissive_min: float,
    sigma: float = 2.5,
    exclude=None,
    smooth_window: float = 0.1,
) -> tuple[np.ndarray, dict]:
    """EC well above the site's EC-vs-log10 K trend where K is transmissive.

    The trend ``log10 EC = c0 + c1*log10 K`` is fitted robustly (Huber) on usable samples;
    the residual scale is ``1.4826 * MAD`` of its residuals.  A sample is ionic when the
    running median of its residual over ``smooth_window`` (within its boring; a single noisy
    reading is not an anomaly) exceeds ``sigma`` scales and its log10 K is at least
    ``transmissive_min``.  The trend is refitted once with ionic samples left out.

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
    smooth_window
        m, full length of the running median of the residuals.

    Returns
    -------
    flags : ndarray of bool
    trend : dict
        ``intercept``, ``slope``, ``scale`` (log10 mS/m), ``n``.

    References
    ----------
    .. [1] Huber (1964); Archie, G.E. (1942) Trans. AIME 146 (bulk EC rises with pore-water
       EC at a given porosity).
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
        logger.info("ionic flags: %d usable samples, too few for an EC trend", usable.sum())
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
        flags = (smoothed > sigma * scale) & (lk >= transmissive_min) & np.isfinite(lk)
        fit_set = usable & ~flags
        trend = {
            "intercept": float(model.intercept_),
            "slope": float(model.coef_[0]),
            "scale": scale,
            "n": int(fit_set.sum()),
        }
    return flags, trend
