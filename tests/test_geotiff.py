"""GeoTIFF round trips: CRS, north-up edge-based transform, values, nodata, tags."""

import numpy as np
import pyproj
import pytest
import rasterio
import xarray as xr
from hypothesis import given, settings
from hypothesis import strategies as st

from geo3d.errors import CRSError, GeometryError
from geo3d.io.geotiff import axis_spacing, map_transform, write_geotiff, write_maps

CRS = "EPSG:32631"  # WGS 84 / UTM zone 31N (EPSG registry)


def make_map(nx=4, ny=3, dx=2.0, dy=2.0, x0=500001.0, y0=4500001.0, name="thick"):
    x = x0 + dx * np.arange(nx)
    y = y0 + dy * np.arange(ny)
    values = np.arange(ny * nx, dtype=float).reshape(ny, nx)
    values[0, 0] = np.nan  # outside the site
    return xr.DataArray(
        values,
        dims=("y", "x"),
        coords={"y": y, "x": x},
        name=name,
        attrs={"units": "m", "long_name": "transmissive thickness", "crs": CRS},
    )


def test_round_trip_crs_transform_values(tmp_path):
    da = make_map()
    path = write_geotiff(da, tmp_path / "t.tif")
    with rasterio.open(path) as src:
        # The site CRS survives (EPSG:32631 read back as the same CRS).
        assert pyproj.CRS.from_wkt(src.crs.to_wkt()).equals(pyproj.CRS(CRS))
        t = src.transform
        # North-up: first row is the northernmost (largest y) cell; GDAL geotransform is the
        # upper-left corner, half a cell out from the first centre (OGC GeoTIFF 1.1).
        assert (t.a, t.b, t.c) == (2.0, 0.0, 500000.0)
        assert (t.d, t.e, t.f) == (0.0, -2.0, 4500001.0 + 2 * 2.0 + 1.0)
        band = src.read(1)
        assert src.dtypes[0] == "float32"
        assert np.isnan(src.nodata)
        assert src.descriptions[0] == "transmissive thickness"
        assert src.tags(1)["units"] == "m"
        assert src.units[0] == "m"
        assert src.compression is not None
    # Row 0 of the file is the top (max y) row of the DataArray.
    np.testing.assert_array_equal(band, da.values[::-1].astype("float32"))
    # Every cell centre maps to its grid coordinate.
    for j, yv in enumerate(da.y.values):
        for i, xv in enumerate(da.x.values):
            row, col = rasterio.transform.rowcol(t, xv, yv)
            assert (row, col) == (da.sizes["y"] - 1 - j, i)
            cx, cy = rasterio.transform.xy(t, row, col)  # centre by default
            assert (cx, cy) == pytest.approx((xv, yv))


@settings(max_examples=15, deadline=None)
@given(
    nx=st.integers(1, 7),
    ny=st.integers(1, 7),
    dx=st.sampled_from([0.5, 1.0, 2.5, 10.0]),
    dy=st.sampled_from([0.5, 1.0, 2.0]),
    x0=st.floats(-1e5, 1e6, allow_nan=False),
    y0=st.floats(-1e5, 5e6, allow_nan=False),
    seed=st.integers(0, 1000),
)
def test_round_trip_property(tmp_path_factory, nx, ny, dx, dy, x0, y0, seed):
    rng = np.random.default_rng(seed)
    values = rng.normal(size=(ny, nx)).astype("float32")
    values[rng.random((ny, nx)) < 0.2] = np.nan
    da = xr.DataArray(
        values,
        dims=("y", "x"),
        coords={"y": y0 + dy * np.arange(ny), "x": x0 + dx * np.arange(nx)},
        attrs={"cell_size": (dx, dy, 1.0)},
    )
    path = write_geotiff(da, tmp_path_factory.mktemp("h") / "p.tif", crs=CRS)
    with rasterio.open(path) as src:
        band = src.read(1)
        t = src.transform
    np.testing.assert_array_equal(band[::-1], values)
    cx, cy = rasterio.transform.xy(t, ny - 1, 0)
    assert cx == pytest.approx(x0, abs=1e-6 * max(1, abs(x0)))
    assert cy == pytest.approx(y0, abs=1e-6 * max(1, abs(y0)))


def test_write_maps_one_file_per_map(tmp_path):
    maps = {"a": make_map(name="a"), "b": make_map(name="b") * 2}
    paths = write_maps(maps, tmp_path / "maps", crs=CRS)
    assert [p.name for p in paths] == ["a.tif", "b.tif"]
    with rasterio.open(paths[1]) as src:
        assert np.nanmax(src.read(1)) == pytest.approx(2 * 11)


def test_map_transform_doc_example():
    da = xr.DataArray(
        np.zeros((2, 3)), dims=("y", "x"), coords={"y": [10.5, 11.5], "x": [0.5, 1.5, 2.5]}
    )
    assert tuple(map_transform(da))[:6] == (1.0, 0.0, 0.0, 0.0, -1.0, 12.0)


def test_bad_inputs(tmp_path):
    da = make_map()
    da.attrs.pop("crs")
    with pytest.raises(CRSError, match="no CRS"):
        write_geotiff(da, tmp_path / "x.tif")
    with pytest.raises(CRSError, match="cannot read CRS"):
        write_geotiff(da, tmp_path / "x.tif", crs="not a crs")
    irregular = make_map().assign_coords(x=[0.0, 1.0, 3.0, 4.0])
    with pytest.raises(GeometryError, match="uniform"):
        write_geotiff(irregular, tmp_path / "x.tif")
    with pytest.raises(GeometryError, match="dims"):
        write_geotiff(make_map().rename(y="z"), tmp_path / "x.tif")
    with pytest.raises(GeometryError, match="cell size"):
        axis_spacing(np.array([1.0]), name="x")
