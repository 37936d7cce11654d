"""The whole job as a sequence of library calls: site -> logs -> model -> volumes -> outputs.

Each stage is a plain function usable from a notebook, returning a typed result; :func:`run`
chains them and writes every output into one folder.  Stage settings come from the site file
through the options objects of :mod:`geo3d.config` (``logs_options``, ``model_options``,
``volume_options``); this module passes them on as keyword arguments.

Outputs are built in a staging folder (:func:`geo3d.io.outdir.safe_output_folder`) that replaces
the output folder only when the whole run succeeded, so a failed run leaves nothing half-written;
an output folder that is or holds an input, or files geo3d did not write, is refused first.
The folder holds a ``run.log`` (every log record and warning of the run) and ``run.json``
(timings per stage, the files written, the headline figures).
"""

from __future__ import annotations

import contextlib
import logging
import math
import os
import platform
import time
import warnings
from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass
from datetime import UTC, datetime
from os import PathLike
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import shapely
import xarray as xr

from geo3d import __version__
from geo3d.analysis.advise import (
    CRITERIA,
    TARGETS,
    BoringAdvice,
    advise_borings,
    candidate_grid,
    covariance_from_attrs,
)
from geo3d.analysis.facies_maps import facies_column_maps
from geo3d.analysis.injection import InjectionPlan, injection_plan
from geo3d.analysis.thickness import thickness_maps
from geo3d.analysis.volumes import zone_volumes
from geo3d.analysis.water_table import depth_to_water_map, water_table_map
from geo3d.checks import check_site, report
from geo3d.checks.resources import estimate_resources
from geo3d.errors import Geo3dError, Geo3dWarning, GeometryError, ModelError
from geo3d.facies_first import build_facies_first_model
from geo3d.geostats.covariance import CovarianceModel
from geo3d.geostats.variogram import VariogramFit
from geo3d.io import geotiff, gpkg, netcdf, tables, vtk
from geo3d.io.advice import write_advice
from geo3d.io.atomic import atomic_file
from geo3d.io.outdir import safe_output_folder
from geo3d.io.output_frame import OutputFrame
from geo3d.io.vector import read_area
from geo3d.logs.process import LogResults, process_logs
from geo3d.logs.runs import composite_runs
from geo3d.model import ModelResult, VoxelModel, build_voxel_model
from geo3d.report import write_report
from geo3d.report.advice import advice_html, advice_map_png
from geo3d.report.log_figure import log_figure_pngs
from geo3d.results import RunResults
from geo3d.site import Site, read_site

__all__ = [
    "estimate_resources",
    "STAGES",
    "RunResults",
    "run",
    "run_check",
    "run_logs",
    "run_model",
    "run_volumes",
    "run_export",
    "run_report",
    "headline_volumes",
    "planned_stages",
    "run_advise",
    "AdviceOptions",
    "advise",
    "AdviceRun",
]

logger = logging.getLogger(__name__)

#: Stages of a run, in order.
STAGES: tuple[str, ...] = ("check", "logs", "model", "volumes", "export", "report")

#: Called as ``progress(stage, fraction_done, message)``; fraction in [0, 1].
ProgressCallback = Callable[[str, float, str], None]


# --------------------------------------------------------------------------- stages


def run_check(
    site_path: str | PathLike,
    *,
    n_realizations: int | None = None,
    stages: Sequence[str] = STAGES,
) -> Site:
    """Read and validate a site folder, then run the plausibility checks and resource estimate.

    Parameters
    ----------
    site_path
        Site folder (or its ``site.toml``).
    n_realizations
        Overrides ``[simulation] realizations`` in the resource estimate.
    stages
        Stages the run will go through (checks about the 3D model are errors only when a
        model is built).

    Returns
    -------
    geo3d.site.Site

    Raises
    ------
    geo3d.checks.PlausibilityError
        Well-formed but implausible data, or settings that cannot work or would not fit.
    """
    site = read_site(site_path)
    report(check_site(site, n_realizations=n_realizations, stages=planned_stages(stages)))
    return site


def run_logs(site: Site) -> LogResults:
    """Process every injection log: water level, K, flags, intervals, hydrofacies.

    Parameters
    ----------
    site
        A validated site.

    Returns
    -------
    geo3d.logs.process.LogResults
    """
    return process_logs(site, options=site.config.logs_options())


