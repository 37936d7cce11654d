"""Water level from dissipation tests, piezometric profiles and the site water table.

A dissipation test stops the flow with the probe in saturated soil and records the pressure as
it falls (or rises) back to the static pressure of the pore water.  The static pressure gives
the depth to water at the boring::

    depth_to_water = probe_depth - (P_static - P_atm) / gamma_w

(``P_atm = 0`` for gauge records).  The approach to equilibrium is close to exponential
(Hvorslev's time lag), ``P(t) = P_inf + (P_0 - P_inf) * exp(-t / T)``; a record that stops
before equilibrium is extrapolated with that curve fitted by nonlinear least squares and
cross-checked with Aitken's three-point formula, which is exact for an exponential.

Across the site, water-table elevations from all borings give a surface: a least-squares plane
(whose slope is the hydraulic gradient: the three-point problem generalised to ``n`` points) or
a kriged surface.  Coordinates are ``(x, y)`` in the site CRS, elevations upward, in m.

References
----------
.. [1] Hvorslev, M.J. (1951) Time lag and soil permeability in ground-water observations.
   US Army Corps of Engineers, Waterways Experiment Station, Bulletin 36.
.. [2] Aitken, A.C. (1926) On Bernoulli's numerical solution of algebraic equations.
   Proc. R. Soc. Edinburgh 46: 289-305 (the delta-squared process).
.. [3] Freeze, R.A., Cherry, J.A. (1979) Groundwater. Prentice-Hall (hydraulic head,
   piezometric profiles, gradient from three wells).
"""

from __future__ import annotations

import logging
import warnings
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd
from numpy.typing import ArrayLike
from scipy.optimize import curve_fit

from geo3d.errors import Geo3dWarning, WaterLevelError
from geo3d.logs.hydraulic import GAMMA_W

__all__ = [
    "LEVEL_COLUMNS",
    "DissipationResult",
    "static_pressure",
    "aitken_extrapolation",
    "depth_to_water",
    "water_levels",
    "boring_water_levels",
    "piezometric_profiles",
    "gradient_plane",
    "WaterTableSurface",
    "fit_water_table",
]

logger = logging.getLogger(__name__)

_MIN_POINTS = 5


@dataclass(frozen=True)
class DissipationResult:
    """Static pressure found from one dissipation record.

    Attributes
    ----------
    p_static
        Static pressure, kPa (same reference as the record).
    method
        ``"tail"`` (the record reached equilibrium; mean of its tail) or ``"exponential"``
        (extrapolated by the fitted exponential).
    fraction_dissipated
        Share of the initial excess pressure gone by the end of the record, 0..1.
    fit_rmse
        Root-mean-square residual of the exponential fit, kPa.
    aitken
        Aitken three-point estimate of the static pressure, kPa (NaN when undefined).
    time_constant
        Fitted time constant T, s (inf for a record flat from the start).
    p_static_se
        Standard error of the static pressure, kPa: of ``P_inf`` from the fit's covariance
        (exponential), or of the mean of the settled readings (tail).
    """

    p_static: float
    method: str
    fraction_dissipated: float
    fit_rmse: float
    aitken: float
    time_constant: float
    p_static_se: float = float("nan")


def _exponential(t, p_inf, excess, time_constant):
    return p_inf + excess * np.exp(-t / time_constant)


def aitken_extrapolation(p0: float, p1: float, p2: float) -> float:
    """Limit of a sequence from three equally spaced terms (Aitken's delta-squared process).

    ``P_inf = (P0*P2 - P1**2) / (P0 + P2 - 2*P1)``, exact for an exponential approach sampled at
    equal time steps.

    Returns
    -------
    float
        The extrapolated limit, or NaN when the three values are (nearly) in a straight line.

    References
    ----------
    .. [1] Aitken (1926), Proc. R. Soc. Edinburgh 46.

    Examples
    --------
    >>> round(aitken_extrapolation(190.0, 170.0, 160.0), 6)
    150.0
    """
    denom = p0 + p2 - 2.0 * p1
    scale = max(abs(p0 - p1), abs(p1 - p2), 1e-12)
    if abs(denom) < 1e-9 * scale or denom == 0:
        return float("nan")
    return float((p0 * p2 - p1**2) / denom)


