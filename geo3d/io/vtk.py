"""VTK export for 3D viewers: voxel model, borings, zone outlines and water table.

Files are in the site CRS with true elevations; a vertical exaggeration is a setting of the
viewer and is never written into the files.

* ``model.vti`` - the voxel model as VTK image data: the image origin is the lower (west, south,
  bottom) *edge* of the first cell, the spacing is the cell size, and every model variable on
  dims ``("z", "y", "x")`` is a cell array (NaN outside the mask; floats as float32, which is
  ample for viewing and halves the file; booleans as 0/1 ``uint8``).
  VTK orders cells with x fastest, then y, then z, which is NumPy's C order of a
  ``("z", "y", "x")`` array.
* ``borings.vtp`` - each boring as a polyline through its samples at their elevations, with
  per-point ``log10_k``, ``ec``, ``depth``, ``facies_code`` and the flags (0/1).
* ``site.vtm`` - a multiblock with the model, the borings, the treatment-zone outlines
  (extruded from their top to their bottom elevation) and the water-table surface; it can
  point at ``model.vti`` and ``borings.vtp`` already written instead of copying them.

References
----------
.. [1] Kitware (2024) VTK File Formats: XML image data (``.vti``), poly data (``.vtp``) and
   multiblock (``.vtm``) files; cell data ordering with the x index varying fastest.
.. [2] Sullivan, C.B., Kaszynski, A. (2019) PyVista: 3D plotting and mesh analysis through a
   streamlined interface for the Visualization Toolkit (VTK). JOSS 4(37), 1450.
"""

from __future__ import annotations

import logging
import os
from os import PathLike
from pathlib import Path
from xml.sax.saxutils import quoteattr

import geopandas as gpd
import numpy as np
import pandas as pd
import pyvista as pv
import shapely
import xarray as xr

from geo3d.errors import GeometryError
from geo3d.io.geotiff import axis_spacing
from geo3d.logs.flags import FLAGS

__all__ = [
    "model_to_image",
    "borings_to_polydata",
    "zone_outlines",
    "water_table_surface",
    "write_model_vti",
    "write_borings_vtp",
    "write_site_vtm",
]

logger = logging.getLogger(__name__)


def _cell_sizes(ds: xr.Dataset) -> tuple[float, float, float]:
    attr = ds.attrs.get("cell_size")
    defaults: list[float | None] = [None, None, None]
    if attr is not None:
        values: list[float | None] = [float(v) for v in np.atleast_1d(attr)]
        defaults = (values + [None] * (3 - len(values)))[:3]
    dx, dy, dz = (
        axis_spacing(ds[name].values, name=name, default=default)
        for name, default in zip(("x", "y", "z"), defaults, strict=True)
    )
    return dx, dy, dz


def _cell_values(da: xr.DataArray) -> np.ndarray:
    values = np.asarray(da.transpose("z", "y", "x").values)
    if values.dtype == bool:
        values = values.astype(np.uint8)
    elif values.dtype.kind == "f":
        values = values.astype(np.float32)
    return values.ravel(order="C")


def model_to_image(ds: xr.Dataset, *, include_realizations: bool = False) -> pv.ImageData:
    """Convert a voxel model to VTK image data with one cell array per variable.

    Parameters
    ----------
    ds
        Voxel model (dims ``("z", "y", "x")``, cell-centre coordinates ascending).
    include_realizations
        Also write each simulated realization of the ``realizations`` variable as a cell
        array ``realization_<i>`` (off by default: they are in the NetCDF file).

    Returns
    -------
    pyvista.ImageData
        Origin at the lower edge of the first cell, spacing equal to the cell size.

    Raises
    ------
    GeometryError
        If the dataset lacks ``x``, ``y`` or ``z`` or the axes are not regular.
    """
    for name in ("x", "y", "z"):
        if name not in ds.coords:
            msg = f"voxel model has no '{name}' coordinate; expected dims ('z', 'y', 'x')"
            raise GeometryError(msg)
    dx, dy, dz = _cell_sizes(ds)
    nx, ny, nz = ds.sizes["x"], ds.sizes["y"], ds.sizes["z"]
    image = pv.ImageData(
        dimensions=(nx + 1, ny + 1, nz + 1),
        spacing=(dx, dy, dz),
        origin=(
            float(ds["x"].values[0]) - dx / 2.0,
            float(ds["y"].values[0]) - dy / 2.0,
            float(ds["z"].values[0]) - dz / 2.0,
        ),
    )
    for key, da in ds.data_vars.items():
        if set(da.dims) == {"z", "y", "x"}:
            image.cell_data[str(key)] = _cell_values(da)
        elif include_realizations and set(da.dims) == {"realization", "z", "y", "x"}:
            for i in range(da.sizes["realization"]):
                image.cell_data[f"{key}_{i:03d}"] = _cell_values(da.isel(realization=i))
    return image