def run_model(
    site: Site,
    logs: LogResults,
    *,
    n_realizations: int | None = None,
    progress: ProgressCallback | None = None,
    engine: str | None = None,
) -> ModelResult:
    """Build the voxel model (kriging, cross-validation, simulations) from the intervals.

    Parameters
    ----------
    site
        A :class:`geo3d.site.Site`.
    logs
        Result of :func:`run_logs`.
    n_realizations
        Overrides ``[simulation] realizations`` (0 = no simulation).
    progress
        Progress callback (see :data:`ProgressCallback`).
    engine
        Overrides ``[simulation] engine``. ``"gaussian"``: kriging and Gaussian simulations
        of log10 K, facies by thresholds
        (:func:`geo3d.model.build_voxel_model`); ``"facies"``: facies first, composited within
        facies runs, then log10 K within each facies
        (:func:`geo3d.facies_first.build_facies_first_model`).

    Returns
    -------
    geo3d.model.ModelResult
    """
    if engine not in (None, "gaussian", "facies"):
        msg = f"model engine {engine!r} is unknown; expected 'gaussian' or 'facies'"
        raise ModelError(msg)
    options = site.config.model_options()
    engine = options.engine if engine is None else engine
    gridder = VoxelModel(
        facies_classes=logs.facies_classes,
        variogram_model=options.variogram_model,
        range_h=options.range_h,
        range_v=options.range_v,
        azimuth=options.azimuth,
        minor_ratio=options.minor_ratio,
        elevation_tolerance=options.elevation_tolerance,
        neighbors=options.neighbors,
        max_per_group=options.max_per_group,
        drift=options.drift,
        max_distance=options.max_distance,
        chunk_size=options.chunk_size,
        scheduler=options.scheduler,
        n_realizations=options.n_realizations if n_realizations is None else n_realizations,
        seed=options.seed,
    )
    callback = None
    if progress is not None:

        def callback(fraction: float, message: str) -> None:
            progress("model", float(fraction), message)

    if engine == "facies":
        return _facies_first(site, logs, n_realizations, callback)
    return build_voxel_model(
        logs.intervals,
        gridder,
        boundary=site.boundary,
        borings=site.borings,
        crs=site.crs,
        cell_size=options.cell_size,
        base=options.base,
        padding=options.padding,
        dem=site.dem,
        water_table=logs.water_table,
        progress=callback,
    )


def _facies_first(
    site: Site, logs: LogResults, n_realizations: int | None, callback: Any
) -> ModelResult:

    options = site.config.model_options()
    intervals = composite_runs(
        logs.samples,
        logs.facies_classes,
        interval=float(site.config.composite.interval),
        min_thickness=float(site.config.facies.min_thickness),
    )
    return build_facies_first_model(
        intervals,
        boundary=site.boundary,
        borings=site.borings,
        crs=site.crs,
        cell_size=options.cell_size,
        facies_classes=logs.facies_classes,
        water_table=logs.water_table,
        dem=site.dem,
        base="auto" if options.base is None else options.base,
        padding=options.padding,
        variogram={
            "model": options.variogram_model,
            "elevation_tolerance": options.elevation_tolerance,
        },
        kriging={
            "neighbors": options.neighbors,
            "max_per_group": options.max_per_group,
            "chunk_size": options.chunk_size,
        },
        n_realizations=options.n_realizations if n_realizations is None else n_realizations,
        seed=options.seed,
        data_error=logs.calibration.log10_k_error(),
        progress=callback,
    )


def run_volumes(
    site: Site, logs: LogResults, model: ModelResult
) -> tuple[dict[str, xr.DataArray], pd.DataFrame, dict[str, InjectionPlan]]:
    """Compute the maps, the volumes and the injection plans.

    Parameters
    ----------
    site
        A :class:`geo3d.site.Site`.
    logs
        Result of :func:`run_logs` (its water table gives the water-table maps).
    model
        Result of :func:`run_model`.

    Returns
    -------
    maps : dict of str to xarray.DataArray
        Thickness maps (with percentiles when simulated), ``wt_elev`` and ``depth_to_water``.
    volumes : pandas.DataFrame
        Volumes per zone, depth band and facies (the whole site as zone ``site``).
    injection : dict
        Zone name -> injection plan, for every treatment zone.
    """
    ds = model.dataset
    maps = dict(thickness_maps(ds))
    maps["wt_elev"] = water_table_map(ds, logs.water_table)
    maps["depth_to_water"] = depth_to_water_map(ds, logs.water_table)
    crs_wkt = ds.attrs.get("crs")
    for name, da in maps.items():
        da.name = name
        if crs_wkt and "crs" not in da.attrs:
            da.attrs["crs"] = crs_wkt
    zones = site.zones if site.zones is not None and len(site.zones) else None
    volumes = zone_volumes(ds, zones)
    options = site.config.volume_options()
    plans: dict[str, InjectionPlan] = {}
    for zone in [] if zones is None else zones.itertuples(index=False):
        fraction = _zone_value(zone, "design_fraction", options.design_fraction)
        radius = _zone_value(zone, "radius_of_influence", options.radius_of_influence)
        plans[str(zone.name)] = injection_plan(
            ds,
            zone,
            design_fraction=fraction,
            radius_of_influence=radius,
            target=options.target,
        )
    return maps, volumes, plans


