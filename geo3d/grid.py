"""The voxel grid of the site model, its masks and the ``voxels`` xarray accessor.

Coordinates are ``(x, y, z)`` in the site CRS with ``z`` the elevation, upward.  A grid is an
:class:`xarray.Dataset` with dims ``("z", "y", "x")`` whose coordinates are the cell centres, all
ascending.  Its attributes hold the CRS (WKT) and the cell size ``(dx, dy, dz)``; the 2D variable
``ground_elev`` holds the ground surface of each column, so that depths can be recovered from
elevations (:meth:`VoxelAccessor.depth_of`) without the 3D model ever storing depth.

Domain methods live on the ``voxels`` accessor (``ds.voxels.cell_volume``,
``ds.voxels.centres()``, ``ds.voxels.column_fraction(polygon)``,
``ds.voxels.facies_classes``) so that slicing, plotting and NetCDF come from xarray; the VTK
image of a model is :func:`geo3d.io.vtk.model_to_image`.
"""

from __future__ import annotations

import logging
import math
from collections.abc import Sequence
from typing import TYPE_CHECKING, TypeAlias

import numpy as np
import pandas as pd
import pyproj
import shapely
import xarray as xr
from scipy.interpolate import griddata
from scipy.ndimage import map_coordinates
from scipy.spatial import QhullError, cKDTree

from geo3d.errors import CRSError, GeometryError, ModelError
from geo3d.facies import FaciesClasses

if TYPE_CHECKING:
    from affine import Affine

__all__ = [
    "CRSInput",
    "Raster",
    "make_grid",
    "ground_surface",
    "build_mask",
    "site_grid",
    "height_fraction",
    "VoxelAccessor",
]

logger = logging.getLogger(__name__)

#: A CRS as :meth:`pyproj.CRS.from_user_input` takes it: ``"EPSG:32633"``, an EPSG code, WKT,
#: a PROJ string or a :class:`pyproj.CRS`; None or ``""`` = no CRS.
CRSInput: TypeAlias = "pyproj.CRS | str | int | None"

#: A 2D raster and its affine transform (pixel corner to map coordinates).
Raster: TypeAlias = "tuple[np.ndarray, Affine]"


def _crs_wkt(crs: CRSInput) -> str:
    if crs is None or crs == "":
        return ""
    try:
        return pyproj.CRS.from_user_input(crs).to_wkt()
    except pyproj.exceptions.CRSError as exc:
        msg = f"grid: CRS {crs!r} is not valid ({exc}); expected an EPSG code, WKT or PROJ string"
        raise CRSError(msg) from exc


def _check_polygon(boundary: object, what: str = "boundary") -> shapely.Geometry:
    if not isinstance(boundary, shapely.Geometry) or boundary.geom_type not in (
        "Polygon",
        "MultiPolygon",
    ):
        msg = f"grid: {what} must be a shapely Polygon or MultiPolygon, got {type(boundary)!r}"
        raise GeometryError(msg)
    if boundary.is_empty or boundary.area <= 0:
        msg = f"grid: {what} is empty or has zero area; expected a polygon with positive area"
        raise GeometryError(msg)
    return boundary


def _cell_size(cell_size: Sequence[float]) -> tuple[float, float, float]:
    try:
        dx, dy, dz = (float(v) for v in cell_size)
    except (TypeError, ValueError) as exc:
        msg = f"grid: cell_size must be three numbers (dx, dy, dz), got {cell_size!r}"
        raise ModelError(msg) from exc
    if min(dx, dy, dz) <= 0 or not all(map(math.isfinite, (dx, dy, dz))):
        msg = f"grid: cell_size must be positive and finite, got {(dx, dy, dz)}"
        raise ModelError(msg)
    return dx, dy, dz


def _plan_axes(
    boundary: shapely.Geometry, cell_size: Sequence[float], padding: float
) -> tuple[np.ndarray, np.ndarray]:
    """Column-centre coordinates ``x`` and ``y`` over the padded bounds of the boundary."""
    boundary = _check_polygon(boundary)
    dx, dy, _ = _cell_size(cell_size)
    minx, miny, maxx, maxy = boundary.bounds
    minx, miny, maxx, maxy = minx - padding, miny - padding, maxx + padding, maxy + padding
    # a tolerance keeps a boundary that is a whole number of cells from gaining a cell
    nx = max(1, math.ceil((maxx - minx) / dx - 1e-9))
    ny = max(1, math.ceil((maxy - miny) / dy - 1e-9))
    return minx + dx * (np.arange(nx) + 0.5), miny + dy * (np.arange(ny) + 0.5)


