"""GeoTIFF export of 2D maps (thickness, probability, water table...).

A map is an :class:`xarray.DataArray` with dims ``("y", "x")`` whose coordinates are cell
centres, ``x`` and ``y`` ascending, in the site CRS.  A GeoTIFF stores rows from north to south
and its geotransform points at the upper-left *edge* of the upper-left cell, so the rows are
flipped and the origin is moved half a cell out from the first centre.  :func:`write_maps` with
an output frame writes the maps in the output CRS and length unit.  Values are written as
float32, NaN outside the site (and NaN declared as nodata), one band per file with its
description and units.

References
----------
.. [1] OGC (2019) OGC GeoTIFF Standard 1.1, OGC 19-008r4 (raster space, PixelIsArea).
.. [2] GDAL data model: the affine geotransform
   ``Xgeo = GT0 + col*GT1 + row*GT2; Ygeo = GT3 + col*GT4 + row*GT5`` maps pixel *corners*.
"""

from __future__ import annotations

import logging
from collections.abc import Mapping
from os import PathLike
from pathlib import Path

import numpy as np
import pyproj
import rasterio
import xarray as xr
from rasterio.transform import Affine

from geo3d.errors import CRSError, GeometryError
from geo3d.io.output_frame import OutputFrame
from geo3d.units import read_crs

__all__ = ["axis_spacing", "map_transform", "write_geotiff", "write_maps"]

logger = logging.getLogger(__name__)


def axis_spacing(coord: np.ndarray, *, name: str, default: float | None = None) -> float:
    """Return the uniform spacing of an ascending axis of cell centres.

    Parameters
    ----------
    coord
        Cell-centre coordinates, ascending.
    name
        Axis name, for error messages.
    default
        Spacing to use when the axis has a single cell.

    Returns
    -------
    float
        The spacing, > 0.

    Raises
    ------
    GeometryError
        If the axis is not ascending with a uniform spacing, or has one cell and no default.
    """
    values = np.asarray(coord, dtype=float)
    if values.size < 2:
        if default is None or not default > 0:
            msg = f"axis '{name}' has {values.size} cell(s); a cell size is needed to place it"
            raise GeometryError(msg)
        return float(default)
    steps = np.diff(values)
    step = float(np.median(steps))
    if not step > 0 or not np.allclose(steps, step, rtol=1e-6, atol=1e-9 * max(1.0, abs(step))):
        msg = f"axis '{name}' must be ascending with a uniform spacing; got steps {steps[:5]}"
        raise GeometryError(msg)
    return step


def _cell_size_attr(da: xr.DataArray | xr.Dataset) -> tuple[float | None, ...]:
    size = da.attrs.get("cell_size")
    if size is None:
        return (None, None, None)
    size = tuple(float(s) for s in np.atleast_1d(size))
    return size + (None,) * (3 - len(size))


def map_transform(da: xr.DataArray) -> Affine:
    """Return the north-up affine transform of a ``("y", "x")`` map.

    Parameters
    ----------
    da
        Map with ascending cell-centre coordinates ``x`` and ``y``.

    Returns
    -------
    Affine
        Transform from (column, row) of the north-up (rows flipped) raster to (x, y) of the
        cell's upper-left corner; ``transform * (col + 0.5, row + 0.5)`` is the cell centre.

    Examples
    --------
    >>> import numpy as np, xarray as xr
    >>> da = xr.DataArray(np.zeros((2, 3)), dims=("y", "x"),
    ...                   coords={"y": [10.5, 11.5], "x": [0.5, 1.5, 2.5]})
    >>> tuple(map_transform(da))[:6]
    (1.0, 0.0, 0.0, 0.0, -1.0, 12.0)
    """
    dx_attr, dy_attr, _ = _cell_size_attr(da)
    dx = axis_spacing(da["x"].values, name="x", default=dx_attr)
    dy = axis_spacing(da["y"].values, name="y", default=dy_attr)
    west = float(da["x"].values[0]) - dx / 2.0
    north = float(da["y"].values[-1]) + dy / 2.0
    return Affine(dx, 0.0, west, 0.0, -dy, north)


