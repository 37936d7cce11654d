"""The site: validated input tables, geometry and settings, in internal units.

:func:`read_site` reads a site folder (``site.toml`` and the files it names), validates every
file, converts units once and returns a :class:`Site`. Problems found in different files are
collected, so one run reports them all (:class:`~geo3d.errors.SiteValidationError`).
"""

from __future__ import annotations

import contextlib
import warnings
from collections.abc import Iterator
from dataclasses import dataclass
from os import PathLike
from pathlib import Path
from typing import Any

import geopandas as gpd
import numpy as np
import pandas as pd
import pyproj
from shapely.geometry import MultiPoint, Point, Polygon

from geo3d.config import SiteConfig, load_config
from geo3d.errors import (
    CRSError,
    Geo3dError,
    Geo3dWarning,
    GeometryError,
    LogFormatError,
    SiteValidationError,
    TableFormatError,
    WaterLevelError,
    where,
)
from geo3d.io.logs_reader import read_logs
from geo3d.io.readers import read_borings, read_dissipation, read_sensor_checks, read_slug_tests
from geo3d.io.vector import ZONE_COLUMNS, parse_crs, read_boundary, read_zones
from geo3d.units import from_internal, to_internal

__all__ = ["Site", "read_site", "ABSOLUTE_PRESSURE_FLOOR"]


#: Plausibility floor for absolute pressure when [probe] atmospheric_pressure is "auto": the
#: US Standard Atmosphere (1976) gives about 70 kPa at 3000 m above sea level.
ABSOLUTE_PRESSURE_FLOOR = 70.0


@dataclass
class Site:
    """A validated site, every quantity in internal units (m, kPa, m3/s, mS/m, m/s).

    Attributes
    ----------
    name
        From ``[site] name``.
    root
        The site folder.
    config
        The parsed ``site.toml`` (lengths in m, pressures in kPa).
    crs
        Projected CRS of every coordinate (the declared CRS with metre axes).
    borings
        ``boring_id, x, y, ground_elev [, date]``, one row per boring.
    samples
        ``boring_id, depth, elev, pressure, flow, ec [, time_s]``, sorted by boring then depth;
        ``elev = ground_elev - depth``.
    dissipation
        ``boring_id, test_id, depth, time_s, pressure``.
    slug_tests
        ``boring_id, top_depth, bottom_depth, k``; may be empty.
    sensor_checks
        ``boring_id, sensor, stage, measured, expected, tolerance``; may be empty.
    boundary
        Site boundary (the buffered hull of the borings when none is given).
    zones
        Treatment zones ``name, top, bottom, reference, design_fraction,
        radius_of_influence, geometry``; may be empty.
    dem
        ``(elevation array, rasterio Affine)`` when a DEM is given, else None.
    """

    name: str
    root: Path
    config: SiteConfig
    crs: pyproj.CRS
    borings: pd.DataFrame
    samples: pd.DataFrame
    dissipation: pd.DataFrame
    slug_tests: pd.DataFrame
    sensor_checks: pd.DataFrame
    boundary: Polygon
    zones: gpd.GeoDataFrame
    dem: tuple[np.ndarray, Any] | None = None


class _Problems:
    """Collect errors from independent readers so one run reports them all."""

    def __init__(self) -> None:
        self.messages: list[str] = []
        self.errors: list[Geo3dError] = []

    @contextlib.contextmanager
    def catch(self) -> Iterator[None]:
        try:
            yield
        except SiteValidationError as exc:
            self.errors.append(exc)
            self.messages.extend(exc.problems)
        except Geo3dError as exc:
            self.errors.append(exc)
            self.messages.append(str(exc))

    def add(self, error: Geo3dError) -> None:
        self.errors.append(error)
        self.messages.append(str(error))

    def raise_if_any(self) -> None:
        if len(self.errors) == 1 and not isinstance(self.errors[0], SiteValidationError):
            raise self.errors[0]
        if self.messages:
            raise SiteValidationError(self.messages)


def _path(root: Path, name: str) -> Path | None:
    if not name.strip():
        return None
    path = Path(name)
    return path if path.is_absolute() else root / path


def _empty(columns: list[str]) -> pd.DataFrame:
    return pd.DataFrame({c: pd.Series(dtype=object if c in _TEXT else float) for c in columns})