def make_grid(
    boundary: shapely.Geometry,
    *,
    cell_size: Sequence[float],
    top: float,
    base: float,
    crs: CRSInput = None,
    padding: float = 0.0,
) -> xr.Dataset:
    """Make an empty voxel grid over the bounds of a boundary polygon.

    Parameters
    ----------
    boundary
        Site boundary (shapely Polygon or MultiPolygon) in the site CRS.
    cell_size
        ``(dx, dy, dz)`` in m.
    top, base
        Elevations (m) of the top and the base of the grid; the cells fill ``[base, top]`` from
        the base up (the top is rounded up to a whole number of cells).
    crs
        Site CRS (anything :func:`pyproj.CRS.from_user_input` accepts); stored as WKT.
    padding
        Extend the grid by this distance (m) beyond the bounds of the boundary.

    Returns
    -------
    xarray.Dataset
        Coordinates ``z``, ``y``, ``x`` at cell centres, ascending; attributes ``crs`` (WKT),
        ``cell_size`` and ``boundary_wkt`` (the site boundary).  No data variables yet.
    """
    x, y = _plan_axes(boundary, cell_size, padding)
    dx, dy, dz = _cell_size(cell_size)
    if not (math.isfinite(top) and math.isfinite(base)) or top <= base:
        msg = f"grid: top ({top}) must be above base ({base}); both are elevations in m"
        raise ModelError(msg)
    nx, ny = x.size, y.size
    nz = max(1, math.ceil((top - base) / dz - 1e-9))
    z = base + dz * (np.arange(nz) + 0.5)
    ds = xr.Dataset(coords={"z": z, "y": y, "x": x})
    ds["x"].attrs.update(units="m", long_name="easting of cell centre")
    ds["y"].attrs.update(units="m", long_name="northing of cell centre")
    ds["z"].attrs.update(units="m", long_name="elevation of cell centre", positive="up")
    ds.attrs["crs"] = _crs_wkt(crs)
    ds.attrs["cell_size"] = [dx, dy, dz]
    ds.attrs["boundary_wkt"] = _check_polygon(boundary).wkt
    logger.debug("grid of %d x %d x %d cells", nz, ny, nx)
    return ds


def ground_surface(
    x: np.ndarray,
    y: np.ndarray,
    *,
    borings: pd.DataFrame | None = None,
    dem: Raster | None = None,
) -> np.ndarray:
    """Ground elevation at the centres of the grid columns.

    From a DEM when one is given (bilinear, nodata filled from the nearest valid pixel), otherwise
    from the boring collars: linear interpolation of ``ground_elev`` on their Delaunay
    triangulation, nearest collar outside the hull (or everywhere when the collars are fewer
    than three or collinear).

    Parameters
    ----------
    x, y
        1D ascending cell-centre coordinates of the grid.
    borings
        Table with columns ``x``, ``y``, ``ground_elev``.
    dem
        ``(array, affine)``: a 2D elevation raster (NaN = nodata) and its rasterio/affine
        transform (pixel corner to map coordinates).

    Returns
    -------
    numpy.ndarray
        Shape ``(len(y), len(x))``.
    """
    xx, yy = np.meshgrid(np.asarray(x, float), np.asarray(y, float))
    if dem is not None:
        array, transform = dem
        array = np.asarray(array, float)
        if array.ndim != 2 or array.size == 0:
            msg = f"ground surface: DEM must be a 2D array, got shape {array.shape}"
            raise GeometryError(msg)
        valid = np.isfinite(array)
        if not valid.any():
            msg = "ground surface: DEM has no valid pixel"
            raise GeometryError(msg)
        if not valid.all():
            rows, cols = np.nonzero(valid)
            tree = cKDTree(np.column_stack([rows, cols]))
            bad = np.argwhere(~valid)
            _, idx = tree.query(bad)
            array = array.copy()
            array[bad[:, 0], bad[:, 1]] = array[rows[idx], cols[idx]]
        inverse = ~transform
        col = inverse.a * xx.ravel() + inverse.b * yy.ravel() + inverse.c
        row = inverse.d * xx.ravel() + inverse.e * yy.ravel() + inverse.f
        # pixel centres sit at (row + 0.5, col + 0.5)
        values = map_coordinates(
            array, [np.asarray(row) - 0.5, np.asarray(col) - 0.5], order=1, mode="nearest"
        )
        return values.reshape(xx.shape)
    if borings is None or len(borings) == 0:
        msg = "ground surface: needs the boring collars (x, y, ground_elev) or a DEM"
        raise ModelError(msg)
    missing = {"x", "y", "ground_elev"} - set(borings.columns)
    if missing:
        msg = f"ground surface: borings table lacks column(s) {sorted(missing)}"
        raise ModelError(msg)
    points = borings[["x", "y"]].to_numpy(float)
    elev = borings["ground_elev"].to_numpy(float)
    nearest = griddata(points, elev, (xx, yy), method="nearest")
    if len(points) < 3:
        return nearest
    try:
        linear = griddata(points, elev, (xx, yy), method="linear")
    except QhullError:
        return nearest
    return np.where(np.isfinite(linear), linear, nearest)


