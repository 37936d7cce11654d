"""GeoPackage export for GIS: borings, treatment zones, injection points and contour lines.

All layers go in one ``site.gpkg`` in the site CRS:

* ``borings`` - points with summary attributes (total depth, depth to water, transmissive
  thickness, number of samples, count of each flag, mean log10 K);
* ``zones`` - treatment-zone polygons with their volumes;
* ``injection_points`` - the planned injection points with their volumes;
* ``contours`` - contour lines of the 2D maps, one LineString per connected line, with the map
  name, the level and its units.

Contours are traced by contourpy (the marching-squares library matplotlib uses); NaN cells
outside the site are masked, so lines stop at the site edge.

References
----------
.. [1] OGC (2021) OGC GeoPackage Encoding Standard 1.3.1, OGC 12-128r18.
.. [2] Lorensen, W.E., Cline, H.E. (1987) Marching cubes: a high resolution 3D surface
   construction algorithm. SIGGRAPH Computer Graphics 21(4), 163-169 (its 2D form, marching
   squares, traces the contour lines).
"""

from __future__ import annotations

import logging
from collections.abc import Mapping, Sequence
from os import PathLike
from pathlib import Path

import contourpy
import geopandas as gpd
import numpy as np
import pandas as pd
import shapely
import xarray as xr
from matplotlib.ticker import MaxNLocator

from geo3d.errors import GeometryError
from geo3d.logs.flags import FLAGS

__all__ = [
    "boring_summary",
    "zones_layer",
    "injection_points_layer",
    "contour_levels",
    "contour_lines",
    "write_geopackage",
]

logger = logging.getLogger(__name__)


def boring_summary(
    borings: pd.DataFrame,
    *,
    crs,
    samples: pd.DataFrame | None = None,
    intervals: pd.DataFrame | None = None,
    water_levels: pd.DataFrame | None = None,
    transmissive: str = "transmissive",
) -> gpd.GeoDataFrame:
    """Summarise each boring as a point with its key attributes.

    Parameters
    ----------
    borings
        ``boring_id``, ``x``, ``y``, ``ground_elev`` (m), one row per boring.
    crs
        Site CRS.
    samples
        Per-sample table (``boring_id``, ``depth``, ``depth_to_water``, ``log10_k`` and the
        boolean flags).
    intervals
        Intervals (``boring_id``, ``top``, ``bottom``, ``facies``).
    water_levels
        Dissipation-test water levels (``boring_id``, ``depth_to_water``).
    transmissive
        Name of the transmissive hydrofacies.

    Returns
    -------
    geopandas.GeoDataFrame
        Columns ``boring_id``, ``ground_elev``, ``total_depth``, ``depth_to_water``,
        ``water_level_source`` (``dissipation`` or ``surface``), ``transmissive_thickness``,
        ``n_samples``, ``mean_log10_k``, ``n_<flag>`` per flag; point geometry.
    """
    out = borings[["boring_id", "x", "y", "ground_elev"]].copy()
    out["boring_id"] = out["boring_id"].astype(str)
    key = out["boring_id"]
    nan = pd.Series(np.nan, index=out.index)
    out["total_depth"] = nan
    out["depth_to_water"] = nan
    out["water_level_source"] = ""
    out["transmissive_thickness"] = nan
    out["n_samples"] = 0
    out["mean_log10_k"] = nan
    if samples is not None and len(samples):
        grouped = samples.assign(boring_id=samples["boring_id"].astype(str)).groupby("boring_id")
        out["total_depth"] = key.map(grouped["depth"].max())
        out["n_samples"] = key.map(grouped.size()).fillna(0).astype(int)
        if "log10_k" in samples:
            out["mean_log10_k"] = key.map(grouped["log10_k"].mean())
        if "depth_to_water" in samples:
            surface = key.map(grouped["depth_to_water"].median())
            out["depth_to_water"] = surface
            out.loc[surface.notna(), "water_level_source"] = "surface"
        for flag in FLAGS:
            if flag in samples:
                counts = grouped[flag].apply(lambda s: int(s.fillna(False).astype(bool).sum()))
                out[f"n_{flag}"] = key.map(counts).fillna(0).astype(int)
    if water_levels is not None and len(water_levels) and "depth_to_water" in water_levels:
        measured = water_levels.assign(boring_id=water_levels["boring_id"].astype(str))
        measured = key.map(measured.groupby("boring_id")["depth_to_water"].median())
        has = measured.notna()
        out.loc[has, "depth_to_water"] = measured[has]
        out.loc[has, "water_level_source"] = "dissipation"
    if intervals is not None and len(intervals):
        ints = intervals.assign(boring_id=intervals["boring_id"].astype(str))
        thick = (ints["bottom"] - ints["top"]).where(ints["facies"].astype(str) == transmissive, 0)
        out["transmissive_thickness"] = key.map(thick.groupby(ints["boring_id"]).sum()).fillna(0)
    geometry = gpd.points_from_xy(out["x"], out["y"])
    return gpd.GeoDataFrame(out, geometry=geometry, crs=crs)