def _thirds(t: np.ndarray, p: np.ndarray) -> np.ndarray:
    """Mean pressure over each third of the record (on a uniform resampling of time).

    The mean of an exponential over consecutive windows of equal length is again an
    exponential sequence with the same limit, so Aitken's formula on the three means stays
    exact, while averaging many readings removes most of the sensor noise.
    """
    grid = np.linspace(t[0], t[-1], 3 * max(t.size, 30))
    values = np.interp(grid, t, p)
    return values.reshape(3, -1).mean(axis=1)


def _record(time_s: ArrayLike, pressure: ArrayLike, *, label: str) -> tuple[np.ndarray, np.ndarray]:
    """Return the finite readings sorted by time, time counted from the first one."""
    t = np.asarray(time_s, dtype=float)
    p = np.asarray(pressure, dtype=float)
    ok = np.isfinite(t) & np.isfinite(p)
    t, p = t[ok], p[ok]
    if t.size < _MIN_POINTS:
        msg = (
            f"{label}: {t.size} readings; at least {_MIN_POINTS} are needed to find the "
            "static pressure"
        )
        raise WaterLevelError(msg)
    order = np.argsort(t, kind="stable")
    t, p = t[order] - t[order][0], p[order]
    if t[-1] <= 0:
        msg = f"{label}: column 'time_s' does not increase; expected readings over time"
        raise WaterLevelError(msg)
    return t, p


def _fit_exponential(t: np.ndarray, p: np.ndarray, *, label: str) -> tuple[np.ndarray, np.ndarray]:
    """Fit ``P(t) = P_inf + dP exp(-t/T)``: parameters and their covariance."""
    guess = (float(p[-1]), float(p[0] - p[-1]), max(t[-1] / 3.0, 1e-3))
    try:
        params, covariance = curve_fit(
            _exponential,
            t,
            p,
            p0=guess,
            bounds=([-np.inf, -np.inf, 1e-6], [np.inf, np.inf, np.inf]),
            maxfev=20000,
        )
    except (RuntimeError, ValueError) as exc:
        msg = f"{label}: the exponential fit of the dissipation did not converge ({exc})"
        raise WaterLevelError(msg) from None
    return params, covariance