def _facies_at(samples: pd.DataFrame, intervals: pd.DataFrame | None) -> np.ndarray:
    codes = np.full(len(samples), -1, dtype=np.int16)
    if intervals is None or intervals.empty or "facies_code" not in intervals:
        return codes
    positions = np.arange(len(samples))
    for boring, rows in samples.groupby("boring_id", sort=False).indices.items():
        ints = intervals[intervals["boring_id"] == boring].sort_values("top")
        if ints.empty:
            continue
        depth = samples["depth"].to_numpy(float)[rows]
        top = ints["top"].to_numpy(float)
        bottom = ints["bottom"].to_numpy(float)
        k = np.searchsorted(top, depth, side="right") - 1
        valid = (k >= 0) & (depth <= bottom[np.clip(k, 0, None)])
        codes[positions[rows][valid]] = ints["facies_code"].to_numpy()[k[valid]]
    return codes


def borings_to_polydata(
    samples: pd.DataFrame,
    *,
    intervals: pd.DataFrame | None = None,
) -> pv.PolyData:
    """Build one polyline per boring through its samples, at their elevations.

    Parameters
    ----------
    samples
        Per-sample table: ``boring_id``, ``x``, ``y``, ``elev``, ``depth`` and, when present,
        ``log10_k``, ``ec`` and the boolean flags of :data:`geo3d.logs.flags.FLAGS`.
    intervals
        Composited intervals with ``boring_id``, ``top``, ``bottom``, ``facies_code``; gives
        each sample the facies code of the interval holding it (-1 where none).

    Returns
    -------
    pyvista.PolyData
        Points with arrays ``depth``, ``log10_k``, ``ec``, ``facies_code``, each flag (0/1) and
        ``boring_index``; a field array ``boring_id`` lists the borings by index.

    Raises
    ------
    GeometryError
        If a required column is missing.
    """
    needed = {"boring_id", "x", "y", "elev", "depth"}
    missing = needed - set(samples.columns)
    if missing:
        msg = f"samples table lacks column(s) {sorted(missing)}; expected {sorted(needed)}"
        raise GeometryError(msg)
    samples = samples.sort_values(["boring_id", "depth"], kind="stable").reset_index(drop=True)
    points = samples[["x", "y", "elev"]].to_numpy(float)
    lines: list[int] = []
    boring_ids: list[str] = []
    boring_index = np.zeros(len(samples), dtype=np.int32)
    for i, (boring, rows) in enumerate(samples.groupby("boring_id", sort=False).indices.items()):
        boring_ids.append(str(boring))
        boring_index[rows] = i
        lines.extend([len(rows), *rows.tolist()])
    poly = pv.PolyData(points, lines=np.asarray(lines, dtype=np.int64) if lines else None)
    poly.point_data["depth"] = samples["depth"].to_numpy(float)
    for name in ("log10_k", "ec"):
        values = samples[name].to_numpy(float) if name in samples else np.full(len(samples), np.nan)
        poly.point_data[name] = values
    poly.point_data["facies_code"] = _facies_at(samples, intervals)
    for flag in FLAGS:
        if flag in samples:
            poly.point_data[flag] = samples[flag].fillna(False).to_numpy(bool).astype(np.uint8)
    poly.point_data["boring_index"] = boring_index
    poly.field_data["boring_id"] = np.asarray(boring_ids, dtype=str)
    return poly


