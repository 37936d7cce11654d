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

from geo3d.analysis.fields import plan_map, require_model
from geo3d.analysis.volumes import Region, Zones, _regions, region_weights
from geo3d.errors import WaterLevelError
from geo3d.model import WaterTable

__all__ = [
    "water_table_map",
    "depth_to_water_map",
    "water_table_gradient",
    "saturated_fraction",
    "saturated_thickness",
]

logger = logging.getLogger(__name__)


def _elevation(water_table: WaterTable, x: np.ndarray, y: np.ndarray) -> np.ndarray:
    if not hasattr(water_table, "elevation"):
        msg = f"water table: expected an object with .elevation(x, y), got {type(water_table)!r}"
        raise WaterLevelError(msg)
    xx, yy = np.meshgrid(x, y)
    values = np.asarray(water_table.elevation(xx.ravel(), yy.ravel()), float)
    if values.size != xx.size:
        msg = f"water table: .elevation returned {values.size} values for {xx.size} points"
        raise WaterLevelError(msg)
    return values.reshape(xx.shape)


def water_table_map(ds: xr.Dataset, water_table: WaterTable) -> xr.DataArray:
    """Water-table elevation at the centre of every grid column.

    Parameters
    ----------
    ds
        The VoxelModel.
    water_table
        Object with ``.elevation(x, y)``; its ``gradient``, ``flow_direction_deg`` and
        ``method`` are copied into the attributes when present.

    Returns
    -------
    xarray.DataArray
        ``wt_elev`` (m), dims ``("y", "x")``, NaN for columns outside the model.
    """
    ds = require_model(ds)
    values = _elevation(water_table, ds["x"].values, ds["y"].values)
    attrs: dict[str, Any] = {"units": "m", "long_name": "water-table elevation"}
    for attr in ("gradient", "flow_direction_deg", "method"):
        value = getattr(water_table, attr, None)
        if value is not None:
            attrs[attr] = value if isinstance(value, str) else float(value)
    return plan_map(ds, _inside(ds, values), "wt_elev", attrs)


def _inside(ds: xr.Dataset, values: np.ndarray) -> np.ndarray:
    """Values of the model's columns, NaN outside the model."""
    return np.where(ds.voxels.mask.any(axis=0), values, np.nan)


def depth_to_water_map(ds: xr.Dataset, water_table: WaterTable) -> xr.DataArray:
    """Depth from the ground surface to the water table per column (m; negative = artesian)."""
    ds = require_model(ds)
    wt = water_table_map(ds, water_table)
    out = (ds.voxels.ground - wt).rename("depth_to_water")
    out.attrs = {"units": "m", "long_name": "depth to water"}
    return out


def water_table_gradient(ds: xr.Dataset, water_table: WaterTable) -> dict[str, xr.DataArray]:
    """Hydraulic gradient of the water table per column, by central differences on the grid.

    Parameters
    ----------
    ds
        The VoxelModel.
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
    ds = require_model(ds)
    x, y = ds["x"].values, ds["y"].values
    head = _elevation(water_table, x, y)
    if len(x) < 2 or len(y) < 2:
        msg = "water table: the gradient needs a grid at least 2 cells wide in x and y"
        raise WaterLevelError(msg)
    dh_dy, dh_dx = np.gradient(head, y, x)
    magnitude = np.hypot(dh_dx, dh_dy)
    direction = np.degrees(np.arctan2(-dh_dx, -dh_dy)) % 360.0
    return {
        "wt_gradient": plan_map(
            ds,
            _inside(ds, magnitude),
            "wt_gradient",
            {"units": "1", "long_name": "hydraulic gradient of the water table"},
        ),
        "wt_flow_direction_deg": plan_map(
            ds,
            _inside(ds, direction),
            "wt_flow_direction_deg",
            {"units": "degree", "long_name": "down-gradient azimuth from north"},
        ),
    }


def saturated_fraction(ds: xr.Dataset, water_table: WaterTable) -> np.ndarray:
    """Fraction of each cell's height below the water table, shape ``(nz, ny, nx)``."""
    ds = require_model(ds)
    wt = _elevation(water_table, ds["x"].values, ds["y"].values)
    _, _, dz = ds.voxels.cell_size
    z = ds["z"].values[:, None, None]
    return np.clip((wt[None] - (z - dz / 2)) / dz, 0.0, 1.0)


def saturated_thickness(ds: xr.Dataset, zones: Zones, *, water_table: WaterTable) -> pd.DataFrame:
    """Saturated thickness of each treatment zone (and of the whole model).

    The saturated thickness of a column is the height of its zone interval below the water
    table; the table gives its area-weighted mean, minimum and maximum over the zone and the
    saturated bulk volume.

    Parameters
    ----------
    ds
        The VoxelModel.
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
    ds = require_model(ds)
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