def height_fraction(
    z: np.ndarray, dz: float, lower: np.ndarray | float, upper: np.ndarray | float
) -> np.ndarray:
    """Fraction of each cell's height that lies between two elevations.

    Parameters
    ----------
    z
        Cell-centre elevations, shape ``(nz,)``.
    dz
        Cell height.
    lower, upper
        Elevation limits, scalars or ``(ny, nx)`` arrays (NaN = no limit).

    Returns
    -------
    numpy.ndarray
        Shape ``(nz, ny, nx)`` (or ``(nz,)`` for scalar limits), values in ``[0, 1]``.

    Examples
    --------
    >>> height_fraction(np.array([0.5, 1.5]), 1.0, 0.25, 1.5).tolist()
    [0.75, 0.5]
    """
    z = np.asarray(z, float)
    low = np.nan_to_num(np.asarray(lower, float), nan=-np.inf)
    high = np.nan_to_num(np.asarray(upper, float), nan=np.inf)
    zz = z.reshape((-1,) + (1,) * low.ndim)
    covered = np.minimum(zz + dz / 2, high) - np.maximum(zz - dz / 2, low)
    return np.clip(covered / dz, 0.0, 1.0)


def build_mask(
    grid: xr.Dataset,
    boundary: shapely.Geometry,
    *,
    ground: np.ndarray,
    base: float,
) -> xr.DataArray:
    """Cells of the model: centre inside the boundary, below the ground and above the base.

    Parameters
    ----------
    grid
        A grid from :func:`make_grid`.
    boundary
        Site boundary polygon.
    ground
        Ground elevation per column, shape ``(ny, nx)``.
    base
        Elevation of the model base.

    Returns
    -------
    xarray.DataArray
        Boolean, dims ``("z", "y", "x")``.
    """
    boundary = _check_polygon(boundary)
    xx, yy = np.meshgrid(grid["x"].values, grid["y"].values)
    # centres on the boundary line count as inside
    inside = shapely.intersects_xy(boundary, xx, yy)
    z = grid["z"].values[:, None, None]
    ground = np.asarray(ground, float)
    mask = inside[None] & (z <= ground[None]) & (z >= base)
    return xr.DataArray(mask, dims=("z", "y", "x"), coords={k: grid[k] for k in ("z", "y", "x")})


def site_grid(
    boundary: shapely.Geometry,
    *,
    cell_size: Sequence[float],
    base: float,
    crs: CRSInput,
    padding: float,
    borings: pd.DataFrame | None = None,
    dem: Raster | None = None,
) -> xr.Dataset:
    """Make the model grid of a site: from the base up to the highest ground, with its mask.

    The column centres come from the boundary; the ground surface of each column
    (:func:`ground_surface`, from the DEM or the collars) sets the top of the grid; the mask
    (:func:`build_mask`) keeps the cells inside the boundary, below the ground and above the
    base.

    Parameters
    ----------
    boundary
        Site boundary polygon.
    cell_size
        ``(dx, dy, dz)`` in m.
    base
        Elevation of the model base (m).
    crs
        Site CRS.
    padding
        Grid padding beyond the boundary (m).
    borings
        Collars: ``x``, ``y``, ``ground_elev`` (used without a DEM).
    dem
        ``(array, affine)`` ground raster.

    Returns
    -------
    xarray.Dataset
        A grid from :func:`make_grid` with ``ground_elev`` (y, x), ``mask`` (z, y, x) and the
        attribute ``base``.

    Raises
    ------
    ModelError
        When the ground is not above the base or no cell is inside the mask.
    """
    x, y = _plan_axes(boundary, cell_size, padding)
    ground = ground_surface(x, y, borings=borings, dem=dem)
    top = float(np.nanmax(ground))
    if top <= base:
        msg = f"model: the ground ({top:.2f} m) is not above the base ({base:.2f} m)"
        raise ModelError(msg)
    ds = make_grid(boundary, cell_size=cell_size, top=top, base=base, crs=crs, padding=padding)
    ds["ground_elev"] = (("y", "x"), ground)
    ds["ground_elev"].attrs.update(units="m", long_name="ground elevation")
    ds["mask"] = build_mask(ds, boundary, ground=ground, base=base)
    if not ds["mask"].values.any():
        msg = "model: no cell lies inside the boundary, below the ground and above the base"
        raise ModelError(msg)
    ds.attrs["base"] = base
    return ds


