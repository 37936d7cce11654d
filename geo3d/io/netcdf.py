"""CF-1.8 NetCDF export of the voxel model.

The file opens in any CF-aware reader: coordinates carry ``axis``, ``units`` and standard names
(``projection_x_coordinate``, ``projection_y_coordinate``; ``z`` is elevation, ``positive =
"up"``); every data variable carries ``units``, ``long_name`` and ``grid_mapping``, which names a
scalar ``spatial_ref`` variable holding the CRS as CF grid-mapping attributes plus ``crs_wkt``
(and GDAL's ``spatial_ref``).  Booleans are stored as ``int8`` flags with ``flag_values`` and
``flag_meanings``; the facies code is an ``int8`` flag variable with ``_FillValue = -1``.  Data
variables are compressed with zlib.

References
----------
.. [1] Eaton, B. et al. (2020) NetCDF Climate and Forecast (CF) Metadata Conventions, version
   1.8: sections 4 (coordinate types), 3.5 (flags) and 5.6 (grid mappings, ``crs_wkt``).
"""

from __future__ import annotations

import json
import logging
from collections.abc import Hashable, Sequence
from os import PathLike
from pathlib import Path
from typing import Any

import numpy as np
import pyproj
import xarray as xr

from geo3d.errors import CRSError
from geo3d.io.output_frame import OutputFrame
from geo3d.units import read_crs

__all__ = ["VARIABLE_ATTRS", "to_cf", "write_netcdf"]

logger = logging.getLogger(__name__)

#: units and long names of the model variables (no CF standard name exists for them).
VARIABLE_ATTRS: dict[str, dict[str, str]] = {
    "log10_k": {"units": "1", "long_name": "log10 of hydraulic conductivity in m/s (kriged)"},
    "log10_k_var": {"units": "1", "long_name": "kriging variance of log10 hydraulic conductivity"},
    "k": {"units": "m s-1", "long_name": "hydraulic conductivity (10**log10_k)"},
    "ec": {"units": "mS m-1", "long_name": "bulk soil electrical conductivity (kriged)"},
    "ec_var": {"units": "mS2 m-2", "long_name": "kriging variance of bulk soil EC"},
    "facies_code": {"units": "1", "long_name": "hydrofacies code (0 = lowest K class)"},
    "mask": {"units": "1", "long_name": "cell inside the site, below ground and above base"},
    "saturated": {"units": "1", "long_name": "cell below the water table"},
    "realizations": {
        "units": "1",
        "long_name": "log10 of hydraulic conductivity in m/s (conditional simulation)",
    },
}

_FLAG_MEANINGS = {
    "mask": "outside_model inside_model",
    "saturated": "unsaturated saturated",
}


def _grid_mapping(crs: pyproj.CRS) -> xr.DataArray:
    attrs = dict(crs.to_cf())
    wkt = crs.to_wkt()
    attrs["crs_wkt"] = wkt
    attrs["spatial_ref"] = wkt
    return xr.DataArray(np.int32(0), attrs=attrs)


def _facies_names(ds: xr.Dataset, names: Sequence[str] | None) -> list[str]:
    if names is not None:
        return [str(n) for n in names]
    recorded = ds.attrs.get("facies_names")
    if recorded is not None and not isinstance(recorded, str):
        return [str(n) for n in np.ravel(recorded)]
    return [
        str(v)[len("prob_") :]
        for v in ds.data_vars
        if str(v).startswith("prob_") and not str(v).endswith("_kriging")
    ]


def _plain_attr(value):
    if isinstance(value, str | int | float | np.number):
        return value
    if isinstance(value, list | tuple | np.ndarray):
        array = np.asarray(value)
        if array.dtype.kind in "iuf":
            return array
    return json.dumps(value, default=str)


def _coordinates(out: xr.Dataset, xy_units: str, z_units: str) -> xr.Dataset:
    """Give the coordinates their CF attributes (units as written)."""
    for axis in ("x", "y"):
        out[axis].attrs.update(
            standard_name=f"projection_{axis}_coordinate",
            long_name=f"{axis} of cell centre",
            units=xy_units,
            axis=axis.upper(),
        )
    out["z"].attrs.update(
        long_name="elevation of cell centre", units=z_units, axis="Z", positive="up"
    )
    if "realization" in out.dims:
        if "realization" not in out.coords:
            out = out.assign_coords(realization=np.arange(out.sizes["realization"]))
        out["realization"].attrs.update(long_name="realization number", units="1")
    return out