def _zone_value(zone: Any, name: str, default: float) -> float:
    value = getattr(zone, name, None)
    if value is None or (isinstance(value, float) and np.isnan(value)):
        return float(default)
    return float(value)


def _schedule(plans: dict[str, InjectionPlan]) -> pd.DataFrame | None:
    frames = []
    for zone, plan in plans.items():
        if plan.schedule is None or len(plan.schedule) == 0:
            continue
        frame = pd.DataFrame(plan.schedule).copy()
        if "zone" not in frame.columns:
            frame.insert(0, "zone", zone)
        frames.append(frame)
    return pd.concat(frames, ignore_index=True) if frames else None


def _relative(paths: Sequence[Path], root: Path) -> list[Path]:
    return [Path(os.path.relpath(Path(p).resolve(), Path(root).resolve())) for p in paths]


def _log_figures(results: RunResults) -> dict[str, bytes]:
    """Return the per-boring log figures of the run, drawing them on first use."""
    if not results.log_figures and results.logs is not None:
        results.log_figures = log_figure_pngs(
            results.logs.samples,
            results.logs.intervals,
            units=results.site.config.units,
            checks=results.logs.sensor_checks,
        )
    return results.log_figures


def run_export(
    results: RunResults,
    out_dir: str | PathLike,
    *,
    formats: Sequence[str] | None = None,
) -> list[Path]:
    """Write the tables and the exchange files (VTK, GeoTIFF, GeoPackage, NetCDF).

    Parameters
    ----------
    results
        Results of the stages run so far; what is missing is skipped.
    out_dir
        Folder to write into (created when missing).
    formats
        Subset of ``csv`` (tables and the per-boring log figures ``figures/logs/*.png``),
        ``vtk``, ``geotiff``, ``gpkg``, ``netcdf``; default the site file's
        ``[output] formats``.

    Returns
    -------
    list of Path
        The files written.
    """
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    site = results.site
    chosen = set(site.config.output_options().formats if formats is None else formats)
    frame = OutputFrame.from_site(site)
    ds = results.dataset
    written: list[Path] = []
    if "csv" in chosen:
        written += _write_tables(results, out, frame)
    if "vtk" in chosen and ds is not None:
        written += _write_vtk(results, ds, out, frame)
    if "geotiff" in chosen and results.maps:
        written += geotiff.write_maps(results.maps, out / "maps", frame=frame)
    if "gpkg" in chosen:
        written.append(_write_gpkg(results, out / "site.gpkg", frame))
    if "netcdf" in chosen and ds is not None:
        written.append(
            netcdf.write_netcdf(
                ds,
                out / "model.nc",
                frame=frame,
                facies_names=None if results.logs is None else list(results.logs.facies_names),
                title=f"geo3d voxel model of {site.name}",
            )
        )
    return written


def _write_tables(results: RunResults, out: Path, frame: OutputFrame) -> list[Path]:
    """Write the CSV/JSON tables (in the output frame) and the per-boring log figures."""
    logs, model = results.logs, results.model
    summaries = {zone: plan.summary for zone, plan in results.injection.items()}
    written = tables.write_tables(
        out,
        intervals=None if logs is None else logs.intervals,
        volumes=results.volumes,
        injection_schedule=_schedule(results.injection),
        injection_summary=summaries or None,
        crossval=None if model is None else model.crossval,
        water_levels=None if logs is None else logs.water_levels,
        calibration=None if logs is None else logs.calibration_record(),
        frame=frame,
    )
    if logs is not None:
        written.append(tables.write_csv(logs.samples, out / "samples.csv", frame=frame))
        for boring_id, png in _log_figures(results).items():
            path = out / "figures" / "logs" / f"{boring_id}.png"
            with atomic_file(path) as tmp:
                tmp.write_bytes(png)
            written.append(path)
    if model is not None and model.variograms:
        written.append(tables.write_json(_variograms(model.variograms), out / "variograms.json"))
    return written