def _column_fraction(x: np.ndarray, y: np.ndarray, dx: float, dy: float, polygon) -> np.ndarray:
    polygon = _check_polygon(polygon, "polygon")
    xx, yy = np.meshgrid(x, y)
    boxes = shapely.box(xx - dx / 2, yy - dy / 2, xx + dx / 2, yy + dy / 2)
    shapely.prepare(polygon)
    fraction = np.zeros(xx.shape)
    touching = shapely.intersects(polygon, boxes)
    inside = touching & shapely.contains(polygon, boxes)
    fraction[inside] = 1.0
    edge = touching & ~inside
    if edge.any():
        fraction[edge] = shapely.area(shapely.intersection(boxes[edge], polygon)) / (dx * dy)
    return np.clip(fraction, 0.0, 1.0)


@xr.register_dataset_accessor("voxels")
class VoxelAccessor:
    """Domain methods of a voxel grid (``ds.voxels``)."""

    def __init__(self, dataset: xr.Dataset):
        self._ds = dataset

    @property
    def cell_size(self) -> tuple[float, float, float]:
        """``(dx, dy, dz)`` in m."""
        if "cell_size" not in self._ds.attrs:
            msg = "voxel grid: attribute 'cell_size' missing; make grids with geo3d.grid.make_grid"
            raise ModelError(msg)
        dx, dy, dz = (float(v) for v in np.ravel(self._ds.attrs["cell_size"]))
        return dx, dy, dz

    @property
    def cell_volume(self) -> float:
        """Volume of one cell (m3)."""
        dx, dy, dz = self.cell_size
        return dx * dy * dz

    @property
    def cell_area(self) -> float:
        """Plan area of one column (m2)."""
        dx, dy, _ = self.cell_size
        return dx * dy

    @property
    def mask(self) -> np.ndarray:
        """Boolean ``(nz, ny, nx)`` array of model cells (all cells when there is no mask)."""
        if "mask" in self._ds:
            return self._ds["mask"].values.astype(bool)
        return np.ones(tuple(self._ds.sizes[d] for d in ("z", "y", "x")), bool)

    def centres(self, mask: bool = True) -> np.ndarray:
        """Cell-centre coordinates ``(m, 3)`` as ``x, y, z`` in C order of ``(z, y, x)``.

        Parameters
        ----------
        mask
            Only the cells of the mask (default) or every cell.
        """
        zz, yy, xx = np.meshgrid(
            self._ds["z"].values, self._ds["y"].values, self._ds["x"].values, indexing="ij"
        )
        coords = np.column_stack([xx.ravel(), yy.ravel(), zz.ravel()])
        if mask:
            coords = coords[self.mask.ravel()]
        return coords

    def column_fraction(self, polygon: shapely.Geometry) -> xr.DataArray:
        """Fraction of each column's plan area inside a polygon (exact, by intersection area).

        Parameters
        ----------
        polygon
            shapely Polygon or MultiPolygon in the grid CRS.

        Returns
        -------
        xarray.DataArray
            Dims ``("y", "x")``, values in ``[0, 1]``.
        """
        dx, dy, _ = self.cell_size
        fraction = _column_fraction(self._ds["x"].values, self._ds["y"].values, dx, dy, polygon)
        return xr.DataArray(
            fraction, dims=("y", "x"), coords={"y": self._ds["y"], "x": self._ds["x"]}
        )

    @property
    def facies_classes(self) -> FaciesClasses:
        """The hydrofacies classes recorded in the attributes (see :meth:`FaciesClasses.attrs`)."""
        return FaciesClasses.from_attrs(self._ds.attrs)

    @property
    def ground(self) -> xr.DataArray:
        """Ground elevation per column (``ground_elev``)."""
        if "ground_elev" not in self._ds:
            msg = "voxel grid: variable 'ground_elev' missing; cannot convert depth and elevation"
            raise ModelError(msg)
        return self._ds["ground_elev"]

    def depth_of(self, z: xr.DataArray | np.ndarray | float | None = None) -> xr.DataArray:
        """Depth below the ground surface of an elevation, for each column.

        Parameters
        ----------
        z
            Elevation(s); default the cell-centre elevations (gives dims ``("z", "y", "x")``).
        """
        if z is None:
            z = self._ds["z"]
        return self.ground - z
