"""The logs stage: from a site's injection logs to K, flags, intervals and hydrofacies.

:func:`process_logs` takes its settings as one :class:`~geo3d.config.LogsOptions` and chains the
library functions of :mod:`geo3d.logs` and :mod:`geo3d.facies` in named steps:

1. :func:`_atmospheric`: reference (atmospheric) pressure per boring and its source (flow-off
   collar readings, a barometric value from site.toml, the same day's logs, or the ISO 2533
   standard atmosphere; zero for gauge records; see :mod:`geo3d.logs.reference`);
2. :func:`_water`: static pressure of every dissipation test, depth to water, water-table
   elevation, the piezometric profiles and the site water-table surface;
3. :func:`_net_pressure`: net injection pressure per sample (hydrostatic part from the boring's
   own water level, or from the site surface where the boring has no test; tool loss from the
   open-water check);
4. :func:`_flag_resolution` and :func:`_k_from_logs`: resolution flags, sensor checks, the
   injection ratio Q/P_net and log-derived K, calibrated to the slug tests when there are
   enough;
5. :func:`_flag_ec`: EC spike and EC-above-trend flags;
6. :func:`_intervals`: compositing into intervals and hydrofacies.
"""

from __future__ import annotations

import logging
from dataclasses import dataclass, field
from typing import Any, NamedTuple

import numpy as np
import pandas as pd

from geo3d.config import LogsOptions
from geo3d.errors import WaterLevelError
from geo3d.facies import (
    FaciesClasses,
    apply_min_thickness,
    classify_mixture,
    classify_thresholds,
)
from geo3d.logs.calibration import Calibration, calibrate, physics_coefficients
from geo3d.logs.censored import screen_ratios
from geo3d.logs.composite import K_EXCLUDING_FLAGS, composite
from geo3d.logs.flags import FLAGS, ec_above_trend_flags, resolution_flags, spike_flags
from geo3d.logs.hydraulic import shape_factor
from geo3d.logs.pressure import fit_tool_loss
from geo3d.logs.reference import flow_off_collar_readings, reference_pressures
from geo3d.logs.sensor_checks import evaluate_sensor_checks, sensor_check_flags
from geo3d.logs.water_level import (
    WaterTableSurface,
    boring_water_levels,
    fit_water_table,
    piezometric_profiles,
    static_pore_pressure,
    vertical_gradients,
    water_levels,
    water_table_tests,
)
from geo3d.site import Site

__all__ = ["LogResults", "process_logs"]

logger = logging.getLogger(__name__)

#: Net pressure, in sensor-noise SDs, above which a reading's Q/P_net is taken as read (the
#: noise then biases 1/P_net by under 1 %, (sigma/P)**2).
_RESOLVED_SNR = 10.0

#: Columns the logs stage adds to the site's samples, in output order.
_ADDED_COLUMNS = (
    "x",
    "y",
    "depth_to_water",
    "wt_elev",
    "p_atm",
    "p_hydrostatic",
    "p_net",
    "q_over_p",
    "k_log",
    "log10_k",
    "log10_k_bound",
    *FLAGS,
)

_PROFILE_COLUMNS = (
    "boring_id",
    "test_id",
    "depth",
    "elev",
    "head",
    "n_tests",
    "vertical_gradient",
)