def _write_vtk(results: RunResults, ds: xr.Dataset, out: Path, frame: OutputFrame) -> list[Path]:
    """Write the model image, the boring polylines and the site multiblock (output frame)."""
    site, logs = results.site, results.logs
    model_file = vtk.write_model_vti(ds, out / "model.vti", frame=frame)
    written = [model_file]
    borings_file = None
    if logs is not None:
        borings_file = vtk.write_borings_vtp(
            logs.samples, out / "borings.vtp", intervals=logs.intervals, frame=frame
        )
        written.append(borings_file)
    vtm = vtk.write_site_vtm(
        ds,
        out / "site.vtm",
        samples=None if logs is None else logs.samples,
        intervals=None if logs is None else logs.intervals,
        zones=site.zones if site.zones is not None and len(site.zones) else None,
        water_table=_water_table_map(results, ds),
        model_file=model_file,
        borings_file=borings_file,
        frame=frame,
    )
    written.append(vtm)
    written += sorted((out / "site").glob("*"))
    return written


def _water_table_map(results: RunResults, ds: xr.Dataset) -> xr.DataArray | None:
    """Return the water-table map of the run, made from the logs' surface when needed."""
    if "wt_elev" in results.maps:
        return results.maps["wt_elev"]
    if results.logs is None:
        return None
    return water_table_map(ds, results.logs.water_table)


#: Parameters of a fitted covariance model written to ``variograms.json``.
_COVARIANCE_KEYS = ("kind", "sill", "nugget", "range_h", "range_v", "azimuth", "minor_ratio")


def _variograms(variograms: dict[str, VariogramFit]) -> dict[str, Any]:
    out: dict[str, Any] = {}
    for name, fit in variograms.items():
        entry: dict[str, Any] = {"kind": fit.kind, "rmse": fit.rmse}
        entry["model"] = {key: getattr(fit.model, key) for key in _COVARIANCE_KEYS}
        for part in ("vertical", "horizontal"):
            table = getattr(fit, part)
            if isinstance(table, pd.DataFrame):
                entry[f"{part}_experimental"] = table
        out[name] = entry
    return out


def _write_gpkg(results: RunResults, path: Path, frame: OutputFrame) -> Path:
    site, logs = results.site, results.logs
    classes = results.facies_classes
    layers = {
        "borings": gpkg.boring_summary(
            site.borings,
            crs=site.crs,
            samples=None if logs is None else logs.samples,
            intervals=None if logs is None else logs.intervals,
            water_levels=None if logs is None else logs.water_levels,
            boring_levels=None if logs is None else logs.boring_levels,
            reference_pressure=None if logs is None else logs.reference_pressure,
            transmissive=classes.names[classes.transmissive],
            frame=frame,
        )
    }
    if site.zones is not None and len(site.zones):
        layers["zones"] = gpkg.zones_layer(
            site.zones,
            crs=site.crs,
            volumes=results.volumes,
            plans=results.injection,
            storage=classes.names[classes.storage],
            frame=frame,
        )
    if results.injection:
        layers["injection_points"] = gpkg.injection_points_layer(
            results.injection, crs=site.crs, frame=frame
        )
    main = {k: v for k, v in results.maps.items() if k in _CONTOURED}
    if main:
        layers["contours"] = gpkg.contour_lines(main, crs=site.crs, frame=frame)
    descriptions = {name: gpkg.layer_description(name, frame) for name in layers}
    return gpkg.write_geopackage(path, layers, descriptions=descriptions)


#: Maps traced as contour lines in the GeoPackage.
_CONTOURED = (
    "transmissive_thickness",
    "storage_thickness",
    "transmissive_top_depth",
    "wt_elev",
    "depth_to_water",
)


def run_report(results: RunResults, out_dir: str | PathLike) -> Path:
    """Write ``report.html`` (see :func:`geo3d.report.write_report`).

    Returns
    -------
    Path
        The report file.
    """
    return write_report(results, Path(out_dir) / "report.html", log_figures=_log_figures(results))


# --------------------------------------------------------------------------- whole run


#: Columns of :func:`headline_volumes`.
_HEADLINE_COLUMNS = (
    "zone",
    "storage_volume_m3",
    "storage_volume_m3_p10",
    "storage_volume_m3_p50",
    "storage_volume_m3_p90",
    "effective_pore_volume_m3",
    "design_volume_m3",
    "n_points",
)


