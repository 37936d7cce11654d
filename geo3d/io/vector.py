"""Coordinate reference systems and vector layers: the site boundary and treatment zones.

geo3d works in metres. A site CRS whose axes are in feet (international or US survey) is
replaced inside geo3d by the same projection with metre axes (:func:`metric_crs`), so that
coordinates converted from feet to metres stay correctly georeferenced; every vector layer is
reprojected to that CRS on reading. Layers without a CRS are refused: geo3d cannot guess one.
"""

from __future__ import annotations

import logging
import math
import warnings
from os import PathLike
from pathlib import Path

import numpy as np
import pandas as pd
import pyproj
from shapely.geometry import MultiPolygon, Polygon
from shapely.ops import unary_union

from geo3d.errors import CRSError, Geo3dWarning, GeometryError, where
from geo3d.units import factor, read_crs

__all__ = [
    "parse_crs",
    "metric_crs",
    "read_layer",
    "read_boundary",
    "read_area",
    "read_zones",
    "ZONE_COLUMNS",
]

logger = logging.getLogger(__name__)

#: Columns of the zones table (plus ``geometry``).
ZONE_COLUMNS = ("name", "top", "bottom", "reference", "design_fraction", "radius_of_influence")


def metric_crs(crs: pyproj.CRS) -> pyproj.CRS:
    """Return ``crs`` with metre axes (the same CRS when its axes are already in metres).

    Parameters
    ----------
    crs
        A projected CRS.

    Returns
    -------
    pyproj.CRS
        The same datum, projection and parameters; only the axis unit is the metre. A point of
        ``crs`` at (x, y) ft is at (x * f, y * f) m in the result, f the foot's length in m.

    Examples
    --------
    >>> metric_crs(pyproj.CRS("EPSG:2263")).axis_info[0].unit_name
    'metre'
    """
    if all(abs(a.unit_conversion_factor - 1.0) < 1e-12 for a in crs.axis_info[:2]):
        return crs
    data = crs.to_json_dict()
    for axis in data["coordinate_system"]["axis"]:
        axis["unit"] = "metre"
    data.pop("id", None)
    data["name"] = f"{data.get('name', 'site CRS')} (metre axes)"
    return pyproj.CRS.from_json_dict(data)


def parse_crs(
    text: str, *, length_unit: str = "m", source: str | PathLike | None = None
) -> tuple[pyproj.CRS, pyproj.CRS]:
    """Parse the site CRS and check that it is projected.

    Parameters
    ----------
    text
        EPSG code (``"EPSG:32631"``) or WKT.
    length_unit
        ``[units] length``; a warning is given when it disagrees with the CRS axis unit.
    source
        The site file, for messages.

    Returns
    -------
    declared : pyproj.CRS
        The CRS as written.
    internal : pyproj.CRS
        The same CRS with metre axes (see :func:`metric_crs`), the CRS of every coordinate
        inside geo3d.

    Raises
    ------
    CRSError
        Empty, unknown, or not projected (geographic CRSs have degrees, not lengths).
    """
    place = where(source, column="[site] crs") if source else "[site] crs"
    if not str(text).strip():
        msg = f'{place}: no CRS given; expected an EPSG code ("EPSG:nnnn") or a WKT string'
        raise CRSError(msg)
    crs = read_crs(text, place=place)
    if not crs.is_projected:
        msg = (
            f"{place}: {crs.name!r} is not a projected CRS (its coordinates are angles); "
            "expected a projected CRS in metres or feet, such as a UTM zone"
        )
        raise CRSError(msg)
    axis_factor = crs.axis_info[0].unit_conversion_factor
    declared = factor(length_unit, "length")
    if not math.isclose(axis_factor, declared, rel_tol=1e-9):
        msg = (
            f"{place}: the CRS axes are in {crs.axis_info[0].unit_name} but [units] length is "
            f"{length_unit!r}; coordinates are read in {length_unit!r}: check that they match"
        )
        warnings.warn(msg, Geo3dWarning, stacklevel=2)
    return crs, metric_crs(crs)