@dataclass
class LogResults:
    """Everything the logs stage computes.

    Attributes
    ----------
    samples
        Per-sample table (site samples plus ``x, y, depth_to_water, wt_elev, p_atm,
        p_hydrostatic, p_net, q_over_p, k_log, log10_k`` and the boolean flags).
    intervals
        Composited intervals with ``facies`` and ``facies_code`` (the 3D model's input).
    water_levels
        One row per accepted dissipation test (or per boring for a given depth to water).
    water_table
        Site-wide water-table surface.
    calibration
        How log-derived K was found (coefficients, slug-test residuals with the physics-only
        screen means ``k_physics``).
    sensor_checks
        Sensor checks with ``deviation`` and ``passed``.
    profiles
        Piezometric profiles (head vs elevation per boring, vertical gradient).
    facies_classes
        The hydrofacies classes of ``facies_code``.
    ec_trend
        Robust EC-vs-log10 K trend used for the EC-above-trend flag.
    shape_factor
        Hvorslev shape factor of the probe screen, m.
    reference_pressure
        One row per boring: ``boring_id, p_atm`` (kPa) and ``p_atm_source`` (see
        :data:`geo3d.logs.reference.REFERENCE_SOURCES`).
    boring_levels
        One water level per boring from its tests nearest the water table, with its vertical
        head gradient (:func:`geo3d.logs.water_level.boring_water_levels`).
    """

    samples: pd.DataFrame
    intervals: pd.DataFrame
    water_levels: pd.DataFrame
    water_table: WaterTableSurface
    calibration: Calibration
    sensor_checks: pd.DataFrame
    profiles: pd.DataFrame
    facies_classes: FaciesClasses
    ec_trend: dict[str, float]
    shape_factor: float
    reference_pressure: pd.DataFrame = field(default_factory=pd.DataFrame)
    boring_levels: pd.DataFrame = field(default_factory=pd.DataFrame)

    @property
    def facies_names(self) -> tuple[str, ...]:
        """Name of each facies code."""
        return self.facies_classes.names

    @property
    def physics_a(self) -> float:
        """Coefficient ``a = log10(gamma_w / F)`` of physics-only K (Hvorslev 1951)."""
        return physics_coefficients(self.shape_factor)[0]

    def calibration_record(self) -> dict[str, Any]:
        """Return the calibration as written to ``calibration.json``.

        The coefficients and slug-test residuals, the shape factor (``shape_factor_m``) and
        the water-table fit (``method``, ``gradient``, ``flow_direction_deg``).
        """
        record = self.calibration.as_dict()
        record["shape_factor_m"] = self.shape_factor
        record["water_table"] = {
            "method": self.water_table.method,
            "gradient": self.water_table.gradient,
            "flow_direction_deg": self.water_table.flow_direction_deg,
        }
        return record


class _Water(NamedTuple):
    levels: pd.DataFrame
    per_boring: pd.DataFrame
    surface: WaterTableSurface
    profiles: pd.DataFrame


def _atmospheric(site: Site, options: LogsOptions) -> pd.DataFrame:
    """Find the reference pressure of every boring (``boring_id, p_atm, p_atm_source``)."""
    flow = site.samples["flow"].to_numpy(dtype=float)
    positive = flow[np.isfinite(flow) & (flow > 0)]
    flow_off = options.min_flow_fraction * (float(np.median(positive)) if positive.size else 0.0)
    collar = {
        str(boring_id): flow_off_collar_readings(
            log["depth"].to_numpy(),
            log["pressure"].to_numpy(),
            log["flow"].to_numpy(),
            log["time_s"].to_numpy() if "time_s" in log else None,
            flow_off=flow_off,
        )
        for boring_id, log in site.samples.groupby("boring_id", sort=False)
    }
    return reference_pressures(
        site.borings,
        collar,
        gauge=options.gauge,
        given=options.atmospheric_pressure,
        barometric=options.barometric_pressure,
    )


def _given_levels(borings: pd.DataFrame, depth_to_water: float) -> pd.DataFrame:
    return pd.DataFrame(
        {
            "boring_id": borings["boring_id"].astype(str),
            "test_id": -1,
            "x": borings["x"].astype(float),
            "y": borings["y"].astype(float),
            "depth": np.nan,
            "p_static": np.nan,
            "depth_to_water": depth_to_water,
            "wt_elev": borings["ground_elev"].astype(float) - depth_to_water,
            "fraction_dissipated": np.nan,
            "method": "given",
            "fit_rmse": np.nan,
            "aitken": np.nan,
            "p_static_se": np.nan,
        }
    )


def _water(site: Site, options: LogsOptions, p_atm: dict[str, float]) -> _Water:
    borings = site.borings
    given = options.depth_to_water
    if given is not None:
        levels = _given_levels(borings, float(given))
    else:
        dissipation = site.dissipation
        if dissipation is None or len(dissipation) == 0:
            msg = (
                f"site {site.name!r}: no dissipation test, so the water table "
                "cannot be found; add dissipation tests or set [water] depth_to_water"
            )
            raise WaterLevelError(msg)
        levels = water_levels(
            dissipation,
            borings,
            p_atm=p_atm,
            min_fraction_dissipated=options.min_fraction_dissipated,
        )
    levels["water_table_test"] = water_table_tests(levels)
    levels["vertical_gradient"] = (
        levels["boring_id"].astype(str).map(vertical_gradients(levels)).astype(float)
    )
    per_boring = boring_water_levels(levels)
    surface = fit_water_table(
        per_boring["x"], per_boring["y"], per_boring["wt_elev"], method=options.water_surface
    )
    if given is None:
        profiles = piezometric_profiles(levels, borings)
    else:
        profiles = pd.DataFrame(columns=list(_PROFILE_COLUMNS))
    return _Water(levels, per_boring, surface, profiles)