def headline_volumes(results: RunResults) -> pd.DataFrame:
    """Per-zone headline figures: storage and effective pore volumes, design volume, points.

    Parameters
    ----------
    results
        A run's results (needs the volumes stage).

    Returns
    -------
    pandas.DataFrame
        One row per zone (``site`` included): ``zone``, ``storage_volume_m3`` (expected bulk
        volume of the storage material) with ``storage_volume_m3_p10``/``_p50``/``_p90``
        (NaN without simulations), ``effective_pore_volume_m3`` (all material),
        ``design_volume_m3`` and ``n_points`` (NaN where there is no injection plan).
    """
    volumes = results.volumes
    if volumes is None or volumes.empty or not {"zone", "facies"} <= set(volumes.columns):
        return pd.DataFrame(columns=list(_HEADLINE_COLUMNS))
    table = volumes
    if "band" in table.columns:
        table = table[table["band"].isna() | (table["band"].astype(str) == "all")]
    classes = results.facies_classes
    storage_name = classes.names[classes.storage]
    rows = []
    for zone, part in table.groupby("zone", sort=False):
        facies = part["facies"].astype(str)
        storage = part[facies == storage_name]
        everything = part[facies == "all"]
        plan = results.injection.get(str(zone))
        summary = {} if plan is None else plan.summary
        row = {"zone": str(zone), "storage_volume_m3": _first_value(storage, "bulk_volume_m3")}
        for p in ("p10", "p50", "p90"):
            row[f"storage_volume_m3_{p}"] = _first_value(storage, f"bulk_volume_m3_{p}")
        row["effective_pore_volume_m3"] = _first_value(everything, "effective_pore_volume_m3")
        row["design_volume_m3"] = _summary_value(summary, "design_volume_m3")
        row["n_points"] = _summary_value(summary, "n_points")
        rows.append(row)
    return pd.DataFrame(rows, columns=list(_HEADLINE_COLUMNS))


def _first_value(frame: pd.DataFrame, column: str) -> float:
    if frame.empty or column not in frame.columns:
        return float("nan")
    return float(frame[column].iloc[0])


def _summary_value(summary: dict[str, Any], key: str) -> float:
    try:
        return float(summary[key])
    except (KeyError, TypeError, ValueError):
        return float("nan")


@contextlib.contextmanager
def _run_log(path: Path) -> Iterator[None]:
    """Copy geo3d's log records and every warning into ``path`` for the duration.

    Warnings are still shown as before (the previous ``warnings.showwarning`` is called too).
    """
    handler = logging.FileHandler(path, encoding="utf-8")
    handler.setLevel(logging.INFO)
    handler.setFormatter(logging.Formatter("%(asctime)s %(levelname)-7s %(name)s: %(message)s"))
    package = logging.getLogger("geo3d")
    warn_logger = logging.getLogger("geo3d.warnings")
    old_level = package.level
    if package.getEffectiveLevel() > logging.INFO:
        package.setLevel(logging.INFO)
    package.addHandler(handler)
    previous_show = warnings.showwarning

    def show(message, category, filename, lineno, file=None, line=None):
        record = warn_logger.makeRecord(
            warn_logger.name,
            logging.WARNING,
            str(filename),
            int(lineno),
            "%s: %s",
            (category.__name__, message),
            None,
        )
        handler.handle(record)
        previous_show(message, category, filename, lineno, file, line)

    warnings.showwarning = show
    try:
        yield
    finally:
        warnings.showwarning = previous_show
        package.removeHandler(handler)
        package.setLevel(old_level)
        handler.close()


class _Timer:
    def __init__(self, timings: dict[str, float], progress: ProgressCallback | None):
        self.timings = timings
        self.progress = progress

    @contextlib.contextmanager
    def stage(self, name: str) -> Iterator[None]:
        if self.progress is not None:
            self.progress(name, 0.0, "started")
        logger.info("stage %s: started", name)
        start = time.perf_counter()
        try:
            yield
        except Geo3dError as exc:
            # the caller reports the error itself (the CLI prints it once, cleanly)
            logger.info("stage %s stopped: %s", name, exc)
            raise
        self.timings[name] = time.perf_counter() - start
        logger.info("stage %s: done in %.2f s", name, self.timings[name])
        if self.progress is not None:
            self.progress(name, 1.0, f"done in {self.timings[name]:.1f} s")