def read_layer(path: str | PathLike, *, crs: pyproj.CRS, what: str):
    """Read a vector layer and reproject it to ``crs``.

    Parameters
    ----------
    path
        GeoJSON, GeoPackage or any format GDAL reads.
    crs
        Target CRS (the site's internal CRS).
    what
        What the layer is (for messages): "boundary", "zones".

    Returns
    -------
    geopandas.GeoDataFrame

    Raises
    ------
    GeometryError
        File missing, unreadable or without features.
    CRSError
        The layer has no CRS.
    """
    import geopandas as gpd

    file = Path(path)
    if not file.is_file():
        msg = f"{file}: {what} file not found; expected the file named in site.toml [files]"
        raise GeometryError(msg)
    if file.stat().st_size == 0:
        msg = f"{file}: the {what} file is empty; expected a GeoJSON or GeoPackage layer"
        raise GeometryError(msg)
    try:
        layer = gpd.read_file(file)
    except Exception as exc:  # pyogrio raises its own errors for unreadable files
        msg = f"{file}: cannot read the {what} layer ({exc}); expected GeoJSON or GeoPackage"
        raise GeometryError(msg) from None
    if layer.empty:
        msg = f"{file}: the {what} layer has no features; expected at least one polygon"
        raise GeometryError(msg)
    if layer.crs is None:
        msg = (
            f"{file}: the {what} layer has no CRS; expected one (geo3d does not guess: set it "
            "in your GIS and save again)"
        )
        raise CRSError(msg)
    if layer.crs.is_geographic:
        minx, miny, maxx, maxy = layer.total_bounds
        if max(abs(minx), abs(maxx)) > 180 or max(abs(miny), abs(maxy)) > 90:
            msg = (
                f"{file}: the {what} layer is in {layer.crs.name!r} (degrees) but its "
                f"coordinates reach ({maxx:.0f}, {maxy:.0f}); expected the layer's CRS to be "
                'stated (a GeoJSON without a "crs" member is taken as WGS 84 longitude and '
                "latitude)"
            )
            raise CRSError(msg)
    if not layer.crs.equals(crs):
        logger.info("reprojecting %s from %s to %s", file, layer.crs.name, crs.name)
        layer = layer.to_crs(crs)
    return layer


def _polygons(layer, *, path: Path, what: str) -> list[Polygon | MultiPolygon]:
    geoms = []
    for row, geom in enumerate(layer.geometry, start=1):
        if geom is None or geom.is_empty or geom.geom_type not in ("Polygon", "MultiPolygon"):
            kind = "no geometry" if geom is None or geom.is_empty else geom.geom_type
            msg = f"{where(path, row=row, column='geometry')}: {kind}; expected a polygon"
            raise GeometryError(msg)
        if not geom.is_valid:
            msg = (
                f"{where(path, row=row, column='geometry')}: invalid {what} polygon "
                "(self-intersecting?); expected a valid polygon"
            )
            raise GeometryError(msg)
        geoms.append(geom)
    return geoms


def read_boundary(path: str | PathLike, *, crs: pyproj.CRS) -> Polygon:
    """Read the site boundary: one polygon.

    Parameters
    ----------
    path
        Polygon layer (GeoJSON or GeoPackage).
    crs
        The site's internal CRS; the layer is reprojected to it.

    Returns
    -------
    shapely.Polygon

    Raises
    ------
    GeometryError
        Not a polygon, invalid, or several polygons that do not merge into one.
    CRSError
        The layer has no CRS.
    """
    file = Path(path)
    layer = read_layer(file, crs=crs, what="boundary")
    merged = unary_union(_polygons(layer, path=file, what="boundary"))
    if isinstance(merged, MultiPolygon):
        if len(merged.geoms) != 1:
            msg = (
                f"{file}: the boundary is {len(merged.geoms)} separate polygons; expected one "
                "polygon"
            )
            raise GeometryError(msg)
        merged = merged.geoms[0]
    return merged


def read_area(path: str | PathLike, *, crs: pyproj.CRS, what: str) -> Polygon | MultiPolygon:
    """Read a layer of polygons (such as accessible areas) as one geometry, their union.

    Raises
    ------
    GeometryError
        Missing or unreadable file, or a feature that is not a valid polygon.
    CRSError
        The layer has no CRS.
    """
    file = Path(path)
    return unary_union(_polygons(read_layer(file, crs=crs, what=what), path=file, what=what))


def _zone_number(
    layer: pd.DataFrame, file: Path, column: str, row: int, default: float | None, scale: float
) -> float:
    """Read a number of a zone (``default`` when empty), times ``scale``."""
    value = layer[column].iloc[row] if column in layer.columns else None
    if value is None or (isinstance(value, float) and math.isnan(value)) or value == "":
        if default is None:
            msg = f"{where(file, row=row + 1, column=column)}: empty; expected a number"
            raise GeometryError(msg)
        return default
    try:
        return float(value) * scale
    except (TypeError, ValueError):
        msg = f"{where(file, row=row + 1, column=column)}: {value!r} is not a number"
        raise GeometryError(msg) from None