def _flat_record(t: np.ndarray, p: np.ndarray, tail_tolerance: float) -> DissipationResult | None:
    """Return the mean of a record that shows no decay (at equilibrium), else None."""
    tail = t >= 0.9 * t[-1]
    if tail.sum() < 3:
        tail = np.arange(t.size) >= t.size - 3
    tail_mean = float(p[tail].mean())
    tail_noise = float(p[tail].std(ddof=1)) if tail.sum() > 2 else 0.0
    excess0 = p[: max(3, t.size // 20)].mean() - tail_mean
    if abs(excess0) > max(2.0 * tail_tolerance, 3.0 * tail_noise):
        return None
    rmse = float(np.sqrt(np.mean((p - tail_mean) ** 2)))
    se = float(p.std(ddof=1) / np.sqrt(p.size))
    return DissipationResult(tail_mean, "tail", 1.0, rmse, float("nan"), float("inf"), se)


def _check_aitken(aitken: float, value: float, excess: float, *, label: str) -> None:
    """Warn when Aitken's three-point estimate disagrees with the static pressure."""
    if np.isfinite(aitken) and abs(aitken - value) > max(0.5, 0.05 * abs(excess)):
        warnings.warn(
            f"{label}: Aitken three-point estimate {aitken:.2f} kPa disagrees with the "
            f"static pressure {value:.2f} kPa; the decay may not be exponential",
            Geo3dWarning,
            stacklevel=3,
        )


def static_pressure(
    time_s,
    pressure,
    *,
    min_fraction_dissipated: float = 0.5,
    warn_fraction_dissipated: float = 0.8,
    tail_tolerance: float = 0.1,
    label: str = "dissipation record",
) -> DissipationResult:
    """Find the static pressure of one dissipation record.

    The record is fitted with ``P(t) = P_inf + dP * exp(-t/T)`` (nonlinear least squares).
    When the fitted excess is within ``tail_tolerance`` at three readings or more, those settled
    readings are averaged; otherwise ``P_inf`` is used.  Aitken's formula on the mean pressures
    of the record's three thirds (exact for an exponential) is a cross-check.

    Parameters
    ----------
    time_s
        Time since the flow was stopped, s.
    pressure
        Pressure, kPa.
    min_fraction_dissipated
        Records that dissipated less than this share of their initial excess are refused.
    warn_fraction_dissipated
        Records that dissipated less than this share are accepted with a warning.
    tail_tolerance
        kPa; excess pressure below which the record is taken as at equilibrium.
    label
        Names the record in messages (e.g. ``"boring B07, test 3"``).

    Returns
    -------
    DissipationResult

    Raises
    ------
    WaterLevelError
        Too few readings, no usable decay, or less than ``min_fraction_dissipated`` dissipated.

    References
    ----------
    .. [1] Hvorslev (1951), Bulletin 36 (exponential time lag); Aitken (1926), delta-squared
       extrapolation.
    """
    t, p = _record(time_s, pressure, label=label)
    duration = t[-1]
    flat = _flat_record(t, p, tail_tolerance)
    if flat is not None:
        return flat
    params, covariance = _fit_exponential(t, p, label=label)
    p_inf, excess, time_constant = (float(v) for v in params)
    rmse = float(np.sqrt(np.mean((p - _exponential(t, *params)) ** 2)))
    fraction = float(1.0 - np.exp(-duration / time_constant))
    aitken = aitken_extrapolation(*_thirds(t, p))
    if fraction < min_fraction_dissipated:
        msg = (
            f"{label}: only {fraction:.0%} of the excess pressure dissipated during the "
            f"{duration:.0f} s record (time constant {time_constant:.0f} s); expected at least "
            f"{min_fraction_dissipated:.0%}: record too short to extrapolate with confidence"
        )
        raise WaterLevelError(msg)
    settled = abs(excess) * np.exp(-t / time_constant) <= tail_tolerance
    if settled.sum() >= 3:
        method, value = "tail", float(p[settled].mean())
        se = float(p[settled].std(ddof=1) / np.sqrt(settled.sum()))
    else:
        method, value = "exponential", p_inf
        se = float(np.sqrt(covariance[0, 0])) if np.isfinite(covariance[0, 0]) else np.nan
        if fraction < warn_fraction_dissipated:
            msg = (
                f"{label}: record stopped at {fraction:.0%} dissipation; static pressure "
                f"extrapolated to {p_inf:.2f} kPa (fit RMSE {rmse:.2f} kPa)"
            )
            warnings.warn(msg, Geo3dWarning, stacklevel=2)
    _check_aitken(aitken, value, excess, label=label)
    logger.debug(
        "%s: p_static %.3f kPa by %s (%.0f%% dissipated)", label, value, method, 100 * fraction
    )
    return DissipationResult(value, method, fraction, rmse, aitken, time_constant, se)


def depth_to_water(probe_depth, p_static, p_atm):
    """Depth to water from the static pressure at a probe depth.

    ``depth_to_water = probe_depth - (P_static - P_atm) / gamma_w`` (m, kPa; ``gamma_w =
    9.80665 kPa/m``; ``P_atm = 0`` for gauge pressure).

    References
    ----------
    .. [1] Freeze & Cherry (1979), pressure head ``psi = p / (rho g)``.

    Examples
    --------
    >>> round(depth_to_water(12.0, 150.0, 101.325), 2)
    7.04
    """
    d = (
        np.asarray(probe_depth, dtype=float)
        - (np.asarray(p_static, dtype=float) - np.asarray(p_atm, dtype=float)) / GAMMA_W
    )
    return float(d) if d.ndim == 0 else d


#: Columns of the water-level table (:func:`water_levels`), in order.
LEVEL_COLUMNS = [
    "boring_id",
    "test_id",
    "x",
    "y",
    "depth",
    "p_static",
    "depth_to_water",
    "wt_elev",
    "fraction_dissipated",
    "method",
    "fit_rmse",
    "aitken",
    "p_static_se",
]


def _level_row(
    boring_id: str,
    test_id: int,
    boring: pd.Series,
    depth: float,
    result: DissipationResult,
    atm: float,
) -> dict[str, Any]:
    """Return one row of the water-level table from a test's static pressure."""
    dtw = depth_to_water(depth, result.p_static, atm)
    return {
        "boring_id": boring_id,
        "test_id": test_id,
        "x": float(boring["x"]),
        "y": float(boring["y"]),
        "depth": depth,
        "p_static": result.p_static,
        "depth_to_water": dtw,
        "wt_elev": float(boring["ground_elev"]) - dtw,
        "fraction_dissipated": result.fraction_dissipated,
        "method": result.method,
        "fit_rmse": result.fit_rmse,
        "aitken": result.aitken,
        "p_static_se": result.p_static_se,
    }


def water_levels(
    dissipation: pd.DataFrame,
    borings: pd.DataFrame,
    *,
    p_atm: float | Mapping[str, float],
    min_fraction_dissipated: float = 0.5,
    warn_fraction_dissipated: float = 0.8,
) -> pd.DataFrame:
    """Depth to water and water-table elevation from every dissipation test of a site.

    Records that cannot be trusted are left out with a :class:`Geo3dWarning` naming them.

    Parameters
    ----------
    dissipation
        Columns ``boring_id, test_id, depth, time_s, pressure`` (m, s, kPa).
    borings
        Columns ``boring_id, x, y, ground_elev``.
    p_atm
        Atmospheric pressure, kPa: one value, or one per boring id (0 for gauge records).
    min_fraction_dissipated, warn_fraction_dissipated
        See :func:`static_pressure`.

    Returns
    -------
    DataFrame
        One row per accepted test: ``boring_id, test_id, x, y, depth, p_static,
        depth_to_water, wt_elev, fraction_dissipated, method, fit_rmse, aitken,
        p_static_se``.

    Raises
    ------
    WaterLevelError
        If there is no dissipation test, or none can be trusted.
    """
    if dissipation is None or len(dissipation) == 0:
        msg = (
            "no dissipation test: the water table cannot be found; add dissipation.csv or "
            "give [water] depth_to_water in site.toml"
        )
        raise WaterLevelError(msg)
    where_boring = borings.set_index("boring_id")
    rows = []
    refused = []
    for (boring_id, test_id), record in dissipation.groupby(["boring_id", "test_id"], sort=True):
        label = f"dissipation test {test_id} (boring {boring_id})"
        if boring_id not in where_boring.index:
            msg = f"{label}: boring {boring_id!r} is not in the borings table"
            raise WaterLevelError(msg)
        atm = p_atm.get(boring_id, np.nan) if isinstance(p_atm, Mapping) else float(p_atm)
        if not np.isfinite(atm):
            msg = f"{label}: no atmospheric pressure known for boring {boring_id!r}"
            raise WaterLevelError(msg)
        try:
            result = static_pressure(
                record["time_s"].to_numpy(),
                record["pressure"].to_numpy(),
                min_fraction_dissipated=min_fraction_dissipated,
                warn_fraction_dissipated=warn_fraction_dissipated,
                label=label,
            )
        except WaterLevelError as exc:
            refused.append(str(exc))
            warnings.warn(f"left out: {exc}", Geo3dWarning, stacklevel=2)
            continue
        depth = float(record["depth"].median())
        rows.append(
            _level_row(boring_id, int(test_id), where_boring.loc[boring_id], depth, result, atm)
        )
    if not rows:
        msg = "no dissipation test could be trusted: " + "; ".join(refused)
        raise WaterLevelError(msg)
    return pd.DataFrame(rows, columns=LEVEL_COLUMNS)


def boring_water_levels(levels: pd.DataFrame) -> pd.DataFrame:
    """One water-table elevation per boring: the mean over its best tests.

    Tests that reached equilibrium (method ``"tail"``, a direct reading) are preferred: where a
    boring has any, only they are averaged; otherwise all its accepted (extrapolated) tests are.

    Returns
    -------
    DataFrame
        ``boring_id, x, y, wt_elev, depth_to_water, n_tests`` (tests averaged).
    """
    levels = levels.copy()
    direct = levels["method"].eq("tail")
    has_direct = direct.groupby(levels["boring_id"]).transform("any")
    levels = levels[direct | ~has_direct]
    grouped = levels.groupby("boring_id", sort=True)
    out = grouped.agg(
        x=("x", "first"),
        y=("y", "first"),
        wt_elev=("wt_elev", "mean"),
        depth_to_water=("depth_to_water", "mean"),
        n_tests=("test_id", "size"),
    )
    return out.reset_index()


def piezometric_profiles(levels: pd.DataFrame, borings: pd.DataFrame) -> pd.DataFrame:
    """Hydraulic head against elevation per boring, with its vertical gradient.

    The head at a test is ``elevation + (P_static - P_atm)/gamma_w``, which equals the
    ``wt_elev`` the test implies.  Where a boring has tests at two or more depths, the vertical
    gradient ``dh/dz`` is the least-squares slope of head against elevation: zero for
    hydrostatic conditions, positive when head increases upward (upward flow), negative when
    it decreases upward (downward flow).

    Returns
    -------
    DataFrame
        ``boring_id, test_id, depth, elev, head, n_tests, vertical_gradient`` (NaN where a
        boring has tests at one depth only).

    References
    ----------
    .. [1] Freeze & Cherry (1979), ch. 2 (hydraulic head) and piezometer nests.
    """
    ground = borings.set_index("boring_id")["ground_elev"]
    prof = levels[["boring_id", "test_id", "depth"]].copy()
    prof["elev"] = ground.reindex(prof["boring_id"]).to_numpy() - prof["depth"].to_numpy()
    prof["head"] = levels["wt_elev"].to_numpy()
    prof["n_tests"] = prof.groupby("boring_id")["test_id"].transform("size")
    gradients = {}
    for boring_id, group in prof.groupby("boring_id"):
        if group["elev"].nunique() >= 2:
            slope = np.polyfit(group["elev"].to_numpy(), group["head"].to_numpy(), 1)[0]
            gradients[boring_id] = float(slope)
        else:
            gradients[boring_id] = float("nan")
    prof["vertical_gradient"] = prof["boring_id"].map(gradients).astype(float)
    return prof.sort_values(["boring_id", "depth"]).reset_index(drop=True)


def gradient_plane(x, y, head) -> tuple[float, float, float, float, float]:
    """Least-squares plane ``head = a*x + b*y + c`` through n >= 3 wells.

    With three wells this is the exact three-point solution; with more, the least-squares
    plane.  The hydraulic gradient is ``sqrt(a**2 + b**2)`` and water flows down-gradient,
    along ``(-a, -b)``.

    Parameters
    ----------
    x, y
        Well coordinates in a projected CRS, m.
    head
        Hydraulic head (or water-table elevation), m.

    Returns
    -------
    tuple
        ``(a, b, c, magnitude, direction_deg)``; direction is the azimuth of flow in degrees
        clockwise from north (grid north of the CRS), 0..360.

    Raises
    ------
    WaterLevelError
        With fewer than three wells or wells in a straight line.

    References
    ----------
    .. [1] Freeze & Cherry (1979); the three-point problem of any hydrogeology text.

    Examples
    --------
    >>> a, b, c, mag, az = gradient_plane([0, 100, 0], [0, 0, 100], [10.0, 9.0, 10.0])
    >>> round(a, 6), round(abs(b), 6), round(mag, 6), round(az, 1)
    (-0.01, 0.0, 0.01, 90.0)
    """
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    h = np.asarray(head, dtype=float)
    ok = np.isfinite(x) & np.isfinite(y) & np.isfinite(h)
    x, y, h = x[ok], y[ok], h[ok]
    if x.size < 3:
        msg = f"the water-table plane needs at least 3 wells with a water level, got {x.size}"
        raise WaterLevelError(msg)
    x0, y0 = x.mean(), y.mean()
    design = np.column_stack([x - x0, y - y0, np.ones_like(x)])
    coef, _, rank, _ = np.linalg.lstsq(design, h, rcond=None)
    if rank < 3:
        msg = "the wells with a water level lie on a straight line; a plane cannot be fitted"
        raise WaterLevelError(msg)
    a, b, c0 = (float(v) for v in coef)
    c = c0 - a * x0 - b * y0
    magnitude = float(np.hypot(a, b))
    direction = float(np.degrees(np.arctan2(-a, -b)) % 360.0) if magnitude > 0 else float("nan")
    return a, b, c, magnitude, direction


@dataclass
class WaterTableSurface:
    """Site-wide water-table elevation.

    Attributes
    ----------
    method
        ``"plane"``, ``"kriging"`` or ``"constant"`` (one or two wells only).
    a, b, c
        Least-squares plane ``wt_elev = a*x + b*y + c``.
    gradient
        Hydraulic gradient of the plane, m/m.
    flow_direction_deg
        Azimuth of flow (down-gradient), degrees clockwise from north.
    n_points
        Number of borings the surface rests on.
    """

    method: str
    a: float
    b: float
    c: float
    gradient: float
    flow_direction_deg: float
    n_points: int
    _kriging: Any = field(default=None, repr=False)

    def elevation(self, x, y) -> np.ndarray:
        """Water-table elevation at points ``(x, y)``, m."""
        xx = np.atleast_1d(np.asarray(x, dtype=float))
        yy = np.atleast_1d(np.asarray(y, dtype=float))
        if self._kriging is not None:
            z, _ = self._kriging.execute("points", xx, yy)
            return np.asarray(z, dtype=float)
        return self.a * xx + self.b * yy + self.c


def fit_water_table(x, y, wt_elev, *, method: str = "plane") -> WaterTableSurface:
    """Fit a site-wide water-table surface through per-boring water-table elevations.

    Parameters
    ----------
    x, y
        Boring coordinates, m.
    wt_elev
        Water-table elevation at each boring, m.
    method
        ``"plane"`` (least-squares plane) or ``"kriging"`` (universal kriging with a linear
        drift and a linear variogram, pykrige; exact at the borings).  With fewer than three
        borings (or four for kriging) the surface falls back with a :class:`Geo3dWarning`.

    Returns
    -------
    WaterTableSurface
        Gradient and flow direction always come from the least-squares plane.

    References
    ----------
    .. [1] Freeze & Cherry (1979) (gradient from three or more wells).
    .. [2] Murphy, B. et al., PyKrige (universal kriging with regional linear drift).
    """
    if method not in ("plane", "kriging"):
        msg = f"[water] surface: unknown method {method!r}; expected 'plane' or 'kriging'"
        raise WaterLevelError(msg)
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    z = np.asarray(wt_elev, dtype=float)
    if z.size == 0:
        msg = "no water-table elevation to build a surface from"
        raise WaterLevelError(msg)
    try:
        a, b, c, magnitude, direction = gradient_plane(x, y, z)
    except WaterLevelError as exc:
        warnings.warn(
            f"{exc}; the water table is taken as flat at {z.mean():.2f} m",
            Geo3dWarning,
            stacklevel=2,
        )
        return WaterTableSurface(
            "constant", 0.0, 0.0, float(z.mean()), 0.0, float("nan"), int(z.size)
        )
    if method == "kriging":
        if z.size < 4:
            warnings.warn(
                f"kriging the water table needs at least 4 borings, got {z.size}; using the plane",
                Geo3dWarning,
                stacklevel=2,
            )
            return WaterTableSurface("plane", a, b, c, magnitude, direction, int(z.size))
        from pykrige.uk import UniversalKriging

        krig = UniversalKriging(
            x, y, z, variogram_model="linear", drift_terms=["regional_linear"], exact_values=True
        )
        return WaterTableSurface("kriging", a, b, c, magnitude, direction, int(z.size), krig)
    return WaterTableSurface("plane", a, b, c, magnitude, direction, int(z.size))