def _net_pressure(
    site: Site, options: LogsOptions, water: _Water, p_atm: dict[str, float]
) -> pd.DataFrame:
    """Return the samples with position, water level, atmospheric, hydrostatic and net pressure."""
    borings = site.borings.assign(boring_id=site.borings["boring_id"].astype(str))
    samples = site.samples.copy()
    samples["boring_id"] = samples["boring_id"].astype(str)
    collar = borings.set_index("boring_id")
    ids = samples["boring_id"]
    samples["x"] = collar["x"].reindex(ids).to_numpy(dtype=float)
    samples["y"] = collar["y"].reindex(ids).to_numpy(dtype=float)
    ground = collar["ground_elev"].reindex(ids).to_numpy(dtype=float)
    per_boring = water.per_boring
    own = per_boring.set_index(per_boring["boring_id"].astype(str))["wt_elev"]
    wt = np.array(own.reindex(ids).to_numpy(dtype=float))
    missing = ~np.isfinite(wt)
    if missing.any():
        wt[missing] = water.surface.elevation(
            samples["x"].to_numpy()[missing], samples["y"].to_numpy()[missing]
        )
        logger.info(
            "water level from the site surface for borings without a test: %s",
            ", ".join(sorted(set(ids[missing]))),
        )
    samples["wt_elev"] = wt
    samples["depth_to_water"] = ground - wt
    samples["p_atm"] = ids.map(p_atm).to_numpy(dtype=float)
    depth = samples["depth"].to_numpy(dtype=float)
    # static pore pressure: hydrostatic below the water table, or following the boring's
    # vertical head gradient where direct readings at two or more depths measured one clearly
    # (two standard errors); a gradient within the scatter of the levels is left out
    gradient = pd.Series(
        vertical_gradients(water.levels, direct_only=True, significance=2.0), dtype=float
    )
    samples["p_hydrostatic"] = static_pore_pressure(
        depth, samples["depth_to_water"].to_numpy(), gradient.reindex(ids).to_numpy(dtype=float)
    )
    tool_loss = fit_tool_loss(list(options.tool_loss))
    flow = samples["flow"].to_numpy(dtype=float)
    pressure = samples["pressure"].to_numpy(dtype=float)
    p_net = pressure - samples["p_atm"].to_numpy() - samples["p_hydrostatic"].to_numpy()
    samples["p_net"] = p_net - tool_loss(flow)
    return samples


def _flag_resolution(
    samples: pd.DataFrame, site: Site, options: LogsOptions
) -> tuple[dict[str, np.ndarray], pd.DataFrame]:
    """Add the resolution and sensor-check flags; return the flags and the sensor checks."""
    flags = resolution_flags(
        depth=samples["depth"].to_numpy(dtype=float),
        depth_to_water=samples["depth_to_water"].to_numpy(),
        p_net=samples["p_net"].to_numpy(),
        flow=samples["flow"].to_numpy(dtype=float),
        pressure=samples["pressure"].to_numpy(dtype=float),
        sensor_noise=options.sensor_noise,
        pressure_limit=options.pressure_limit,
        out_of_range_high_factor=options.out_of_range_high_factor,
        min_flow_fraction=options.min_flow_fraction,
        pressure_limit_fraction=options.pressure_limit_fraction,
    )
    for name, values in flags.items():
        samples[name] = values
    checks = evaluate_sensor_checks(site.sensor_checks, units=site.config.units)
    samples["sensor_check_failed"] = sensor_check_flags(samples["boring_id"].to_numpy(), checks)
    return flags, checks