def run(
    site_path: str | PathLike,
    out_dir: str | PathLike,
    *,
    overwrite: bool = False,
    progress: bool | ProgressCallback = False,
    n_realizations: int | None = None,
    stages: Sequence[str] = STAGES,
    formats: Sequence[str] | None = None,
) -> RunResults:
    """Run the whole job on a site folder and write every output into ``out_dir``.

    Parameters
    ----------
    site_path
        Site folder (or its ``site.toml``).
    out_dir
        Output folder; must be new or empty unless ``overwrite``.
    overwrite
        Replace an existing output folder (only once the run succeeded).
    progress
        A callback ``progress(stage, fraction, message)``; ``True`` logs stage progress.
    n_realizations
        Overrides ``[simulation] realizations``.
    stages
        Stages to run, a subset of :data:`STAGES` (the stages a chosen stage needs are run
        too; only the chosen stages write their outputs).
    formats
        Output formats; default the site file's ``[output] formats``.

    Returns
    -------
    RunResults
        With ``timings`` per stage and ``outputs`` relative to ``out_dir``.

    Raises
    ------
    OutputExistsError
        If ``out_dir`` exists, is not empty and ``overwrite`` is false (checked first); an
        :class:`~geo3d.io.outdir.UnsafeOutputError` if it is, holds or lies inside an input
        folder, holds files no geo3d run wrote, or appeared or changed during the run.
    Geo3dError
        Any input or modelling problem; the output folder is then left untouched.
    """
    planned = planned_stages(stages)
    callback = _progress_callback(progress)
    final = Path(out_dir)
    timings: dict[str, float] = {}
    timer = _Timer(timings, callback)
    started = datetime.now(UTC)
    total_start = time.perf_counter()
    with (
        safe_output_folder(final, site_path=site_path, overwrite=overwrite) as staging,
        _run_log(staging / "run.log"),
    ):
        logger.info("geo3d %s: run of %s into %s", __version__, site_path, final)
        with timer.stage("check"):
            site = run_check(site_path, n_realizations=n_realizations, stages=stages)
        results = RunResults(site=site, timings=timings)
        _compute(results, planned, timer, n_realizations=n_realizations, progress=callback)
        chosen_formats = list(site.config.output_options().formats if formats is None else formats)
        written: list[Path] = []
        if "export" in planned:
            with timer.stage("export"):
                export_formats = (
                    [f for f in chosen_formats if f != "report"]
                    if "export" in stages
                    else _stage_formats(stages)
                )
                written += run_export(results, staging, formats=export_formats)
        if "report" in planned and "report" in chosen_formats:
            with timer.stage("report"):
                written.append(run_report(results, staging))
        timings["total"] = time.perf_counter() - total_start
        results.outputs = sorted(set(_relative(written, staging)))
        tables.write_json(_run_summary(results, site_path, started), staging / "run.json")
        logger.info("run finished in %.1f s", timings["total"])
    results.out_dir = final
    results.outputs = [*results.outputs, Path("run.json"), Path("run.log")]
    return results


def _progress_callback(progress: bool | ProgressCallback) -> ProgressCallback | None:
    """Return the progress callback of :func:`run` (``True`` logs the progress)."""
    if progress is True:

        def log_progress(stage: str, fraction: float, message: str) -> None:
            logger.info("%s: %3.0f%% %s", stage, 100 * fraction, message)

        return log_progress
    return progress or None


def _compute(
    results: RunResults,
    planned: Sequence[str],
    timer: _Timer,
    *,
    n_realizations: int | None,
    progress: ProgressCallback | None,
) -> None:
    """Run the computing stages among ``planned`` (logs, model, volumes) into ``results``."""
    site = results.site
    if "logs" in planned:
        with timer.stage("logs"):
            results.logs = run_logs(site)
    if "model" in planned and results.logs is not None:
        with timer.stage("model"):
            results.model = run_model(
                site, results.logs, n_realizations=n_realizations, progress=progress
            )
        _check_model(results.model)
    if "volumes" in planned and results.logs is not None and results.model is not None:
        with timer.stage("volumes"):
            results.maps, results.volumes, results.injection = run_volumes(
                site, results.logs, results.model
            )
            results.facies_maps = facies_column_maps(results.model.dataset)


def _run_summary(
    results: RunResults, site_path: str | PathLike, started: datetime
) -> dict[str, Any]:
    """Return the content of ``run.json``."""
    timings = results.timings
    return {
        "geo3d_version": __version__,
        "python": platform.python_version(),
        "site": str(results.site.name),
        "site_path": str(Path(site_path).resolve()),
        "started_utc": started.isoformat(timespec="seconds"),
        "stages": [s for s in STAGES if s in timings],
        "timings_s": {k: round(v, 3) for k, v in timings.items()},
        "outputs": [str(p) for p in results.outputs],
        "headline": headline_volumes(results) if results.volumes is not None else [],
    }


def planned_stages(stages: Sequence[str] = STAGES) -> list[str]:
    """Return the stages :func:`run` goes through to produce the chosen stages' outputs.

    Every stage before the last one chosen is run (each needs its predecessors); ``export``
    is run when it is chosen or when ``logs``, ``model`` or ``volumes`` is (they write their
    tables through it); ``report`` only when chosen.

    Parameters
    ----------
    stages
        A non-empty subset of :data:`STAGES`.

    Returns
    -------
    list of str
        In :data:`STAGES` order.

    Raises
    ------
    ValueError
        If a stage is unknown or none is given.

    Examples
    --------
    >>> planned_stages(["model"])
    ['check', 'logs', 'model', 'export']
    >>> planned_stages(["report"])
    ['check', 'logs', 'model', 'volumes', 'report']
    """
    chosen = set(stages)
    unknown = chosen - set(STAGES)
    if unknown or not chosen:
        msg = f"unknown or no stage(s) {sorted(unknown)}; expected some of {list(STAGES)}"
        raise ValueError(msg)
    last = max(STAGES.index(s) for s in chosen)
    planned = [s for s in STAGES[: last + 1] if s not in ("export", "report")]
    if "export" in chosen or chosen & {"logs", "model", "volumes"}:
        planned.append("export")
    if "report" in chosen:
        planned.append("report")
    return planned