def _crs_of(da: xr.DataArray, crs) -> pyproj.CRS:
    value = crs if crs is not None else da.attrs.get("crs")
    if value is None:
        msg = f"map '{da.name}' has no CRS; pass crs= or set attrs['crs']"
        raise CRSError(msg)
    return read_crs(value, place=f"map '{da.name}'")


def write_geotiff(
    da: xr.DataArray,
    path: str | PathLike,
    *,
    crs=None,
    description: str | None = None,
    units: str | None = None,
) -> Path:
    """Write one 2D map as a single-band, float32, compressed GeoTIFF.

    Parameters
    ----------
    da
        Map with dims ``("y", "x")`` (cell centres, ascending); NaN outside the site.
    path
        Output file.
    crs
        Site CRS (anything :func:`pyproj.CRS.from_user_input` takes); defaults to
        ``da.attrs["crs"]``.
    description
        Band description; defaults to ``da.attrs["long_name"]`` or the map name.
    units
        Units tag; defaults to ``da.attrs["units"]`` (empty when unknown).

    Returns
    -------
    Path
        The file written.

    Raises
    ------
    GeometryError
        If the map is not 2D ``("y", "x")`` on a regular grid.
    CRSError
        If no valid CRS is known.
    """
    if set(da.dims) != {"y", "x"}:
        msg = f"map '{da.name}' must have dims ('y', 'x'); got {da.dims}"
        raise GeometryError(msg)
    da = da.transpose("y", "x")
    transform = map_transform(da)
    site_crs = _crs_of(da, crs)
    data = np.asarray(da.values, dtype="float32")[::-1, :]
    description = description or da.attrs.get("long_name") or str(da.name or "map")
    units = units if units is not None else str(da.attrs.get("units", ""))
    path = Path(path)
    profile = {
        "driver": "GTiff",
        "height": data.shape[0],
        "width": data.shape[1],
        "count": 1,
        "dtype": "float32",
        "crs": rasterio.crs.CRS.from_wkt(site_crs.to_wkt()),
        "transform": transform,
        "nodata": np.nan,
        "compress": "deflate",
        "predictor": 3,
    }
    if min(data.shape) >= 256:
        profile.update(tiled=True, blockxsize=256, blockysize=256)
    with rasterio.open(path, "w", **profile) as dst:
        dst.write(data, 1)
        dst.set_band_description(1, description)
        dst.set_band_unit(1, units)
        dst.update_tags(1, units=units, name=str(da.name or ""))
        dst.update_tags(AREA_OR_POINT="Area", software="geo3d")
    logger.debug("wrote %s (%d x %d)", path, data.shape[1], data.shape[0])
    return path


def write_maps(
    maps: Mapping[str, xr.DataArray],
    out_dir: str | PathLike,
    *,
    crs=None,
    frame: OutputFrame | None = None,
) -> list[Path]:
    """Write every map of a dict as ``<name>.tif`` in a folder.

    Parameters
    ----------
    maps
        Map name -> ``("y", "x")`` DataArray.
    out_dir
        Folder (created when missing).
    crs
        Site CRS; defaults to each map's ``attrs["crs"]``.
    frame
        Output frame: the maps (in internal coordinates and units) are written in its CRS and
        lengths in its length unit (see :meth:`OutputFrame.grid`); replaces ``crs``.

    Returns
    -------
    list of Path
        The files written, in the order of ``maps``.
    """
    out_dir = Path(out_dir)
    out_dir.mkdir(parents=True, exist_ok=True)
    if frame is not None:
        maps = {name: frame.grid(da) for name, da in maps.items()}
        crs = frame.crs
    return [write_geotiff(da, out_dir / f"{name}.tif", crs=crs) for name, da in maps.items()]