def _ground_elevation(model: xr.Dataset, polygon) -> float:
    """Mean top-of-model elevation over the columns inside a polygon."""
    mask = model["mask"].transpose("z", "y", "x").values
    dz = _cell_sizes(model)[2]
    z_top = np.asarray(model["z"].values, float) + dz / 2.0
    has = mask.any(axis=0)
    top_index = mask.shape[0] - 1 - np.argmax(mask[::-1], axis=0)
    ground = np.where(has, z_top[top_index], np.nan)
    xx, yy = np.meshgrid(model["x"].values, model["y"].values)
    inside = shapely.contains_xy(polygon, xx, yy) & has
    if not inside.any():
        inside = has
    return float(np.nanmean(ground[inside])) if inside.any() else float("nan")


def zone_outlines(zones: gpd.GeoDataFrame, *, model: xr.Dataset | None = None) -> pv.PolyData:
    """Extrude each treatment-zone outline from its top to its bottom elevation as lines.

    Parameters
    ----------
    zones
        Treatment zones with ``name``, ``top``, ``bottom`` and ``reference`` (``depth`` or
        ``elevation``) and polygon geometry.
    model
        Voxel model; for zones given in depth, the ground elevation is the mean top of the
        model's mask over the zone (required then).

    Returns
    -------
    pyvista.PolyData
        Lines: the top ring, the bottom ring and a vertical edge at each vertex, with the cell
        array ``zone_index`` and the field array ``zone_name``.

    Raises
    ------
    GeometryError
        If a zone in depth is given without a model.
    """
    points: list[np.ndarray] = []
    lines: list[int] = []
    zone_index: list[int] = []
    names: list[str] = []
    offset = 0
    for i, zone in enumerate(zones.itertuples(index=False)):
        names.append(str(zone.name))
        reference = str(getattr(zone, "reference", "depth") or "depth")
        top, bottom = float(zone.top), float(zone.bottom)
        if reference == "depth":
            if model is None:
                msg = f"zone '{zone.name}' is given in depth; a voxel model is needed to place it"
                raise GeometryError(msg)
            ground = _ground_elevation(model, zone.geometry)
            top, bottom = ground - top, ground - bottom
        polygons = getattr(zone.geometry, "geoms", [zone.geometry])
        for polygon in polygons:
            ring = np.asarray(polygon.exterior.coords)[:-1, :2]
            n = len(ring)
            upper = np.column_stack([ring, np.full(n, top)])
            lower = np.column_stack([ring, np.full(n, bottom)])
            points.extend([upper, lower])
            closed = [*range(n), 0]
            lines.extend([n + 1, *(offset + j for j in closed)])
            lines.extend([n + 1, *(offset + n + j for j in closed)])
            zone_index.extend([i, i])
            for j in range(n):
                lines.extend([2, offset + j, offset + n + j])
                zone_index.append(i)
            offset += 2 * n
    if not points:
        poly = pv.PolyData()
    else:
        poly = pv.PolyData(np.vstack(points), lines=np.asarray(lines, dtype=np.int64))
        poly.cell_data["zone_index"] = np.asarray(zone_index, dtype=np.int32)
    poly.field_data["zone_name"] = np.asarray(names, dtype=str)
    return poly