def to_cf(
    ds: xr.Dataset,
    *,
    crs=None,
    facies_names: Sequence[str] | None = None,
    title: str = "",
    frame: OutputFrame | None = None,
) -> xr.Dataset:
    """Return a copy of a voxel model with CF-1.8 metadata, ready to write.

    Parameters
    ----------
    ds
        Voxel model (dims ``("z", "y", "x")``, attribute ``crs`` as WKT).
    crs
        Site CRS; defaults to ``ds.attrs["crs"]``.
    facies_names
        Names of the facies codes 0, 1, ...; defaults to ``ds.attrs["facies_names"]``, else
        the order of the ``prob_<name>`` variables.
    title
        Dataset title.
    frame
        Output frame (:meth:`OutputFrame.grid`: CRS, axis and length units); replaces ``crs``.

    Returns
    -------
    xarray.Dataset
        Booleans as ``int8`` flags, ``facies_code`` as ``int8`` with ``_FillValue`` -1, a
        ``spatial_ref`` grid-mapping variable and CF attributes everywhere.

    Raises
    ------
    CRSError
        If no valid CRS is known.
    """
    xy_units = z_units = "m"
    if frame is not None:
        ds = frame.grid(ds)
        crs = frame.crs
        xy_units, z_units = frame.coordinate_udunits, frame.length_udunits
    value = crs if crs is not None else ds.attrs.get("crs")
    if value is None:
        msg = "voxel model has no CRS; pass crs= or set attrs['crs']"
        raise CRSError(msg)
    site_crs = read_crs(value, place="voxel model")
    names = _facies_names(ds, facies_names)
    out = ds.copy()
    out.attrs = {k: _plain_attr(v) for k, v in ds.attrs.items() if k != "crs"}
    out.attrs.update(
        Conventions="CF-1.8",
        title=title or str(ds.attrs.get("title", "geo3d voxel model")),
        source="geo3d voxel model",
        crs_wkt=site_crs.to_wkt(),
    )
    out = _coordinates(out, xy_units, z_units)
    for name in list(out.data_vars):
        da = out[name]
        attrs = {k: _plain_attr(v) for k, v in da.attrs.items()}
        attrs.update(VARIABLE_ATTRS.get(str(name), {}))
        if str(name).startswith("prob_"):
            attrs.update(
                units="1", long_name=f"probability of hydrofacies '{str(name)[len('prob_') :]}'"
            )
        if da.dtype == bool:
            da = da.astype(np.int8)
            attrs["flag_values"] = np.array([0, 1], dtype=np.int8)
            attrs["flag_meanings"] = _FLAG_MEANINGS.get(str(name), f"not_{name} {name}")
        elif str(name) == "facies_code":
            da = da.fillna(-1).astype(np.int8)
            if names:
                attrs["flag_values"] = np.arange(len(names), dtype=np.int8)
                attrs["flag_meanings"] = " ".join(n.replace(" ", "_") for n in names)
        attrs["grid_mapping"] = "spatial_ref"
        out[name] = da.assign_attrs(attrs)
    out["spatial_ref"] = _grid_mapping(site_crs)
    return out


def write_netcdf(
    ds: xr.Dataset,
    path: str | PathLike,
    *,
    crs=None,
    facies_names: Sequence[str] | None = None,
    title: str = "",
    complevel: int = 4,
    frame: OutputFrame | None = None,
) -> Path:
    """Write the voxel model as a compressed CF-1.8 NetCDF-4 file.

    Parameters
    ----------
    ds
        Voxel model.
    path
        Output file (``.nc``).
    crs, facies_names, title, frame
        See :func:`to_cf`.
    complevel
        zlib compression level (1-9).

    Returns
    -------
    Path
        The file written.
    """
    path = Path(path)
    cf = to_cf(ds, crs=crs, facies_names=facies_names, title=title, frame=frame)
    encoding: dict[Hashable, dict[str, Any]] = {}
    for name, da in cf.data_vars.items():
        if name == "spatial_ref":
            continue
        enc: dict[str, Any] = {"zlib": True, "complevel": int(complevel)}
        if da.dtype.kind == "f":
            enc["_FillValue"] = np.float32(np.nan) if da.dtype == np.float32 else np.nan
        elif str(name) == "facies_code":
            enc["_FillValue"] = np.int8(-1)
        else:
            enc["_FillValue"] = None
        encoding[name] = enc
    for name in cf.coords:
        encoding[name] = {"_FillValue": None}
    cf.to_netcdf(path, engine="netcdf4", format="NETCDF4", encoding=encoding)
    logger.debug("wrote %s", path)
    return path
