"""The coordinate system and units of every output.

geo3d computes in SI: coordinates in a CRS with metre axes (the site CRS, or its metre twin
when the site CRS is in feet, see :func:`geo3d.io.vector.metric_crs`), lengths in m, volumes in
m3.  Every writer (GeoTIFF, GeoPackage, VTK, NetCDF, CSV/JSON, the report, the terminal summary)
converts through one :class:`OutputFrame`, built once from the site file:

* coordinates go to the output CRS: ``[output] crs`` when set, else the CRS declared in
  ``[site] crs``, in that CRS's own axis unit;
* lengths, elevations and depths go to ``[units] output_length``, areas to its square and
  volumes to ``[units] output_volume``;
* the CRS is labelled as declared (its name and code), never as the metre twin.

When the output CRS is the internal CRS with other axis units, coordinates are scaled exactly.
Otherwise points and vector layers are transformed by PROJ, and regular grids (maps, the voxel
model) are resampled onto a regular grid of the output CRS by nearest neighbour: each output
cell takes the value of the internal cell holding its centre, so no value is invented.

References
----------
.. [1] Thompson, A., Taylor, B.N. (2008) Guide for the Use of the International System of Units
   (SI). NIST Special Publication 811 (1 ft = 0.3048 m; 1 US survey ft = 1200/3937 m).
.. [2] PROJ contributors (2024) PROJ coordinate transformation software library.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import cached_property
from typing import Any

import numpy as np
import pyproj
import xarray as xr

from geo3d.errors import CRSError
from geo3d.io.vector import metric_crs
from geo3d.units import factor, from_internal, length_unit_of

__all__ = ["OutputFrame", "crs_label", "unit_of_axis", "LENGTH_LABELS", "VOLUME_LABELS"]

#: How each length unit is written for people (figure axes, table headings).
LENGTH_LABELS: dict[str, str] = {"m": "m", "ft": "ft", "us_survey_ft": "ftUS"}
#: How each volume unit is written for people.
VOLUME_LABELS: dict[str, str] = {"m3": "m\u00b3", "L": "L", "gal": "US gal", "ft3": "ft\u00b3"}
#: UDUNITS spelling of each length unit (NetCDF ``units`` attributes, file metadata).
_UDUNITS = {"m": "m", "ft": "ft", "us_survey_ft": "US_survey_foot"}


def crs_label(crs: pyproj.CRS | None) -> str:
    """Name a CRS for people: its name and its authority code when it has one.

    Examples
    --------
    >>> crs_label(pyproj.CRS("EPSG:2227"))
    'NAD83 / California zone 3 (ftUS) (EPSG:2227)'
    """
    if crs is None:
        return "CRS not given"
    code = crs.to_authority()
    return f"{crs.name} ({code[0]}:{code[1]})" if code else str(crs.name)


def unit_of_axis(crs: pyproj.CRS) -> str:
    """Return the geo3d length unit (``m``, ``ft``, ``us_survey_ft``) of a CRS's first axis.

    Raises
    ------
    CRSError
        If the axis unit is none of these.

    Examples
    --------
    >>> unit_of_axis(pyproj.CRS("EPSG:2227"))
    'us_survey_ft'
    """
    unit = length_unit_of(crs.axis_info[0].unit_conversion_factor)
    if unit is not None:
        return unit
    msg = (
        f"the CRS {crs.name!r} has axes in {crs.axis_info[0].unit_name}; expected metres, feet "
        "or US survey feet"
    )
    raise CRSError(msg)


@dataclass(frozen=True)
class OutputFrame:
    """Output CRS and units, with the conversions from geo3d's internal SI values.

    Parameters
    ----------
    internal_crs
        The CRS of every coordinate inside geo3d (metre axes).
    crs
        The output CRS.
    length_unit
        Output unit of lengths, elevations, depths (areas use its square).
    volume_unit
        Output unit of volumes.
    """

    internal_crs: pyproj.CRS
    crs: pyproj.CRS
    length_unit: str = "m"
    volume_unit: str = "m3"

    @classmethod
    def from_site(cls, site: Any) -> OutputFrame:
        """Build the frame of a :class:`geo3d.site.Site` from its site file.

        The output CRS is ``[output] crs`` when set, else ``[site] crs`` as declared.
        """
        config = site.config
        text = getattr(config.output, "crs", "") or config.site.crs
        return cls(
            internal_crs=site.crs,
            crs=pyproj.CRS.from_user_input(text),
            length_unit=config.units.output_length,
            volume_unit=config.units.output_volume,
        )

    @classmethod
    def metric(cls, crs: pyproj.CRS) -> OutputFrame:
        """Return a frame that writes everything as computed (metres, m3, the internal CRS)."""
        return cls(internal_crs=crs, crs=crs)

    # ------------------------------------------------------------------ labels

    @property
    def label(self) -> str:
        """The output CRS for people, as declared (see :func:`crs_label`)."""
        return crs_label(self.crs)

    @cached_property
    def coordinate_unit(self) -> str:
        """Length unit of the output CRS's axes (``m``, ``ft`` or ``us_survey_ft``)."""
        return unit_of_axis(self.crs)

    @property
    def coordinate_label(self) -> str:
        """Axis unit of the output CRS for people (``m``, ``ft``, ``ftUS``)."""
        return LENGTH_LABELS[self.coordinate_unit]

    @property
    def length_label(self) -> str:
        """Output length unit for people."""
        return LENGTH_LABELS.get(self.length_unit, self.length_unit)

    @property
    def area_label(self) -> str:
        """Output area unit for people."""
        return f"{self.length_label}\u00b2"

    @property
    def volume_label(self) -> str:
        """Output volume unit for people."""
        return VOLUME_LABELS.get(self.volume_unit, self.volume_unit)

    @property
    def length_udunits(self) -> str:
        """Output length unit as UDUNITS writes it (NetCDF ``units``)."""
        return _UDUNITS.get(self.length_unit, self.length_unit)

    @property
    def coordinate_udunits(self) -> str:
        """Axis unit of the output CRS as UDUNITS writes it."""
        return _UDUNITS[self.coordinate_unit]

    # ------------------------------------------------------------------ values

    def length(self, values):
        """Convert lengths (m) to the output length unit."""
        return from_internal(values, self.length_unit, "length")

    def area(self, values):
        """Convert areas (m2) to the square of the output length unit."""
        return from_internal(values, self.length_unit, "length") / factor(
            self.length_unit, "length"
        )

    def volume(self, values):
        """Convert volumes (m3) to the output volume unit."""
        return from_internal(values, self.volume_unit, "volume")

    def coordinate_length(self, values):
        """Convert lengths (m) to the output CRS's axis unit (VTK elevations, cell sizes)."""
        return from_internal(values, self.coordinate_unit, "length")

    # ------------------------------------------------------------------ coordinates

    @cached_property
    def is_scaling(self) -> bool:
        """True when the output CRS is the internal CRS with other axis units."""
        return metric_crs(self.crs).equals(self.internal_crs)

    @cached_property
    def _forward(self) -> pyproj.Transformer:
        return pyproj.Transformer.from_crs(self.internal_crs, self.crs, always_xy=True)

    @cached_property
    def _inverse(self) -> pyproj.Transformer:
        return pyproj.Transformer.from_crs(self.crs, self.internal_crs, always_xy=True)

    def xy(self, x, y) -> tuple[np.ndarray, np.ndarray]:
        """Convert internal coordinates to the output CRS.

        Examples
        --------
        >>> from geo3d.io.vector import metric_crs
        >>> ft = pyproj.CRS("EPSG:2227")
        >>> frame = OutputFrame(internal_crs=metric_crs(ft), crs=ft)
        >>> [round(float(v), 6) for v in frame.xy(1200.0, 0.0)]  # 1 ftUS = 1200/3937 m
        [3937.0, 0.0]
        """
        x = np.asarray(x, dtype=float)
        y = np.asarray(y, dtype=float)
        if self.is_scaling:
            return self.coordinate_length(x), self.coordinate_length(y)
        out_x, out_y = self._forward.transform(x, y)
        return np.asarray(out_x, dtype=float), np.asarray(out_y, dtype=float)

    def xy_internal(self, x, y) -> tuple[np.ndarray, np.ndarray]:
        """Convert output-CRS coordinates back to internal coordinates."""
        x = np.asarray(x, dtype=float)
        y = np.asarray(y, dtype=float)
        if self.is_scaling:
            size = factor(self.coordinate_unit, "length")
            return x * size, y * size
        in_x, in_y = self._inverse.transform(x, y)
        return np.asarray(in_x, dtype=float), np.asarray(in_y, dtype=float)

    def points(self, table, lengths=()):
        """Return a copy of a table with ``x``, ``y`` and the ``lengths`` columns converted.

        Column names are kept (for figures, which label their axes themselves); use
        :func:`geo3d.io.tables.to_output_units` for tables written for people.
        """
        out = table.copy()
        if {"x", "y"} <= set(out.columns):
            out["x"], out["y"] = self.xy(out["x"].to_numpy(float), out["y"].to_numpy(float))
        for column in lengths:
            if column in out.columns:
                out[column] = self.length(out[column].to_numpy(float))
        return out

    def geometry(self, geom):
        """Convert a shapely geometry from internal to output coordinates."""
        if geom is None:
            return None
        import shapely

        return shapely.transform(geom, lambda xy: np.column_stack(self.xy(xy[:, 0], xy[:, 1])))

    def layer(self, gdf):
        """Return a GeoDataFrame (internal CRS) in the output CRS, geometry converted."""
        out = gdf.copy()
        column = out.geometry.name
        out[column] = [self.geometry(g) for g in out.geometry]
        return out.set_geometry(column).set_crs(self.crs, allow_override=True)

    # ------------------------------------------------------------------ grids

    def grid(self, obj: xr.Dataset | xr.DataArray, *, z_unit: str | None = None):
        """Put a regular ``(…, y, x)`` grid in the output CRS and units.

        Parameters
        ----------
        obj
            A map or the voxel model: ascending cell-centre coordinates ``x``, ``y`` (internal
            CRS) and optionally ``z`` (elevation, m). Variables whose ``units`` attribute is
            ``"m"`` are lengths and are converted to the output length unit.
        z_unit
            Unit of the ``z`` coordinate; default the output length unit.

        Returns
        -------
        xarray.Dataset or xarray.DataArray
            ``x``, ``y`` in the output CRS (resampled by nearest neighbour when it is another
            projection), ``z`` in ``z_unit``; ``cell_size`` and ``crs`` attributes updated.
        """
        z_unit = z_unit or self.length_unit
        if self.is_scaling:
            out = obj.assign_coords(
                x=self.coordinate_length(obj["x"].values), y=self.coordinate_length(obj["y"].values)
            )
        else:
            out = self._resample(obj)
        if "z" in out.coords:
            out = out.assign_coords(z=from_internal(out["z"].values, z_unit, "length"))
        out.attrs = dict(obj.attrs)
        out = self._lengths(out)
        if "crs" in obj.attrs:
            out.attrs["crs"] = self.crs.to_wkt()
        if "cell_size" in obj.attrs:
            size = [float(v) for v in np.atleast_1d(obj.attrs["cell_size"])]
            scaled = [float(self.coordinate_length(v)) for v in size[:2]]
            scaled += [float(from_internal(v, z_unit, "length")) for v in size[2:]]
            out.attrs["cell_size"] = scaled
        return out

    def _lengths(self, obj):
        units = self.length_udunits
        if isinstance(obj, xr.DataArray):
            if obj.attrs.get("units") == "m":
                converted = obj.copy(data=self.length(obj.values))
                return converted.assign_attrs(units=units)
            return obj
        for name in list(obj.data_vars):
            if obj[name].attrs.get("units") == "m":
                attrs = {**obj[name].attrs, "units": units}
                obj[name] = obj[name].copy(data=self.length(obj[name].values)).assign_attrs(attrs)
        return obj

    def _resample(self, obj):
        x = np.asarray(obj["x"].values, dtype=float)
        y = np.asarray(obj["y"].values, dtype=float)
        dx = float(x[1] - x[0]) if x.size > 1 else float(np.atleast_1d(obj.attrs["cell_size"])[0])
        dy = float(y[1] - y[0]) if y.size > 1 else float(np.atleast_1d(obj.attrs["cell_size"])[1])
        edges_x = np.array([x[0] - dx / 2, x[-1] + dx / 2, x[-1] + dx / 2, x[0] - dx / 2])
        edges_y = np.array([y[0] - dy / 2, y[0] - dy / 2, y[-1] + dy / 2, y[-1] + dy / 2])
        corner_x, corner_y = self._forward.transform(edges_x, edges_y)
        step_x = float(self.coordinate_length(dx))
        step_y = float(self.coordinate_length(dy))
        new_x = _axis(np.min(corner_x), np.max(corner_x), step_x)
        new_y = _axis(np.min(corner_y), np.max(corner_y), step_y)
        xx, yy = np.meshgrid(new_x, new_y)
        back_x, back_y = self._inverse.transform(xx, yy)
        ix = np.floor((np.asarray(back_x) - (x[0] - dx / 2)) / dx).astype(int)
        iy = np.floor((np.asarray(back_y) - (y[0] - dy / 2)) / dy).astype(int)
        valid = (ix >= 0) & (ix < x.size) & (iy >= 0) & (iy < y.size)
        pick_x = xr.DataArray(np.clip(ix, 0, x.size - 1), dims=("y", "x"))
        pick_y = xr.DataArray(np.clip(iy, 0, y.size - 1), dims=("y", "x"))
        inside = xr.DataArray(valid, dims=("y", "x"))
        picked = obj.isel(x=pick_x, y=pick_y).drop_vars(["x", "y"], errors="ignore")
        picked = picked.assign_coords(x=new_x, y=new_y)
        if isinstance(picked, xr.DataArray):
            return _blank(picked, inside)
        for name in list(picked.data_vars):
            if {"y", "x"} <= set(picked[name].dims):
                picked[name] = _blank(picked[name], inside)
        return picked


def _axis(low: float, high: float, step: float) -> np.ndarray:
    count = max(1, int(math.ceil((high - low) / step - 1e-9)))
    return low + step * (np.arange(count) + 0.5)


def _blank(da: xr.DataArray, inside: xr.DataArray) -> xr.DataArray:
    if da.dtype == bool:
        return da.where(inside, False).astype(bool)
    if da.dtype.kind in "iu":
        return da.where(inside, -1).astype(da.dtype)
    return da.where(inside)