def _stage_formats(stages: Sequence[str]) -> list[str]:
    """Return the formats a stage command writes when ``export`` is not asked for."""
    if "volumes" in stages:
        return ["csv", "geotiff", "gpkg"]
    if "model" in stages:
        return ["csv", "netcdf", "vtk"]
    return ["csv"]


def _check_model(model: ModelResult) -> None:
    ds = model.dataset
    if "log10_k" not in ds:
        msg = "the model stage produced no voxel model with log10_k"
        raise ModelError(msg)
    inside = np.asarray(ds["mask"].values, bool) if "mask" in ds else None
    if inside is not None and not np.isfinite(ds["log10_k"].values[inside]).any():
        warnings.warn(
            "the voxel model has no estimated cell inside the site; check the kriging "
            "neighbourhood ([kriging] max_distance)",
            Geo3dWarning,
            stacklevel=2,
        )


# --------------------------------------------------------------------------- boring advice


def _advice_covariance(model: ModelResult) -> CovarianceModel:
    """Return the covariance the realizations follow (normal-score fit, log10 K, attrs)."""
    for key in ("log10_k_normal_score", "log10_k"):
        if key in model.variograms:
            return model.variograms[key].model
    return covariance_from_attrs(model.dataset)


@dataclass(frozen=True)
class AdviceOptions:
    """Settings of the boring advice, checked against the site before any modelling.

    Attributes
    ----------
    n_borings
        Borings to propose.
    target
        ``storage`` (default), ``transmissive`` or ``injection``.
    zone
        Rank for this treatment zone only; None = all zones together.
    spacing
        Candidate grid spacing, m.
    min_distance
        Minimum distance, m, from the existing and the other proposed borings.
    accessible
        The accessible areas (internal CRS), or None.
    criterion
        ``summed`` (cell kriging variance summed over the target) or ``block``.
    """

    n_borings: int
    target: str
    zone: str | None
    spacing: float
    min_distance: float
    accessible: shapely.Geometry | None
    criterion: str

    @classmethod
    def for_site(
        cls,
        site: Site,
        *,
        n_borings: int = 3,
        target: str = "storage",
        zone: str | None = None,
        spacing: float | None = None,
        min_distance: float | None = None,
        accessible: str | PathLike | None = None,
        criterion: str = "summed",
    ) -> AdviceOptions:
        """Check the settings against a site; defaults: about 400 candidates, distance = spacing.

        Raises
        ------
        GeometryError
            Unknown zone, unreadable accessible-area layer, or no admissible candidate.
        ModelError
            Unknown target or criterion, fewer than one boring.
        """
        if target not in TARGETS or criterion not in CRITERIA or n_borings < 1:
            msg = (
                f"advise: got target {target!r}, criterion {criterion!r}, {n_borings} borings; "
                f"expected a target in {TARGETS}, a criterion in {CRITERIA} and >= 1 boring"
            )
            raise ModelError(msg)
        names = [str(n) for n in site.zones["name"]] if len(site.zones) else ["site"]
        if zone is not None and zone not in names:
            msg = f"advise: zone {zone!r} is not a treatment zone of the site; expected one of "
            msg += str(names)
            raise GeometryError(msg)
        spacing = math.sqrt(site.boundary.area / 400.0) if spacing is None else float(spacing)
        distance = spacing if min_distance is None else float(min_distance)
        area = (
            None
            if accessible is None
            else read_area(accessible, crs=site.crs, what="accessible-area")
        )
        existing = site.borings[["x", "y"]].to_numpy(float)
        if not len(candidate_grid(site.boundary, spacing, existing=existing,
                                  min_distance=distance, accessible=area)):  # fmt: skip
            msg = (
                f"advise: no admissible candidate at {spacing:g} m spacing, at least "
                f"{distance:g} m from the borings, inside the boundary"
                + ("" if area is None else " and the accessible areas")
                + "; expected a finer spacing or a smaller minimum distance"
            )
            raise GeometryError(msg)
        return cls(n_borings, target, zone, spacing, distance, area, criterion)