_TEXT = {"boring_id", "sensor", "stage", "name", "reference"}


def _hull_boundary(borings: pd.DataFrame) -> Polygon:
    """Convex hull of the collars, buffered by 10 % of its larger side (at least 5 m)."""
    points = MultiPoint(list(zip(borings["x"], borings["y"], strict=True)))
    hull = points.convex_hull
    minx, miny, maxx, maxy = hull.bounds
    distance = max(5.0, 0.1 * max(maxx - minx, maxy - miny))
    return hull.buffer(distance)


def _check_pressure_floor(
    table: pd.DataFrame,
    *,
    path: Path | str | dict[str, Path],
    config: SiteConfig,
    problems: _Problems,
    first_line: int | None = None,
) -> None:
    """Refuse absolute pressures below atmospheric, one message per file.

    ``path`` is one file, or a mapping boring id -> log file; ``first_line`` is the line of the
    first data row of each log (CSV logs), to name the line of the first low reading.
    """
    if config.units.pressure_reference != "absolute" or table.empty:
        return
    atm = config.probe.atmospheric_pressure
    if isinstance(atm, str):
        floor = ABSOLUTE_PRESSURE_FLOOR
        source = (
            f"{floor:g} kPa, a plausibility floor for atmospheric pressure (about 3000 m above "
            "sea level; [probe] atmospheric_pressure is auto)"
        )
    else:
        floor = float(atm) - 3.0 * config.probe.sensor_noise
        source = (
            f"{floor:g} kPa, [probe] atmospheric_pressure {atm:g} kPa less three times the "
            "sensor noise"
        )
    low = table["pressure"].to_numpy() < floor
    if not low.any():
        return
    declared = config.units.pressure
    by_file = (
        {file: table["boring_id"] == b for b, file in path.items()}
        if isinstance(path, dict)
        else {path: pd.Series(True, index=table.index)}
    )
    error = LogFormatError if isinstance(path, dict) else TableFormatError
    for file, rows in by_file.items():
        selected = rows.to_numpy() & low
        if not selected.any():
            continue
        position = int(np.flatnonzero(selected)[0])
        first = table.iloc[position]
        line = None
        if first_line is not None and Path(file).suffix.lower() != ".las":
            line = position - int(np.flatnonzero(rows.to_numpy())[0]) + first_line
        count = int(selected.sum())
        value = from_internal(float(first["pressure"]), declared, "pressure")
        msg = (
            f"{where(file, line=line, column='pressure')}: {count} reading"
            f"{'s' if count > 1 else ''} below atmospheric, first in boring "
            f"{first['boring_id']!r} at depth {first['depth']:g} m ({value:g} {declared}); "
            "pressures are declared absolute ([units] pressure_reference), so expected at "
            f"least {source}. If the logger records gauge pressure, set "
            'pressure_reference = "gauge"'
        )
        problems.add(error(msg))


def read_site(path: str | PathLike) -> Site:
    """Read and validate a site folder.

    Parameters
    ----------
    path
        The site folder (or its ``site.toml``).

    Returns
    -------
    Site
        Every table in internal units, coordinates in the site CRS with metre axes.

    Raises
    ------
    SiteFileError, TableFormatError, LogFormatError, UnitError, CRSError, GeometryError,
    WaterLevelError
        When exactly one problem is found.
    SiteValidationError
        When several are found; ``.problems`` lists every message.

    Warns
    -----
    Geo3dWarning
        A boring lies outside the boundary; the CRS axis unit differs from ``[units] length``.
    """
    given = Path(path)
    root = given.parent if given.is_file() else given
    toml = given if given.is_file() else root / "site.toml"
    config = load_config(given)
    problems = _Problems()
    crs = declared_crs = None
    with problems.catch():
        declared_crs, crs = parse_crs(config.site.crs, length_unit=config.units.length, source=toml)
    borings = None
    borings_path = _path(root, config.files.borings) or root / config.files.borings
    with problems.catch():
        borings = read_borings(borings_path, length_unit=config.units.length, crs=declared_crs)
    samples = _read_samples(root, config, borings, borings_path, problems)
    dissipation = _read_dissipation(root, toml, config, borings, problems)
    slug_tests, sensor_checks = _read_tests(root, config, borings, problems)
    boundary = _read_boundary(root, crs, borings, borings_path, config, problems)
    zones = gpd.GeoDataFrame(_empty(list(ZONE_COLUMNS)), geometry=[], crs=crs)
    zones_path = _path(root, config.files.zones)
    if zones_path is not None and crs is not None:
        with problems.catch():
            zones = read_zones(
                zones_path,
                crs=crs,
                length_unit=config.units.length,
                design_fraction=config.treatment.design_fraction,
                radius_of_influence=config.treatment.radius_of_influence,
            )
    dem = None
    dem_path = _path(root, config.files.dem)
    if dem_path is not None and crs is not None:
        with problems.catch():
            dem = _read_dem(dem_path, config=config)
    problems.raise_if_any()
    return Site(
        name=config.site.name,
        root=root,
        config=config,
        crs=crs,
        borings=borings,
        samples=samples,
        dissipation=dissipation,
        slug_tests=slug_tests,
        sensor_checks=sensor_checks,
        boundary=boundary,
        zones=zones,
        dem=dem,
    )