#: Volume columns carried per facies, and those also carried with their P10/P50/P90.
_PER_FACIES = ("bulk_volume_m3", "effective_pore_volume_m3")
_PERCENTILES = ("p10", "p50", "p90")
#: Injection-plan summary entries carried onto the zone.
_PLAN_FIELDS = (
    "design_volume_m3",
    "design_volume_m3_p10",
    "design_volume_m3_p50",
    "design_volume_m3_p90",
    "n_points",
    "spacing_m",
    "radius_of_influence_m",
)


def _zone_volume_columns(rows: pd.DataFrame, *, storage: str) -> dict[str, float]:
    values: dict[str, float] = {}
    for row in rows.itertuples(index=False):
        facies = str(row.facies)
        label = "total" if facies == "all" else facies
        for column in _PER_FACIES:
            if hasattr(row, column):
                values[f"{label}_{column}"] = float(getattr(row, column))
        if facies in ("all", storage):
            for column in _PER_FACIES:
                for p in _PERCENTILES:
                    name = f"{column}_{p}"
                    if hasattr(row, name):
                        values[f"{label}_{name}"] = float(getattr(row, name))
        if facies == "all" and hasattr(row, "pore_volume_m3"):
            values["total_pore_volume_m3"] = float(row.pore_volume_m3)
    return values


def zones_layer(
    zones: gpd.GeoDataFrame,
    *,
    crs,
    volumes: pd.DataFrame | None = None,
    plans: Mapping[str, object] | None = None,
    storage: str = "storage",
) -> gpd.GeoDataFrame:
    """Join each treatment zone to its volumes and its injection-plan figures.

    Parameters
    ----------
    zones
        Treatment zones with ``name`` and polygon geometry.
    crs
        Site CRS.
    volumes
        Volume table (``zone``, ``band``, ``facies`` and volume columns in m3, as from
        :func:`geo3d.analysis.volumes.zone_volumes`); the whole-zone rows (``band`` ``all``)
        are used.
    plans
        Zone name -> injection plan (with a ``summary`` dict).
    storage
        Name of the storage hydrofacies (its volumes carry P10/P50/P90).

    Returns
    -------
    geopandas.GeoDataFrame
        One row per zone: its attributes, ``<facies>_bulk_volume_m3`` and
        ``<facies>_effective_pore_volume_m3`` per facies (``total_`` for all material), P10,
        P50 and P90 of the storage and total volumes, and the plan's design volume, number of
        points, spacing and radius.
    """
    layer = gpd.GeoDataFrame(zones.copy(), geometry=zones.geometry.name, crs=zones.crs or crs)
    layer = layer.to_crs(crs)
    extra: dict[str, dict[str, float]] = {str(name): {} for name in layer["name"]}
    if volumes is not None and len(volumes) and {"zone", "facies"} <= set(volumes.columns):
        table = volumes
        if "band" in table.columns:
            table = table[table["band"].isna() | (table["band"].astype(str) == "all")]
        for zone, rows in table.groupby(table["zone"].astype(str)):
            if zone in extra:
                extra[zone].update(_zone_volume_columns(rows, storage=storage))
    for zone, plan in (plans or {}).items():
        summary = getattr(plan, "summary", None) or {}
        if str(zone) in extra:
            for key in _PLAN_FIELDS:
                if key in summary and summary[key] is not None:
                    extra[str(zone)][f"plan_{key}"] = float(summary[key])
    table = pd.DataFrame.from_dict(extra, orient="index")
    if table.empty or not len(table.columns):
        return layer
    table = table.rename_axis("_zone_key").reset_index()
    layer = layer.assign(_zone_key=layer["name"].astype(str))
    return layer.merge(table, on="_zone_key", how="left").drop(columns="_zone_key")


