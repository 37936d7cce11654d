"""Water-table products on the voxel grid: the surface, depth to water, saturated thickness.

The water table comes from the logs stage as an object with ``.elevation(x, y)`` (m) and, when
available, ``.gradient`` (m/m) and ``.flow_direction_deg`` (azimuth clockwise from north, down
the gradient).  Maps are :class:`xarray.DataArray` with dims ``("y", "x")`` on the model's
coordinates.
"""

from __future__ import annotations

import logging
from typing import Any

import numpy as np
import pandas as pd
import xarray as xr

from geo3d.analysis.thickness import _dataset
from geo3d.analysis.volumes import Region, _regions, region_weights
from geo3d.errors import WaterLevelError

__all__ = [
    "water_table_map",
    "depth_to_water_map",
    "water_table_gradient",
    "saturated_fraction",
    "saturated_thickness",
]

logger = logging.getLogger(__name__)


def _elevation(water_table: Any, x: np.ndarray, y: np.ndarray) -> np.ndarray:
    if not hasattr(water_table, "elevation"):
        msg = f"water table: expected an object with .elevation(x, y), got {type(water_table)!r}"
        raise WaterLevelError(msg)
    xx, yy = np.meshgrid(x, y)
    values = np.asarray(water_table.elevation(xx.ravel(), yy.ravel()), float)
    if values.size != xx.size:
        msg = f"water table: .elevation returned {values.size} values for {xx.size} points"
        raise WaterLevelError(msg)
    return values.reshape(xx.shape)


def water_table_map(model: Any, water_table: Any) -> xr.DataArray:
    """Water-table elevation at the centre of every grid column.

    Parameters
    ----------
    model
        VoxelModel or ``ModelResult``.
    water_table
        Object with ``.elevation(x, y)``; its ``gradient``, ``flow_direction_deg`` and
        ``method`` are copied into the attributes when present.

    Returns
    -------
    xarray.DataArray
        ``wt_elev`` (m), dims ``("y", "x")``, NaN for columns outside the model.
    """
    ds = _dataset(model)
    values = _elevation(water_table, ds["x"].values, ds["y"].values)
    inside = ds.voxels.mask.any(axis=0)
    out = xr.DataArray(
        np.where(inside, values, np.nan),
        dims=("y", "x"),
        coords={"y": ds["y"], "x": ds["x"]},
        name="wt_elev",
        attrs={"units": "m", "long_name": "water-table elevation"},
    )
    for attr in ("gradient", "flow_direction_deg", "method"):
        value = getattr(water_table, attr, None)
        if value is not None:
            out.attrs[attr] = value if isinstance(value, str) else float(value)
    if ds.attrs.get("crs"):
        out.attrs["crs"] = ds.attrs["crs"]
    return out


def depth_to_water_map(model: Any, water_table: Any) -> xr.DataArray:
    """Depth from the ground surface to the water table per column (m; negative = artesian)."""
    ds = _dataset(model)
    wt = water_table_map(ds, water_table)
    out = (ds.voxels.ground - wt).rename("depth_to_water")
    out.attrs = {"units": "m", "long_name": "depth to water"}
    return out


def water_table_gradient(model: Any, water_table: Any) -> dict[str, xr.DataArray]:
    """Hydraulic gradient of the water table per column, by central differences on the grid.

    Parameters
    ----------
    model
        VoxelModel or ``ModelResult``.
    water_table
        Object with ``.elevation(x, y)``.

    Returns
    -------
    dict of str to xarray.DataArray
        ``wt_gradient`` (magnitude, m/m) and ``wt_flow_direction_deg`` (azimuth of the
        down-gradient direction, degrees clockwise from north), dims ``("y", "x")``, NaN
        outside the model.

    References
    ----------
    .. [1] Freeze, R.A., Cherry, J.A. (1979) Groundwater. Prentice-Hall, section 2.11: flow
       down the hydraulic gradient, i = -grad h, in an isotropic aquifer.
    """
    ds = _dataset(model)
    x, y = ds["x"].values, ds["y"].values
    head = _elevation(water_table, x, y)
    if len(x) < 2 or len(y) < 2:
        msg = "water table: the gradient needs a grid at least 2 cells wide in x and y"
        raise WaterLevelError(msg)
    dh_dy, dh_dx = np.gradient(head, y, x)
    magnitude = np.hypot(dh_dx, dh_dy)
    direction = np.degrees(np.arctan2(-dh_dx, -dh_dy)) % 360.0
    inside = ds.voxels.mask.any(axis=0)
    coords = {"y": ds["y"], "x": ds["x"]}
    return {
        "wt_gradient": xr.DataArray(
            np.where(inside, magnitude, np.nan),
            dims=("y", "x"),
            coords=coords,
            name="wt_gradient",
            attrs={"units": "1", "long_name": "hydraulic gradient of the water table"},
        ),
        "wt_flow_direction_deg": xr.DataArray(
            np.where(inside, direction, np.nan),
            dims=("y", "x"),
            coords=coords,
            name="wt_flow_direction_deg",
            attrs={"units": "degree", "long_name": "down-gradient azimuth from north"},
        ),
    }


def saturated_fraction(model: Any, water_table: Any) -> np.ndarray:
    """Fraction of each cell's height below the water table, shape ``(nz, ny, nx)``."""
    ds = _dataset(model)
    wt = _elevation(water_table, ds["x"].values, ds["y"].values)
    _, _, dz = ds.voxels.cell_size
    z = ds["z"].values[:, None, None]
    return np.clip((wt[None] - (z - dz / 2)) / dz, 0.0, 1.0)


def saturated_thickness(model: Any, zones: Any, *, water_table: Any) -> pd.DataFrame:
    """Saturated thickness of each treatment zone (and of the whole model).

    The saturated thickness of a column is the height of its zone interval below the water
    table; the table gives its area-weighted mean, minimum and maximum over the zone and the
    saturated bulk volume.

    Parameters
    ----------
    model
        VoxelModel or ``ModelResult``.
    zones
        Treatment zones (as for :func:`geo3d.analysis.volumes.zone_volumes`), or None.
    water_table
        Object with ``.elevation(x, y)``.

    Returns
    -------
    pandas.DataFrame
        Columns ``zone``, ``area_m2``, ``mean_saturated_thickness_m``,
        ``min_saturated_thickness_m``, ``max_saturated_thickness_m``,
        ``saturated_volume_m3``.
    """
    ds = _dataset(model)
    sat = saturated_fraction(ds, water_table)
    dx, dy, dz = ds.voxels.cell_size
    rows = []
    regions: list[Region] = _regions(zones, None, include_site=True)
    for region in regions:
        weight, colfrac, _ = region_weights(ds, region)
        thickness = (weight / np.where(colfrac > 0, colfrac, 1.0)[None] * sat).sum(axis=0) * dz
        covered = colfrac * ds.voxels.mask.any(axis=0)
        area = float(covered.sum() * dx * dy)
        used = covered > 0
        rows.append(
            {
                "zone": region.name,
                "area_m2": area,
                "mean_saturated_thickness_m": float((thickness * covered).sum() * dx * dy / area)
                if area > 0
                else np.nan,
                "min_saturated_thickness_m": float(thickness[used].min()) if used.any() else np.nan,
                "max_saturated_thickness_m": float(thickness[used].max()) if used.any() else np.nan,
                "saturated_volume_m3": float((weight * sat).sum() * dx * dy * dz),
            }
        )
    return pd.DataFrame(rows)