def _read_samples(
    root: Path,
    config: SiteConfig,
    borings: pd.DataFrame | None,
    borings_path: Path,
    problems: _Problems,
) -> pd.DataFrame | None:
    """Read the logs, check them against the borings table and add each sample's elevation."""
    samples = None
    sources: dict[str, Path] = {}
    with problems.catch():
        samples, sources = read_logs(
            config.files.logs, root=root, logs=config.logs, units=config.units
        )
    if borings is None or samples is None:
        return samples
    known = set(borings["boring_id"])
    for boring_id, source in sources.items():
        if boring_id not in known:
            msg = (
                f"{source}: log of boring {boring_id!r} has no row in "
                f"{borings_path.name}; expected every logged boring in the borings table"
            )
            problems.add(LogFormatError(msg))
    without = [b for b in borings["boring_id"] if b not in sources]
    if without:
        lines = [str(i + 2) for i, b in enumerate(borings["boring_id"]) if b in set(without)]
        msg = (
            f"{where(borings_path, column='boring_id')}, line{'s' if len(lines) > 1 else ''} "
            f"{', '.join(lines[:5])}: no log file for boring"
            f"{'s' if len(without) > 1 else ''} {', '.join(map(repr, without[:5]))}"
            f"{' and more' if len(without) > 5 else ''}; expected one log per boring "
            f"matching {config.files.logs!r}"
        )
        problems.add(TableFormatError(msg))
    collars = borings.set_index("boring_id")["ground_elev"]
    samples = samples[samples["boring_id"].isin(known)].reset_index(drop=True)
    samples.insert(2, "elev", collars.reindex(samples["boring_id"]).to_numpy() - samples["depth"])
    _check_pressure_floor(
        samples,
        path={b: f for b, f in sources.items() if b in known},
        config=config,
        problems=problems,
        first_line=config.logs.header_rows + 2,
    )
    return samples


def _read_dissipation(
    root: Path,
    toml: Path,
    config: SiteConfig,
    borings: pd.DataFrame | None,
    problems: _Problems,
) -> pd.DataFrame:
    """Read the dissipation tests; without them the water table needs a given depth."""
    files, units = config.files, config.units
    dissipation = _empty(["boring_id", "test_id", "depth", "time_s", "pressure"])
    dissipation_path = _path(root, files.dissipation)
    if dissipation_path is not None:
        with problems.catch():
            dissipation = read_dissipation(
                dissipation_path, length_unit=units.length, pressure_unit=units.pressure
            )
            _check_known(dissipation, borings, path=dissipation_path, problems=problems)
            _check_pressure_floor(
                dissipation, path=dissipation_path, config=config, problems=problems
            )
    if dissipation.empty and isinstance(config.water.depth_to_water, str):
        msg = (
            f"{toml}: no dissipation test (files.dissipation = {files.dissipation!r}), so the "
            "water table cannot be found; expected a dissipation-test table, or a site-wide "
            "[water] depth_to_water = <number> in site.toml"
        )
        problems.add(WaterLevelError(msg))
    return dissipation


