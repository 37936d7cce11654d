"""GeoPackage export for GIS: borings, treatment zones, injection points and contour lines.

All layers go in one ``site.gpkg`` in the site CRS:

* ``borings`` - points with summary attributes (total depth, depth to water, transmissive
  thickness, number of samples, count of each flag, mean log10 K);
* ``zones`` - treatment-zone polygons with their volumes;
* ``injection_points`` - the planned injection points with their volumes;
* ``contours`` - contour lines of the 2D maps, one LineString per connected line, with the map
  name, the level and its units.

Given an output frame (:class:`~geo3d.io.output_frame.OutputFrame`), every layer is written in
the output CRS, and each field holding a length or a volume is converted to the output unit and
carries it in its name (``depth_to_water_ft``, ``total_bulk_volume_gal``); each layer has a
description naming its CRS and units.  Without a frame, layers stay in the internal CRS and SI.

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
from geo3d.io.output_frame import OutputFrame
from geo3d.io.tables import to_output_units
from geo3d.logs.flags import FLAGS

__all__ = [
    "in_frame",
    "layer_description",
    "boring_summary",
    "zones_layer",
    "injection_points_layer",
    "contour_levels",
    "contour_lines",
    "write_geopackage",
]

logger = logging.getLogger(__name__)


def in_frame(layer: gpd.GeoDataFrame, frame: OutputFrame | None) -> gpd.GeoDataFrame:
    """Return a layer (internal CRS and SI) in an output frame's CRS and units.

    Parameters
    ----------
    layer
        Layer in the internal CRS, attributes in SI (see :func:`geo3d.io.tables.output_name`
        for which fields are lengths and volumes).
    frame
        Output frame; None returns the layer unchanged.

    Returns
    -------
    geopandas.GeoDataFrame
        Geometry in the output CRS; length and volume fields converted and renamed with their
        unit, coordinate fields ``x``, ``y`` in the output CRS.
    """
    if frame is None:
        return layer
    moved = frame.layer(layer)
    column = moved.geometry.name
    table = to_output_units(pd.DataFrame(moved.drop(columns=column)), frame=frame)
    return gpd.GeoDataFrame(table, geometry=moved.geometry.to_numpy(), crs=frame.crs)


def layer_description(name: str, frame: OutputFrame) -> str:
    """Say what a layer holds and in which CRS and units."""
    what = {
        "borings": "borings with summary attributes",
        "zones": "treatment zones with their volumes and injection-plan figures",
        "injection_points": "planned injection points",
        "contours": "contour lines of the 2D maps",
    }.get(name, name)
    return (
        f"geo3d {what}; coordinates in {frame.label}; lengths in {frame.length_label}, "
        f"volumes in {frame.volume_label} (as the field names say); K in m/s"
    )


def boring_summary(
    borings: pd.DataFrame,
    *,
    crs,
    samples: pd.DataFrame | None = None,
    intervals: pd.DataFrame | None = None,
    water_levels: pd.DataFrame | None = None,
    boring_levels: pd.DataFrame | None = None,
    reference_pressure: pd.DataFrame | None = None,
    transmissive: str = "transmissive",
    frame: OutputFrame | None = None,
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
        Dissipation-test water levels (``boring_id``, ``depth_to_water``); their median per
        boring is used when ``boring_levels`` is not given.
    boring_levels
        One water level per boring from its tests nearest the water table (``boring_id``,
        ``depth_to_water``, ``vertical_gradient``), so that a deep test in a vertical head
        gradient does not shift it.
    reference_pressure
        ``boring_id``, ``p_atm_source``: where each boring's atmospheric pressure came from.
    transmissive
        Name of the transmissive hydrofacies.
    frame
        Output frame (see :func:`in_frame`); None keeps the internal CRS and metres.

    Returns
    -------
    geopandas.GeoDataFrame
        Columns ``boring_id``, ``ground_elev``, ``total_depth``, ``depth_to_water``,
        ``water_level_source`` (``dissipation`` or ``surface``), ``vertical_gradient`` and
        ``p_atm_source`` (when given), ``transmissive_thickness``,
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
    _add_water_levels(out, water_levels, boring_levels, reference_pressure)
    if intervals is not None and len(intervals):
        ints = intervals.assign(boring_id=intervals["boring_id"].astype(str))
        thick = (ints["bottom"] - ints["top"]).where(ints["facies"].astype(str) == transmissive, 0)
        out["transmissive_thickness"] = key.map(thick.groupby(ints["boring_id"]).sum()).fillna(0)
    geometry = gpd.points_from_xy(out["x"], out["y"])
    return in_frame(gpd.GeoDataFrame(out, geometry=geometry, crs=crs), frame)


def _add_water_levels(
    out: pd.DataFrame,
    water_levels: pd.DataFrame | None,
    boring_levels: pd.DataFrame | None,
    reference_pressure: pd.DataFrame | None,
) -> None:
    """Set the measured water level, its gradient and reference-pressure source per boring."""
    key = out["boring_id"]
    if boring_levels is not None and len(boring_levels):
        own = boring_levels.set_index(boring_levels["boring_id"].astype(str))
        measured = key.map(own["depth_to_water"])
        if "vertical_gradient" in own:
            out["vertical_gradient"] = key.map(own["vertical_gradient"]).astype(float)
    elif water_levels is not None and len(water_levels) and "depth_to_water" in water_levels:
        measured = water_levels.assign(boring_id=water_levels["boring_id"].astype(str))
        measured = key.map(measured.groupby("boring_id")["depth_to_water"].median())
    else:
        measured = None
    if reference_pressure is not None and "p_atm_source" in reference_pressure:
        sources = reference_pressure.set_index(reference_pressure["boring_id"].astype(str))
        out["p_atm_source"] = key.map(sources["p_atm_source"]).fillna("").astype(str)
    if measured is not None:
        has = measured.notna()
        out.loc[has, "depth_to_water"] = measured[has]
        out.loc[has, "water_level_source"] = "dissipation"


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
    frame: OutputFrame | None = None,
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
    frame
        Output frame (see :func:`in_frame`).

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
        return in_frame(layer, frame)
    table = table.rename_axis("_zone_key").reset_index()
    layer = layer.assign(_zone_key=layer["name"].astype(str))
    merged = layer.merge(table, on="_zone_key", how="left").drop(columns="_zone_key")
    return in_frame(merged, frame)


def injection_points_layer(
    plans: Mapping[str, object], *, crs, frame: OutputFrame | None = None
) -> gpd.GeoDataFrame:
    """Gather the injection points of every zone's plan into one layer.

    Parameters
    ----------
    plans
        Zone name -> injection plan (an object with a ``points`` GeoDataFrame).
    crs
        Site CRS.
    frame
        Output frame (see :func:`in_frame`).

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
    return in_frame(gpd.GeoDataFrame(pd.concat(frames, ignore_index=True), crs=crs), frame)


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
    frame: OutputFrame | None = None,
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
    frame
        Output frame: maps are converted to its CRS and length unit before tracing, so the
        lines, the levels and ``units`` are in the output units.

    Returns
    -------
    geopandas.GeoDataFrame
        ``map``, ``level``, ``units`` and LineString geometry.
    """
    rows: list[dict] = []
    given = levels or {}
    if frame is not None:
        maps = {name: frame.grid(da) for name, da in maps.items()}
        crs = frame.crs
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
    *,
    descriptions: Mapping[str, str] | None = None,
) -> Path:
    """Write GeoDataFrames as layers of one GeoPackage; empty layers are skipped.

    Parameters
    ----------
    path
        Output ``.gpkg`` file (replaced if it exists).
    layers
        Layer name -> GeoDataFrame (each with its CRS set).
    descriptions
        Layer name -> description (the GeoPackage ``gpkg_contents.description``).

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
        options = {}
        if descriptions and name in descriptions:
            options["layer_options"] = {"DESCRIPTION": descriptions[name]}
        gdf.to_file(path, layer=name, driver="GPKG", engine="pyogrio", **options)
    logger.debug("wrote %s", path)
    return path
