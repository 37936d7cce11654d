"""The logs stage: from a site's injection logs to K, flags, intervals and hydrofacies.

:func:`process_logs` reads its options from ``site.config`` and chains the library functions of
:mod:`geo3d.logs` and :mod:`geo3d.facies`:

1. atmospheric pressure per boring (collar readings pooled over the logs of the same day, or
   given; zero for gauge records);
2. static pressure of every dissipation test, depth to water, water-table elevation, the
   piezometric profiles and the site water-table surface;
3. net injection pressure per sample (hydrostatic part from the boring's own water level, or
   from the site surface where the boring has no test; tool loss from the open-water check);
4. resolution flags, sensor checks, the injection ratio Q/P_net and log-derived K, calibrated
   to the slug tests when there are enough;
5. EC spike and ionic flags;
6. compositing into intervals and hydrofacies.

:func:`write_logs_outputs` writes the tables, ``calibration.json`` and one figure per boring.
"""

from __future__ import annotations

import json
import logging
import warnings
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from geo3d.errors import Geo3dWarning, WaterLevelError
from geo3d.facies import (
    DEFAULT_CLASSES,
    FaciesClass,
    apply_min_thickness,
    classify_mixture,
    classify_thresholds,
)
from geo3d.logs.calibration import calibrate
from geo3d.logs.composite import FLAGS, K_EXCLUDING_FLAGS, composite
from geo3d.logs.flags import ionic_flags, resolution_flags, spike_flags
from geo3d.logs.hydraulic import shape_factor
from geo3d.logs.pressure import (
    STANDARD_ATMOSPHERE,
    collar_readings,
    fit_tool_loss,
    hydrostatic_pressure,
    is_atmospheric,
    pooled_atmospheric_pressure,
)
from geo3d.logs.sensor_checks import evaluate_sensor_checks, sensor_check_flags
from geo3d.logs.water_level import (
    WaterTableSurface,
    boring_water_levels,
    fit_water_table,
    piezometric_profiles,
    water_levels,
)

__all__ = ["LogResults", "process_logs", "write_logs_outputs"]