def _read_tests(
    root: Path, config: SiteConfig, borings: pd.DataFrame | None, problems: _Problems
) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Read the slug tests and the sensor checks (each empty when not given)."""
    files, units = config.files, config.units
    slug_tests = _empty(["boring_id", "top_depth", "bottom_depth", "k"])
    slug_path = _path(root, files.slug_tests)
    if slug_path is not None:
        with problems.catch():
            slug_tests = read_slug_tests(slug_path, length_unit=units.length, k_unit=units.k)
            _check_known(slug_tests, borings, path=slug_path, problems=problems)
    sensor_checks = _empty(["boring_id", "sensor", "stage", "measured", "expected", "tolerance"])
    checks_path = _path(root, files.sensor_checks)
    if checks_path is not None:
        with problems.catch():
            sensor_checks = read_sensor_checks(
                checks_path, pressure_unit=units.pressure, flow_unit=units.flow, ec_unit=units.ec
            )
            _check_known(sensor_checks, borings, path=checks_path, problems=problems)
    return slug_tests, sensor_checks


def _read_boundary(
    root: Path,
    crs: pyproj.CRS | None,
    borings: pd.DataFrame | None,
    borings_path: Path,
    config: SiteConfig,
    problems: _Problems,
) -> Polygon | None:
    """Read the boundary (or take the hull of the borings); warn about borings outside it."""
    boundary = None
    boundary_path = _path(root, config.files.boundary)
    if crs is not None:
        if boundary_path is not None:
            with problems.catch():
                boundary = read_boundary(boundary_path, crs=crs)
        elif borings is not None:
            boundary = _hull_boundary(borings)
    if boundary is None or borings is None:
        return boundary
    outside = [
        b
        for b, x, y in zip(borings["boring_id"], borings["x"], borings["y"], strict=True)
        if not boundary.covers(Point(x, y))
    ]
    if outside:
        msg = (
            f"{where(borings_path, column='x, y')}: boring"
            f"{'s' if len(outside) > 1 else ''} {', '.join(map(repr, outside[:10]))} "
            f"outside the site boundary ({boundary_path}); they are used for the model but "
            "lie outside the mapped area"
        )
        warnings.warn(msg, Geo3dWarning, stacklevel=3)
    return boundary


def _check_known(
    table: pd.DataFrame, borings: pd.DataFrame | None, *, path: Path, problems: _Problems
) -> None:
    if borings is None or table.empty:
        return
    unknown = sorted(set(table["boring_id"]) - set(borings["boring_id"]))
    if unknown:
        msg = (
            f"{where(path, column='boring_id')}: boring{'s' if len(unknown) > 1 else ''} "
            f"{', '.join(map(repr, unknown[:5]))} not in the borings table; expected ids "
            "from the borings table"
        )
        problems.add(TableFormatError(msg))


def _read_dem(path: Path, *, config: SiteConfig) -> tuple[np.ndarray, Any]:
    """Read a ground-surface GeoTIFF, in m, with its transform in the site's metre CRS."""
    import rasterio
    from rasterio.transform import Affine

    if not path.is_file():
        msg = f"{path}: DEM file not found; expected a GeoTIFF named in site.toml [files] dem"
        raise GeometryError(msg)
    declared = pyproj.CRS.from_user_input(config.site.crs)
    try:
        with rasterio.open(path) as src:
            elevation = src.read(1, masked=True).astype(float).filled(np.nan)
            transform = src.transform
            raster_crs = src.crs
    except rasterio.errors.RasterioIOError as exc:
        msg = f"{path}: cannot read the DEM ({exc}); expected a GeoTIFF"
        raise GeometryError(msg) from None
    if raster_crs is None:
        msg = f"{path}: the DEM has no CRS; expected the site CRS ({declared.name})"
        raise CRSError(msg)
    if not pyproj.CRS.from_user_input(raster_crs.to_wkt()).equals(declared):
        msg = (
            f"{path}: the DEM is in {raster_crs.to_string()!r}; expected the site CRS "
            f"({declared.name}): reproject it first"
        )
        raise CRSError(msg)
    scale = declared.axis_info[0].unit_conversion_factor
    transform = Affine.scale(scale) @ transform
    return to_internal(elevation, config.units.length, "length"), transform