def run_advise(
    site: Site, logs: LogResults, model: ModelResult, options: AdviceOptions
) -> BoringAdvice:
    """Propose the next borings (see :func:`geo3d.analysis.advise.advise_borings`).

    Parameters
    ----------
    site, logs, model
        A site and the results of :func:`run_logs` and :func:`run_model`.
    options
        The advice settings (:meth:`AdviceOptions.for_site`).
    """
    intervals = logs.intervals
    finite = np.isfinite(intervals["log10_k"].to_numpy(float))
    data = intervals.loc[finite, ["x", "y", "z_mid"]].to_numpy(float)
    zones = site.zones if site.zones is not None and len(site.zones) else None
    default = site.config.volume_options().design_fraction
    fractions = {}
    for row in [] if zones is None else zones.itertuples(index=False):
        fractions[str(row.name)] = _zone_value(row, "design_fraction", default)
    return advise_borings(
        model.dataset,
        data,
        site.borings[["x", "y"]].to_numpy(float),
        site.boundary,
        n_borings=options.n_borings,
        covariance=_advice_covariance(model),
        zones=zones,
        target=options.target,
        spacing=options.spacing,
        min_distance=options.min_distance,
        accessible=options.accessible,
        criterion=options.criterion,
        rank_zone=options.zone,
        design_fraction=fractions or default,
    )


@dataclass
class AdviceRun:
    """What :func:`advise` wrote: the advice, the folder, its files and the time per stage."""

    advice: BoringAdvice
    out_dir: Path
    outputs: list[Path]
    timings: dict[str, float]


def _write_advice_outputs(site: Site, advice: BoringAdvice, staging: Path, seconds: float):
    frame = OutputFrame.from_site(site)
    written = write_advice(advice, staging, crs=site.crs, frame=frame)
    zones = site.zones if site.zones is not None and len(site.zones) else None
    png = advice_map_png(advice, boundary=site.boundary, zones=zones, frame=frame)
    with atomic_file(staging / "advice_map.png") as tmp:
        tmp.write_bytes(png)
    page = advice_html(advice, png, site_name=str(site.name), frame=frame, seconds=seconds)
    with atomic_file(staging / "advice.html") as tmp:
        tmp.write_text(page, encoding="utf-8")
    return [*written, staging / "advice_map.png", staging / "advice.html"]


def advise(
    site_path: str | PathLike,
    out_dir: str | PathLike,
    *,
    overwrite: bool = False,
    progress: bool | ProgressCallback = False,
    n_realizations: int | None = None,
    **options: Any,
) -> AdviceRun:
    """Build the model of a site and write the proposed next borings into ``out_dir``.

    Checks the site and ``options`` (:meth:`AdviceOptions.for_site`: bad settings stop the run
    before any modelling), runs the logs and model stages, then :func:`run_advise`, and
    writes ``proposed_borings.csv``, ``advice_candidates.csv``, ``advice_zones.csv``,
    ``advice.gpkg`` (layers ``proposed_borings``, ``advice_candidates``), ``advice_map.png``,
    ``advice.html``, ``run.log`` and ``run.json``, all at once when the whole job succeeded
    (the output-folder rules of :func:`run`).
    """
    callback = _progress_callback(progress)
    final = Path(out_dir)
    timings: dict[str, float] = {}
    timer = _Timer(timings, callback)
    total_start = time.perf_counter()
    with (
        safe_output_folder(final, site_path=site_path, overwrite=overwrite) as staging,
        _run_log(staging / "run.log"),
    ):
        with timer.stage("check"):
            site = run_check(site_path, n_realizations=n_realizations, stages=("model",))
            settings = AdviceOptions.for_site(site, **options)
        results = RunResults(site=site, timings=timings)
        _compute(results, ["logs", "model"], timer, n_realizations=n_realizations,
                 progress=callback)  # fmt: skip
        assert results.logs is not None and results.model is not None
        with timer.stage("advise"):
            advice = run_advise(site, results.logs, results.model, settings)
        written = _write_advice_outputs(site, advice, staging, timings["advise"])
        timings["total"] = time.perf_counter() - total_start
        outputs = sorted(set(_relative(written, staging)))
        summary = {
            "geo3d_version": __version__,
            "site": str(site.name),
            "site_path": str(Path(site_path).resolve()),
            "timings_s": {k: round(v, 3) for k, v in timings.items()},
            "outputs": [str(p) for p in outputs],
            "proposed": advice.proposed,
        }
        tables.write_json(summary, staging / "run.json")
    return AdviceRun(advice, final, [*outputs, Path("run.json"), Path("run.log")], timings)