logger = logging.getLogger(__name__)


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
        ``method, a, b, se_a, se_b, n_tests, r2, residuals``.
    sensor_checks
        Sensor checks with ``deviation`` and ``passed``.
    profiles
        Piezometric profiles (head vs elevation per boring, vertical gradient).
    facies_names
        Name of each facies code.
    facies_classes
        The threshold classes used (names, bounds, porosities).
    ec_trend
        Robust EC-vs-log10 K trend used for the ionic flag.
    shape_factor
        Hvorslev shape factor of the probe screen, m.
    """

    samples: pd.DataFrame
    intervals: pd.DataFrame
    water_levels: pd.DataFrame
    water_table: WaterTableSurface
    calibration: dict[str, Any]
    sensor_checks: pd.DataFrame
    profiles: pd.DataFrame
    facies_names: list[str] = field(default_factory=list)
    facies_classes: list[FaciesClass] = field(default_factory=list)
    ec_trend: dict[str, float] = field(default_factory=dict)
    shape_factor: float = float("nan")


def _option(config: Any, section: str, key: str, default: Any) -> Any:
    value = getattr(getattr(config, section, None), key, default)
    return default if value is None else value


def _facies_classes(config: Any) -> list[FaciesClass]:
    configured = _option(config, "facies", "classes", None)
    if not configured:
        return list(DEFAULT_CLASSES)
    return [
        FaciesClass(
            str(c.name), float(c.log10_k_max), float(c.porosity), float(c.effective_porosity)
        )
        for c in configured
    ]


def _atmospheric(site: Any, config: Any) -> dict[str, float]:
    ids = [str(b) for b in site.borings["boring_id"]]
    if _option(config, "units", "pressure_reference", "absolute") == "gauge":
        return dict.fromkeys(ids, 0.0)
    given = _option(config, "probe", "atmospheric_pressure", "auto")
    if not isinstance(given, str):
        return dict.fromkeys(ids, float(given))
    readings = {
        str(boring_id): collar_readings(
            log["depth"].to_numpy(), log["pressure"].to_numpy(), boring_id=str(boring_id)
        )
        for boring_id, log in site.samples.groupby("boring_id", sort=False)
    }
    good = {b: r for b, r in readings.items() if r.size and is_atmospheric(float(np.median(r)))}
    found: dict[str, float] = {}
    dates = site.borings.get("date")
    if dates is not None and dates.notna().all():
        # one barometric level per day: pool the collar readings of that day's logs
        day_of = dict(zip(ids, dates.astype(str), strict=True))
        for day in sorted(set(day_of.values())):
            members = [b for b in ids if day_of[b] == day and b in readings]
            pool = [good[b] for b in members if b in good]
            if pool:
                value = pooled_atmospheric_pressure(pool, label=f"logs of {day}")
                found.update(dict.fromkeys(members, value))
    for boring_id, values in readings.items():
        if boring_id not in found:
            found[boring_id] = pooled_atmospheric_pressure([values], label=f"boring {boring_id!r}")
    fallback = float(np.median(list(found.values()))) if found else STANDARD_ATMOSPHERE
    return {b: found.get(b, fallback) for b in ids}


def _water(site: Any, config: Any, p_atm: dict[str, float]):
    borings = site.borings
    given = _option(config, "water", "depth_to_water", "auto")
    method = _option(config, "water", "surface", "plane")
    if not isinstance(given, str):
        levels = pd.DataFrame(
            {
                "boring_id": borings["boring_id"].astype(str),
                "test_id": -1,
                "x": borings["x"].astype(float),
                "y": borings["y"].astype(float),
                "depth": np.nan,
                "p_static": np.nan,
                "depth_to_water": float(given),
                "wt_elev": borings["ground_elev"].astype(float) - float(given),
                "fraction_dissipated": np.nan,
                "method": "given",
                "fit_rmse": np.nan,
                "aitken": np.nan,
                "p_static_se": np.nan,
            }
        )
    else:
        dissipation = getattr(site, "dissipation", None)
        if dissipation is None or len(dissipation) == 0:
            msg = (
                f"site {getattr(site, 'name', '')!r}: no dissipation test, so the water table "
                "cannot be found; add dissipation tests or set [water] depth_to_water"
            )
            raise WaterLevelError(msg)
        levels = water_levels(
            dissipation,
            borings,
            p_atm=p_atm,
            min_fraction_dissipated=float(_option(config, "water", "min_fraction_dissipated", 0.5)),
        )
    per_boring = boring_water_levels(levels)
    surface = fit_water_table(
        per_boring["x"], per_boring["y"], per_boring["wt_elev"], method=method
    )
    if isinstance(given, str):
        profiles = piezometric_profiles(levels, borings)
    else:
        profiles = pd.DataFrame(
            columns=[
                "boring_id",
                "test_id",
                "depth",
                "elev",
                "head",
                "n_tests",
                "vertical_gradient",
            ]
        )
    return levels, per_boring, surface, profiles


def process_logs(site: Any) -> LogResults:
    """Run the logs stage on a site.

    Parameters
    ----------
    site
        A :class:`geo3d.site.Site` (``config``, ``borings``, ``samples``, ``dissipation``,
        ``slug_tests``, ``sensor_checks``), all in internal units.

    Returns
    -------
    LogResults

    Raises
    ------
    WaterLevelError
        If the water table cannot be found (no trusted dissipation test and no given depth).
    """
    config = site.config
    classes = _facies_classes(config)
    f_m = shape_factor(
        _option(config, "probe", "shape", "cylinder"),
        length=float(_option(config, "probe", "screen_length", 0.02)),
        diameter=float(_option(config, "probe", "screen_diameter", 0.01)),
    )
    sensor_noise = float(_option(config, "probe", "sensor_noise", 0.5))
    pressure_limit = float(_option(config, "probe", "pressure_limit", 1500.0))

    p_atm = _atmospheric(site, config)
    levels, per_boring, surface, profiles = _water(site, config, p_atm)

    borings = site.borings.assign(boring_id=site.borings["boring_id"].astype(str))
    samples = site.samples.copy()
    samples["boring_id"] = samples["boring_id"].astype(str)
    collar = borings.set_index("boring_id")
    ids = samples["boring_id"]
    samples["x"] = collar["x"].reindex(ids).to_numpy(dtype=float)
    samples["y"] = collar["y"].reindex(ids).to_numpy(dtype=float)
    ground = collar["ground_elev"].reindex(ids).to_numpy(dtype=float)
    own = per_boring.set_index(per_boring["boring_id"].astype(str))["wt_elev"]
    wt = np.array(own.reindex(ids).to_numpy(dtype=float))
    missing = ~np.isfinite(wt)
    if missing.any():
        wt[missing] = surface.elevation(
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
    samples["p_hydrostatic"] = hydrostatic_pressure(depth, samples["depth_to_water"].to_numpy())
    tool_loss = fit_tool_loss(_option(config, "probe", "tool_loss", []))
    flow = samples["flow"].to_numpy(dtype=float)
    pressure = samples["pressure"].to_numpy(dtype=float)
    p_net = pressure - samples["p_atm"].to_numpy() - samples["p_hydrostatic"].to_numpy()
    p_net = p_net - tool_loss(flow)
    samples["p_net"] = p_net

    flags = resolution_flags(
        depth=depth,
        depth_to_water=samples["depth_to_water"].to_numpy(),
        p_net=p_net,
        flow=flow,
        pressure=pressure,
        sensor_noise=sensor_noise,
        pressure_limit=pressure_limit,
        out_of_range_high_factor=float(_option(config, "flags", "out_of_range_high_factor", 3.0)),
        min_flow_fraction=float(_option(config, "flags", "min_flow_fraction", 0.1)),
        pressure_limit_fraction=float(_option(config, "flags", "pressure_limit_fraction", 0.95)),
    )
    for name, values in flags.items():
        samples[name] = values
    checks = evaluate_sensor_checks(
        getattr(site, "sensor_checks", None), units=getattr(site.config, "units", None)
    )
    samples["sensor_check_failed"] = sensor_check_flags(ids.to_numpy(), checks)

    with np.errstate(divide="ignore", invalid="ignore"):
        samples["q_over_p"] = np.where(
            (p_net > 0) & (flow > 0) & ~flags["above_water"], flow / p_net, np.nan
        )
    k_bad = np.zeros(len(samples), dtype=bool)
    for name in K_EXCLUDING_FLAGS:
        k_bad |= samples[name].to_numpy(dtype=bool)
    bounds = _ratio_bounds(samples, config, flags)
    # a slug test averages K over every sample of its screen: unresolved samples enter the
    # screen mean at their bound (tight soil adds almost nothing to an arithmetic mean, but
    # leaving it out would inflate the mean by the share of the screen it occupies)
    ratio_for_screens = np.where(k_bad, bounds, samples["q_over_p"].to_numpy(dtype=float))
    calibration = calibrate(
        samples.assign(q_over_p=ratio_for_screens),
        getattr(site, "slug_tests", None),
        shape_factor_m=f_m,
        min_slug_tests=int(_option(config, "flags", "min_slug_tests", 3)),
        usable=~flags["above_water"],
    )
    samples["log10_k"] = calibration.log10_k(samples["q_over_p"].to_numpy())
    samples["k_log"] = 10.0 ** samples["log10_k"]
    samples["log10_k_bound"] = calibration.log10_k(bounds)

    ec = samples["ec"].to_numpy(dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        # a real layer changes K, so Q/P_net moves with EC; a metal contact moves EC alone
        hydraulic = np.where((p_net > 0) & (flow > 0), np.log10(flow / p_net), np.nan)
    samples["spike"] = spike_flags(
        depth,
        ec,
        hydraulic,
        ids.to_numpy(),
        half_window=float(_option(config, "flags", "hampel_window", 0.15)),
        k=float(_option(config, "flags", "hampel_k", 4.0)),
    )
    transmissive_min = classes[-2].log10_k_max if len(classes) >= 2 else -np.inf
    ionic, trend = ionic_flags(
        samples["log10_k"].to_numpy(),
        ec,
        ids.to_numpy(),
        depth,
        transmissive_min=transmissive_min,
        sigma=float(_option(config, "flags", "ionic_sigma", 2.5)),
        exclude=k_bad | samples["spike"].to_numpy(),
    )
    samples["ionic"] = ionic
    for name in FLAGS:
        samples[name] = samples[name].astype(bool)

    intervals = composite(samples, interval=float(_option(config, "composite", "interval", 0.15)))
    codes, names = _classify(intervals, config, classes)
    intervals["facies_code"] = codes.astype(int)
    intervals["facies"] = [names[c] if c >= 0 else "" for c in codes]

    base = [c for c in site.samples.columns]
    extra = [
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
    ]
    samples = samples[[*base, *[c for c in extra if c not in base]]]
    logger.info(
        "logs: %d samples, %d intervals, water table %s (gradient %.4f toward %.0f deg)",
        len(samples),
        len(intervals),
        surface.method,
        surface.gradient,
        surface.flow_direction_deg,
    )
    return LogResults(
        samples=samples,
        intervals=intervals,
        water_levels=levels,
        water_table=surface,
        calibration=calibration.as_dict(),
        sensor_checks=checks,
        profiles=profiles,
        facies_names=names,
        facies_classes=classes,
        ec_trend=trend,
        shape_factor=f_m,
    )


def _ratio_bounds(samples: pd.DataFrame, config: Any, flags: dict) -> np.ndarray:
    """Injection ratio Q/P_net that out-of-range samples are known to lie beyond (NaN elsewhere).

    Too tight (``out_of_range_low``): the smallest resolvable flow under the largest usable net
    pressure (K is at most this), or the measured ratio where it is higher (the flow was still
    above the resolvable minimum, only the pressure was held at the limit).  Too permeable
    (``out_of_range_high``): the flow over the smallest resolvable net pressure,
    ``factor * sensor_noise`` (K is at least this).
    """
    noise = float(_option(config, "probe", "sensor_noise", 0.5))
    factor = float(_option(config, "flags", "out_of_range_high_factor", 3.0))
    limit = float(_option(config, "probe", "pressure_limit", 1500.0))
    limit_fraction = float(_option(config, "flags", "pressure_limit_fraction", 0.95))
    flow_fraction = float(_option(config, "flags", "min_flow_fraction", 0.1))
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


def _classify(intervals: pd.DataFrame, config: Any, classes: list[FaciesClass]):
    method = _option(config, "facies", "method", "thresholds")
    log10_k = intervals["log10_k"].to_numpy(dtype=float)
    if method == "mixture":
        ionic = intervals.get("frac_ionic", pd.Series(0.0, index=intervals.index))
        codes, names = classify_mixture(
            log10_k,
            intervals["ec"].to_numpy(),
            classes=classes,
            seed=int(_option(config, "simulation", "seed", 0)),
            k_only=ionic.to_numpy(dtype=float) >= 0.5,
        )
    else:
        codes = classify_thresholds(
            log10_k,
            classes,
            ec=intervals["ec"].to_numpy(),
            ec_cutoffs=_option(config, "facies", "ec_cutoffs", None),
        )
        names = [c.name for c in classes]
    min_thickness = float(_option(config, "facies", "min_thickness", 0.3))
    codes = apply_min_thickness(
        codes,
        intervals["top"].to_numpy(),
        intervals["bottom"].to_numpy(),
        intervals["boring_id"].to_numpy(),
        min_thickness=min_thickness,
    )
    return codes, names


def _json_ready(value: Any) -> Any:
    if isinstance(value, dict):
        return {k: _json_ready(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_json_ready(v) for v in value]
    if isinstance(value, float | np.floating):
        return float(value) if np.isfinite(value) else None
    if isinstance(value, np.integer):
        return int(value)
    return value


def write_logs_outputs(result: LogResults, out_dir: str | Path) -> list[Path]:
    """Write the logs stage's tables, calibration and figures into ``out_dir``.

    Files: ``intervals.csv``, ``samples.csv``, ``water_levels.csv``, ``calibration.json`` and
    ``figures/logs/<boring_id>.png``.  Each file is written under a temporary name and moved
    into place when complete.  Values are in internal units (m, kPa, m3/s, mS/m, m/s).

    Returns
    -------
    list of Path
        The files written.
    """
    from geo3d.io.atomic import atomic_file

    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    written: list[Path] = []
    tables = {
        "intervals.csv": result.intervals,
        "samples.csv": result.samples,
        "water_levels.csv": result.water_levels,
    }
    for name, table in tables.items():
        with atomic_file(out / name) as tmp:
            table.to_csv(tmp, index=False, float_format="%.6g")
        written.append(out / name)
    calibration = dict(result.calibration)
    calibration["shape_factor_m"] = result.shape_factor
    calibration["ec_trend"] = result.ec_trend
    calibration["water_table"] = {
        "method": result.water_table.method,
        "gradient": result.water_table.gradient,
        "flow_direction_deg": result.water_table.flow_direction_deg,
        "plane": [result.water_table.a, result.water_table.b, result.water_table.c],
        "n_points": result.water_table.n_points,
    }
    with atomic_file(out / "calibration.json") as tmp:
        tmp.write_text(json.dumps(_json_ready(calibration), indent=2))
    written.append(out / "calibration.json")
    written += write_log_figures(result, out / "figures" / "logs")
    return written


def write_log_figures(result: LogResults, folder: str | Path, *, units=None) -> list[Path]:
    """Write one figure per boring, ``<folder>/<boring_id>.png``, each atomically.

    Parameters
    ----------
    result
        Result of :func:`process_logs`.
    folder
        Folder of the figures (created when missing).
    units
        ``[units]`` of the site file: the figures show the declared units (see
        :func:`geo3d.report.log_figure.log_figure`).

    Returns
    -------
    list of Path
        The files written, in boring order.
    """
    import matplotlib.pyplot as plt

    from geo3d.io.atomic import atomic_file
    from geo3d.report.log_figure import log_figure

    figures = Path(folder)
    figures.mkdir(parents=True, exist_ok=True)
    written: list[Path] = []
    intervals_by = dict(tuple(result.intervals.groupby("boring_id", sort=True)))
    checks = getattr(result, "sensor_checks", None)
    for boring_id, log in result.samples.groupby("boring_id", sort=True):
        empty = result.intervals.iloc[0:0]
        own = None
        if checks is not None and len(checks):
            own = checks[checks["boring_id"].astype(str) == str(boring_id)]
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", Geo3dWarning)
            fig = log_figure(
                log,
                intervals_by.get(boring_id, empty),
                boring_id=str(boring_id),
                units=units,
                checks=own,
            )
        path = figures / f"{boring_id}.png"
        with atomic_file(path) as tmp:
            fig.savefig(tmp, dpi=110)
        plt.close(fig)
        written.append(path)
    return written