def _zone_record(
    layer: pd.DataFrame,
    file: Path,
    row: int,
    length: float,
    design_fraction: float,
    radius_of_influence: float,
) -> dict[str, object]:
    """Check one zone's attributes and return them in internal units."""

    def number(column: str, default: float | None, scale: float = 1.0) -> float:
        return _zone_number(layer, file, column, row, default, scale)

    name = layer["name"].iloc[row]
    if name is None or not str(name).strip():
        msg = f"{where(file, row=row + 1, column='name')}: empty; expected a zone name"
        raise GeometryError(msg)
    reference = "depth"
    if "reference" in layer.columns and isinstance(layer["reference"].iloc[row], str):
        reference = layer["reference"].iloc[row].strip().lower() or "depth"
    if reference not in ("depth", "elevation"):
        msg = (
            f"{where(file, row=row + 1, column='reference')}: {reference!r}; expected depth "
            "or elevation"
        )
        raise GeometryError(msg)
    top = number("top", None, length)
    bottom = number("bottom", None, length)
    deeper = bottom > top if reference == "depth" else bottom < top
    if not deeper:
        expected = "top < bottom (depths)" if reference == "depth" else "top > bottom"
        msg = (
            f"{where(file, row=row + 1, column='bottom')}: zone {name!r} top {top:g} m, "
            f"bottom {bottom:g} m; expected {expected}"
        )
        raise GeometryError(msg)
    if reference == "depth" and top < 0:
        msg = f"{where(file, row=row + 1, column='top')}: negative depth; expected >= 0"
        raise GeometryError(msg)
    fraction = number("design_fraction", design_fraction)
    radius = number("radius_of_influence", radius_of_influence, length)
    if not 0 < fraction <= 1 or radius <= 0:
        msg = (
            f"{where(file, row=row + 1)}: zone {name!r} design_fraction {fraction:g}, "
            f"radius_of_influence {radius:g} m; expected 0 < design_fraction <= 1 and a "
            "positive radius"
        )
        raise GeometryError(msg)
    return {
        "name": str(name).strip(),
        "top": top,
        "bottom": bottom,
        "reference": reference,
        "design_fraction": fraction,
        "radius_of_influence": radius,
    }


def read_zones(
    path: str | PathLike,
    *,
    crs: pyproj.CRS,
    length_unit: str = "m",
    design_fraction: float = 0.2,
    radius_of_influence: float = 3.0,
):
    """Read treatment zones.

    Parameters
    ----------
    path
        Polygon layer with properties ``name``, ``top``, ``bottom`` and optionally ``reference``
        (``depth`` or ``elevation``, default depth), ``design_fraction`` and
        ``radius_of_influence``.
    crs
        The site's internal CRS; the layer is reprojected to it.
    length_unit
        Unit of top, bottom and radius_of_influence in the file.
    design_fraction, radius_of_influence
        Defaults (``[treatment]``, radius in m) for zones that do not set them.

    Returns
    -------
    geopandas.GeoDataFrame
        ``name``, ``top``, ``bottom`` (m), ``reference``, ``design_fraction``,
        ``radius_of_influence`` (m), ``geometry``.

    Raises
    ------
    GeometryError
        Missing top/bottom or name, non-numeric values, top not above bottom, unknown
        reference, duplicate names, non-polygon geometry.
    CRSError
        The layer has no CRS.
    """
    import geopandas as gpd

    file = Path(path)
    layer = read_layer(file, crs=crs, what="zones")
    missing = [c for c in ("name", "top", "bottom") if c not in layer.columns]
    if missing:
        msg = (
            f"{file}: zones lack the propert{'ies' if len(missing) > 1 else 'y'} "
            f"{', '.join(map(repr, missing))}; expected name, top, bottom [, reference, "
            f"design_fraction, radius_of_influence]; found "
            f"{', '.join(c for c in layer.columns if c != layer.geometry.name)}"
        )
        raise GeometryError(msg)
    geoms = _polygons(layer, path=file, what="zone")
    length = factor(length_unit, "length")
    records = [
        _zone_record(layer, file, row, length, design_fraction, radius_of_influence)
        for row in range(len(layer))
    ]
    table = pd.DataFrame.from_records(records, columns=list(ZONE_COLUMNS))
    duplicated = table["name"].duplicated(keep=False).to_numpy()
    if duplicated.any():
        rows = ", ".join(str(r + 1) for r in np.flatnonzero(duplicated))
        msg = f"{where(file, column='name')}, rows {rows}: duplicate zone names; expected unique"
        raise GeometryError(msg)
    return gpd.GeoDataFrame(table, geometry=geoms, crs=crs)