def injection_points_layer(plans: Mapping[str, object], *, crs) -> gpd.GeoDataFrame:
    """Gather the injection points of every zone's plan into one layer.

    Parameters
    ----------
    plans
        Zone name -> injection plan (an object with a ``points`` GeoDataFrame).
    crs
        Site CRS.

    Returns
    -------
    geopandas.GeoDataFrame
        The points with a ``zone`` column.
    """
    frames = []
    for zone, plan in plans.items():
        points = getattr(plan, "points", None)
        if points is None or len(points) == 0:
            continue
        points = points.copy()
        if "zone" not in points.columns:
            points.insert(0, "zone", str(zone))
        if points.crs is None:
            points = points.set_crs(crs)
        frames.append(points.to_crs(crs))
    if not frames:
        return gpd.GeoDataFrame({"zone": []}, geometry=gpd.GeoSeries([], crs=crs), crs=crs)
    return gpd.GeoDataFrame(pd.concat(frames, ignore_index=True), crs=crs)


def contour_levels(values: np.ndarray, *, n_levels: int = 10) -> np.ndarray:
    """Choose round contour levels strictly inside the range of the finite values.

    Parameters
    ----------
    values
        Map values (NaN ignored).
    n_levels
        Approximate number of levels.

    Returns
    -------
    numpy.ndarray
        Levels from matplotlib's ``MaxNLocator`` (1, 2, 2.5, 5, 10 steps); empty when the
        map is constant or empty.

    Examples
    --------
    >>> contour_levels(np.array([0.0, 1.0]), n_levels=4).tolist()
    [0.25, 0.5, 0.75]
    """
    finite = np.asarray(values, dtype=float)
    finite = finite[np.isfinite(finite)]
    if finite.size == 0:
        return np.empty(0)
    low, high = float(finite.min()), float(finite.max())
    if not high > low:
        return np.empty(0)
    levels = np.asarray(MaxNLocator(nbins=n_levels).tick_values(low, high), dtype=float)
    return levels[(levels > low) & (levels < high)]


def contour_lines(
    maps: Mapping[str, xr.DataArray],
    *,
    crs,
    levels: Mapping[str, Sequence[float]] | None = None,
    n_levels: int = 10,
) -> gpd.GeoDataFrame:
    """Trace contour lines of 2D maps.

    Parameters
    ----------
    maps
        Map name -> ``("y", "x")`` DataArray on cell centres (NaN outside the site).
    crs
        Site CRS.
    levels
        Map name -> levels; other maps get :func:`contour_levels`.
    n_levels
        Approximate number of automatic levels.

    Returns
    -------
    geopandas.GeoDataFrame
        ``map``, ``level``, ``units`` and LineString geometry.
    """
    rows: list[dict] = []
    given = levels or {}
    for name, da in maps.items():
        if set(da.dims) != {"y", "x"}:
            msg = f"map '{name}' must have dims ('y', 'x'); got {da.dims}"
            raise GeometryError(msg)
        da = da.transpose("y", "x")
        values = np.asarray(da.values, dtype=float)
        own = given.get(str(name))
        chosen = contour_levels(values, n_levels=n_levels) if own is None else np.asarray(own)
        if len(chosen) == 0 or min(values.shape) < 2:
            continue
        z = np.ma.masked_invalid(values)
        generator = contourpy.contour_generator(
            da["x"].values, da["y"].values, z, line_type=contourpy.LineType.Separate
        )
        units = str(da.attrs.get("units", ""))
        for level in chosen:
            for line in generator.lines(float(level)):
                if len(line) >= 2:
                    rows.append(
                        {
                            "map": str(name),
                            "level": float(level),
                            "units": units,
                            "geometry": shapely.LineString(line),
                        }
                    )
    if not rows:
        empty: dict[str, list] = {"map": [], "level": [], "units": []}
        return gpd.GeoDataFrame(empty, geometry=gpd.GeoSeries([], crs=crs), crs=crs)
    return gpd.GeoDataFrame(rows, geometry="geometry", crs=crs)


def write_geopackage(
    path: str | PathLike,
    layers: Mapping[str, gpd.GeoDataFrame],
) -> Path:
    """Write GeoDataFrames as layers of one GeoPackage; empty layers are skipped.

    Parameters
    ----------
    path
        Output ``.gpkg`` file (replaced if it exists).
    layers
        Layer name -> GeoDataFrame (each with its CRS set).

    Returns
    -------
    Path
        The file written.
    """
    path = Path(path)
    if path.exists():
        path.unlink()
    for name, gdf in layers.items():
        if gdf is None or len(gdf) == 0:
            logger.debug("layer %s is empty; not written", name)
            continue
        gdf.to_file(path, layer=name, driver="GPKG", engine="pyogrio")
    logger.debug("wrote %s", path)
    return path