def water_table_surface(wt_map: xr.DataArray) -> pv.StructuredGrid:
    """Make the water-table surface from a ``("y", "x")`` map of its elevation.

    Points sit at the cell centres at the water-table elevation.  Points where the map is NaN
    (outside the site) are hidden (VTK blanking) and placed at the mean elevation.

    Parameters
    ----------
    wt_map
        Water-table elevation, m, on cell centres.

    Returns
    -------
    pyvista.StructuredGrid
        With the point array ``wt_elev`` (NaN where hidden).
    """
    wt_map = wt_map.transpose("y", "x")
    # "ij" arrays of shape (nx, ny): VTK orders structured points with x fastest, which is the
    # C order of the ("y", "x") map.
    xx, yy = np.meshgrid(wt_map["x"].values, wt_map["y"].values, indexing="ij")
    values = np.asarray(wt_map.values, dtype=float)
    finite = np.isfinite(values)
    fill = float(np.nanmean(values)) if finite.any() else 0.0
    zz = np.where(finite, values, fill).T
    grid = pv.StructuredGrid(xx, yy, zz)
    grid.point_data["wt_elev"] = values.ravel(order="C")
    hidden = np.flatnonzero(~finite.ravel(order="C"))
    if hidden.size and hidden.size < values.size:
        grid.hide_points(hidden.tolist())
    return grid


def write_model_vti(
    model: xr.Dataset, path: str | PathLike, *, include_realizations: bool = False
) -> Path:
    """Write the voxel model as ``.vti`` (see :func:`model_to_image`); return the file."""
    return _save(model_to_image(model, include_realizations=include_realizations), path)


def write_borings_vtp(
    samples: pd.DataFrame, path: str | PathLike, *, intervals: pd.DataFrame | None = None
) -> Path:
    """Write the borings as ``.vtp`` polylines (see :func:`borings_to_polydata`)."""
    return _save(borings_to_polydata(samples, intervals=intervals), path)


def _save(dataset: pv.DataSet, path: str | PathLike) -> Path:
    path = Path(path)
    dataset.save(path)
    logger.debug("wrote %s", path)
    return path


def write_site_vtm(
    model: xr.Dataset,
    path: str | PathLike,
    *,
    samples: pd.DataFrame | None = None,
    intervals: pd.DataFrame | None = None,
    zones: gpd.GeoDataFrame | None = None,
    water_table: xr.DataArray | None = None,
    model_file: str | PathLike | None = None,
    borings_file: str | PathLike | None = None,
) -> Path:
    """Write the site multiblock ``.vtm``; its own blocks go in a folder of the same stem.

    Parameters
    ----------
    model
        Voxel model.
    samples, intervals
        Per-sample table and intervals (see :func:`borings_to_polydata`).
    zones
        Treatment zones (see :func:`zone_outlines`).
    water_table
        Water-table elevation map (see :func:`water_table_surface`).
    path
        The ``.vtm`` file.
    model_file, borings_file
        A ``model.vti`` / ``borings.vtp`` already written (in the same folder or below it):
        the multiblock then refers to it instead of writing a copy.

    Returns
    -------
    Path
        The ``.vtm`` file written.
    """
    path = Path(path)
    folder = path.parent / path.stem
    folder.mkdir(parents=True, exist_ok=True)
    entries: list[tuple[str, str]] = []

    def block(name: str, dataset, suffix: str, existing) -> None:
        if existing is not None:
            entries.append((name, Path(os.path.relpath(existing, path.parent)).as_posix()))
            return
        target = folder / f"{name}{suffix}"
        dataset().save(target)
        entries.append((name, f"{path.stem}/{target.name}"))

    block("model", lambda: model_to_image(model), ".vti", model_file)
    if samples is not None and len(samples):
        block(
            "borings",
            lambda: borings_to_polydata(samples, intervals=intervals),
            ".vtp",
            borings_file,
        )
    if zones is not None and len(zones):
        block("zones", lambda: zone_outlines(zones, model=model), ".vtp", None)
    if water_table is not None:
        block("water_table", lambda: water_table_surface(water_table), ".vts", None)
    lines = [
        '<?xml version="1.0"?>',
        '<VTKFile type="vtkMultiBlockDataSet" version="1.0" byte_order="LittleEndian">',
        "  <vtkMultiBlockDataSet>",
        *(
            f'    <DataSet index="{i}" name={quoteattr(name)} file={quoteattr(file)}/>'
            for i, (name, file) in enumerate(entries)
        ),
        "  </vtkMultiBlockDataSet>",
        "</VTKFile>",
    ]
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    logger.debug("wrote %s", path)
    return path