def _k_from_logs(
    samples: pd.DataFrame,
    site: Site,
    options: LogsOptions,
    flags: dict[str, np.ndarray],
    shape_factor_m: float,
) -> tuple[Calibration, np.ndarray]:
    """Add Q/P_net and log-derived K; return the calibration and the unresolved-K mask."""
    p_net = samples["p_net"].to_numpy(dtype=float)
    flow = samples["flow"].to_numpy(dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        samples["q_over_p"] = np.where(
            (p_net > 0) & (flow > 0) & ~flags["above_water"], flow / p_net, np.nan
        )
    k_bad = np.zeros(len(samples), dtype=bool)
    for name in K_EXCLUDING_FLAGS:
        k_bad |= samples[name].to_numpy(dtype=bool)
    bounds = _ratio_bounds(samples, options, flags)
    # a slug test averages K over every sample of its screen: samples near the pressure floor
    # enter through the noise model, samples too tight to resolve as censored values, so that
    # neither the noise nor the probe's range biases the screen mean
    ratio_for_screens, slug_tests = screen_ratios(
        samples,
        site.slug_tests,
        resolved=~k_bad & (p_net >= _RESOLVED_SNR * options.sensor_noise),
        censored_below=np.where(flags["out_of_range_low"], bounds, np.nan),
        usable=~flags["above_water"],
        beyond=flags["out_of_range_high"] | flags["out_of_range_low"],
        sensor_noise=options.sensor_noise,
    )
    calibration = calibrate(
        samples.assign(q_over_p=ratio_for_screens),
        slug_tests,
        shape_factor_m=shape_factor_m,
        min_slug_tests=options.min_slug_tests,
        usable=~flags["above_water"],
    )
    samples["log10_k"] = calibration.log10_k(samples["q_over_p"].to_numpy())
    samples["k_log"] = 10.0 ** samples["log10_k"]
    samples["log10_k_bound"] = calibration.log10_k(bounds)
    return calibration, k_bad


def _flag_ec(samples: pd.DataFrame, options: LogsOptions, k_bad: np.ndarray) -> dict[str, float]:
    """Add the EC spike and EC-above-trend flags; return the EC-vs-log10 K trend."""
    ids = samples["boring_id"].to_numpy()
    depth = samples["depth"].to_numpy(dtype=float)
    ec = samples["ec"].to_numpy(dtype=float)
    p_net = samples["p_net"].to_numpy(dtype=float)
    flow = samples["flow"].to_numpy(dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        # a real layer changes K, so Q/P_net moves with EC; a metal contact moves EC alone
        hydraulic = np.where((p_net > 0) & (flow > 0), np.log10(flow / p_net), np.nan)
    samples["spike"] = spike_flags(
        depth, ec, hydraulic, ids, half_window=options.hampel_window, k=options.hampel_k
    )
    classes = options.facies_classes
    transmissive_min = classes[-2].log10_k_max if len(classes) >= 2 else -np.inf
    above_trend, trend = ec_above_trend_flags(
        samples["log10_k"].to_numpy(),
        ec,
        ids,
        depth,
        transmissive_min=transmissive_min,
        sigma=options.ec_trend_sigma,
        min_thickness=options.ec_min_thickness,
        exclude=k_bad | samples["spike"].to_numpy(),
    )
    samples["ec_above_trend"] = above_trend
    for name in FLAGS:
        samples[name] = samples[name].astype(bool)
    return trend


def _intervals(samples: pd.DataFrame, options: LogsOptions) -> pd.DataFrame:
    """Composite the samples into intervals and classify their hydrofacies."""
    intervals = composite(samples, interval=options.composite_interval)
    codes, names = _classify(intervals, options)
    intervals["facies_code"] = codes.astype(int)
    intervals["facies"] = [names[c] if c >= 0 else "" for c in codes]
    return intervals


def process_logs(site: Site, *, options: LogsOptions | None = None) -> LogResults:
    """Run the logs stage on a site.

    Parameters
    ----------
    site
        A validated site, all in internal units.
    options
        The stage's settings; default ``site.config.logs_options()``.

    Returns
    -------
    LogResults

    Raises
    ------
    WaterLevelError
        If the water table cannot be found (no trusted dissipation test and no given depth).
    """
    options = site.config.logs_options() if options is None else options
    f_m = shape_factor(
        options.probe_shape, length=options.screen_length, diameter=options.screen_diameter
    )
    reference = _atmospheric(site, options)
    p_atm = dict(zip(reference["boring_id"], reference["p_atm"], strict=True))
    water = _water(site, options, p_atm)
    source = reference.set_index("boring_id")
    tested = water.levels["boring_id"].astype(str)
    water.levels["p_atm"] = tested.map(source["p_atm"]).to_numpy(dtype=float)
    water.levels["p_atm_source"] = tested.map(source["p_atm_source"]).to_numpy()
    samples = _net_pressure(site, options, water, p_atm)
    flags, checks = _flag_resolution(samples, site, options)
    calibration, k_bad = _k_from_logs(samples, site, options, flags, f_m)
    trend = _flag_ec(samples, options, k_bad)
    intervals = _intervals(samples, options)
    base = list(site.samples.columns)
    samples = samples[[*base, *[c for c in _ADDED_COLUMNS if c not in base]]]
    logger.info(
        "logs: %d samples, %d intervals, water table %s (gradient %.4f toward %.0f deg)",
        len(samples),
        len(intervals),
        water.surface.method,
        water.surface.gradient,
        water.surface.flow_direction_deg,
    )
    return LogResults(
        samples=samples,
        intervals=intervals,
        water_levels=water.levels,
        water_table=water.surface,
        calibration=calibration,
        sensor_checks=checks,
        profiles=water.profiles,
        facies_classes=options.facies_classes,
        ec_trend=trend,
        shape_factor=f_m,
        reference_pressure=reference,
        boring_levels=water.per_boring,
    )


def _ratio_bounds(
    samples: pd.DataFrame, options: LogsOptions, flags: dict[str, np.ndarray]
) -> np.ndarray:
    """Injection ratio Q/P_net that out-of-range samples are known to lie beyond (NaN elsewhere).

    Too tight (``out_of_range_low``): the smallest resolvable flow under the largest usable net
    pressure (K is at most this), or the measured ratio where it is higher (the flow was still
    above the resolvable minimum, only the pressure was held at the limit).  Too permeable
    (``out_of_range_high``): the flow over the smallest resolvable net pressure,
    ``factor * sensor_noise`` (K is at least this).
    """
    noise = options.sensor_noise
    factor = options.out_of_range_high_factor
    limit = options.pressure_limit
    limit_fraction = options.pressure_limit_fraction
    flow_fraction = options.min_flow_fraction
    flow = samples["flow"].to_numpy(dtype=float)
    positive = flow[np.isfinite(flow) & (flow > 0)]
    reference = float(np.median(positive)) if positive.size else np.nan
    available = (
        limit_fraction * limit
        - samples["p_atm"].to_numpy(dtype=float)
        - samples["p_hydrostatic"].to_numpy(dtype=float)
    )
    p_net = samples["p_net"].to_numpy(dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        tight = np.where(available > 0, flow_fraction * reference / available, np.nan)
        measured = np.where((p_net > 0) & (flow > 0), flow / p_net, np.nan)
        permeable = np.where(flow > 0, flow, reference) / (factor * noise)
    low = np.where(np.isfinite(measured), np.fmax(measured, tight), tight)
    above = flags["above_water"]
    return np.where(
        flags["out_of_range_low"] & ~above,
        low,
        np.where(flags["out_of_range_high"] & ~above, permeable, np.nan),
    )


def _classify(intervals: pd.DataFrame, options: LogsOptions) -> tuple[np.ndarray, tuple[str, ...]]:
    classes = options.facies_classes
    log10_k = intervals["log10_k"].to_numpy(dtype=float)
    if options.facies_method == "mixture":
        above_trend = intervals.get("frac_ec_above_trend", pd.Series(0.0, index=intervals.index))
        codes, _ = classify_mixture(
            log10_k,
            intervals["ec"].to_numpy(),
            classes=classes,
            seed=options.seed,
            k_only=above_trend.to_numpy(dtype=float) >= 0.5,
        )
    else:
        codes = classify_thresholds(
            log10_k,
            classes,
            ec=intervals["ec"].to_numpy(),
            ec_cutoffs=options.ec_cutoffs,
        )
    codes = apply_min_thickness(
        codes,
        intervals["top"].to_numpy(),
        intervals["bottom"].to_numpy(),
        intervals["boring_id"].to_numpy(),
        min_thickness=options.min_thickness,
    )
    return codes, classes.names
