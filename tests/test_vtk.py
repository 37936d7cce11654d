"""VTK round trips: the voxel model, borings, zones and water table read back with pyvista."""

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest
import pyvista as pv
import shapely
import xarray as xr
from hypothesis import given, settings
from hypothesis import strategies as st

from geo3d.errors import GeometryError
from geo3d.io.vtk import (
    borings_to_polydata,
    model_to_image,
    water_table_surface,
    write_borings_vtp,
    write_model_vti,
    write_site_vtm,
    zone_outlines,
)

CRS = "EPSG:32631"


def make_model(nx=5, ny=4, nz=3, dx=2.0, dy=3.0, dz=0.5, x0=100.0, y0=200.0, z0=10.0, seed=0):
    rng = np.random.default_rng(seed)
    shape = (nz, ny, nx)
    mask = np.ones(shape, bool)
    mask[-1, 0, :] = False  # above ground in one row
    log10_k = rng.normal(-5, 1, shape)
    log10_k[~mask] = np.nan
    codes = np.where(log10_k < -5, 0, 1).astype(np.int8)
    codes[~mask] = -1
    ds = xr.Dataset(
        {
            "mask": (("z", "y", "x"), mask),
            "log10_k": (("z", "y", "x"), log10_k),
            "k": (("z", "y", "x"), 10**log10_k),
            "facies_code": (("z", "y", "x"), codes),
            "prob_storage": (("z", "y", "x"), np.where(mask, 0.3, np.nan)),
            "saturated": (
                ("z", "y", "x"),
                np.zeros(shape, bool) | (np.arange(nz) < 2)[:, None, None],
            ),
            "realizations": (("realization", "z", "y", "x"), rng.normal(size=(2, *shape))),
        },
        coords={
            "z": z0 + dz * np.arange(nz),
            "y": y0 + dy * np.arange(ny),
            "x": x0 + dx * np.arange(nx),
        },
        attrs={"crs": CRS, "cell_size": (dx, dy, dz)},
    )
    return ds


def test_model_vti_round_trip(tmp_path):
    ds = make_model()
    path = write_model_vti(ds, tmp_path / "model.vti")
    image = pv.read(path)
    # Geometry: origin at the lower cell edge, spacing = cell size (VTK image data definition).
    assert image.origin == pytest.approx((100.0 - 1.0, 200.0 - 1.5, 10.0 - 0.25))
    assert image.spacing == pytest.approx((2.0, 3.0, 0.5))
    assert image.dimensions == (6, 5, 4)
    assert image.n_cells == ds["mask"].size
    # Every (z, y, x) variable is a cell array; realizations are off by default.
    assert set(image.cell_data.keys()) == {
        "mask",
        "log10_k",
        "k",
        "facies_code",
        "prob_storage",
        "saturated",
    }
    centres = image.cell_centers().points
    for name in ("log10_k", "k", "prob_storage"):
        # Floats are stored as float32 (7 significant digits).
        assert image.cell_data[name].dtype == np.float32
        np.testing.assert_array_equal(image.cell_data[name], ds[name].values.ravel().astype("f4"))
    np.testing.assert_array_equal(
        image.cell_data["mask"], ds["mask"].values.ravel().astype(np.uint8)
    )
    np.testing.assert_array_equal(image.cell_data["facies_code"], ds["facies_code"].values.ravel())
    # Cell centre <-> coordinate, checked cell by cell against the Dataset.
    zz, yy, xx = np.meshgrid(ds.z, ds.y, ds.x, indexing="ij")
    np.testing.assert_allclose(centres, np.column_stack([xx.ravel(), yy.ravel(), zz.ravel()]))
    # NaN outside the mask stays NaN.
    assert np.isnan(image.cell_data["log10_k"][~ds["mask"].values.ravel()]).all()


def test_realizations_optional():
    image = model_to_image(make_model(), include_realizations=True)
    assert "realizations_000" in image.cell_data and "realizations_001" in image.cell_data


@settings(max_examples=12, deadline=None)
@given(
    nx=st.integers(1, 5),
    ny=st.integers(1, 5),
    nz=st.integers(1, 5),
    dx=st.sampled_from([0.5, 1.0, 5.0]),
    dz=st.sampled_from([0.1, 0.25, 1.0]),
    x0=st.floats(-1e4, 1e6, allow_nan=False),
    seed=st.integers(0, 99),
)
def test_vti_round_trip_property(tmp_path_factory, nx, ny, nz, dx, dz, x0, seed):
    ds = make_model(nx=nx, ny=ny, nz=nz, dx=dx, dy=dx, dz=dz, x0=x0, seed=seed)
    path = write_model_vti(ds, tmp_path_factory.mktemp("v") / "m.vti")
    image = pv.read(path)
    np.testing.assert_array_equal(
        image.cell_data["log10_k"], ds["log10_k"].values.ravel().astype("f4")
    )
    first = image.cell_centers().points[0]
    assert first == pytest.approx((x0, 200.0, 10.0), abs=1e-6 * max(1.0, abs(x0)))


def make_samples():
    rows = []
    for boring, (x, y, ground) in {"B1": (101.0, 201.0, 12.0), "B2": (107.0, 209.0, 11.5)}.items():
        for depth in np.arange(0.0, 2.0, 0.5):
            rows.append(
                {
                    "boring_id": boring,
                    "x": x,
                    "y": y,
                    "depth": depth,
                    "elev": ground - depth,
                    "log10_k": -5 - depth,
                    "ec": 10 + depth,
                    "spike": depth == 1.0,
                    "ec_above_trend": False,
                    "above_water": depth < 0.6,
                }
            )
    return pd.DataFrame(rows)


def test_borings_vtp(tmp_path):
    samples = make_samples()
    intervals = pd.DataFrame(
        {"boring_id": ["B1", "B1"], "top": [0.0, 1.0], "bottom": [1.0, 2.0], "facies_code": [2, 0]}
    )
    path = write_borings_vtp(samples, tmp_path / "borings.vtp", intervals=intervals)
    poly = pv.read(path)
    assert poly.n_points == 8 and poly.n_lines == 2
    # Points at true elevations (no exaggeration): B1 at depth 1.5 is at 12 - 1.5.
    b1 = poly.point_data["boring_index"] == 0
    np.testing.assert_allclose(poly.points[b1][:, 2], 12.0 - np.array([0, 0.5, 1.0, 1.5]))
    np.testing.assert_allclose(poly.point_data["log10_k"][b1], [-5, -5.5, -6, -6.5])
    # Facies from the interval holding the sample (top <= depth < bottom); B2 has none (-1).
    assert poly.point_data["facies_code"].tolist() == [2, 2, 0, 0, -1, -1, -1, -1]
    assert poly.point_data["spike"].tolist() == [0, 0, 1, 0] * 2
    assert poly.point_data["above_water"].tolist() == [1, 1, 0, 0] * 2
    assert list(poly.field_data["boring_id"]) == ["B1", "B2"]
    with pytest.raises(GeometryError, match="elev"):
        borings_to_polydata(samples.drop(columns="elev"))


def test_zone_outlines_depth_and_elevation():
    ds = make_model()
    square = shapely.box(101, 204, 107, 208)
    zones = gpd.GeoDataFrame(
        {
            "name": ["A", "B"],
            "top": [0.25, 10.4],
            "bottom": [0.75, 9.9],
            "reference": ["depth", "elevation"],
        },
        geometry=[square, square],
        crs=CRS,
    )
    poly = zone_outlines(zones, model=ds)
    z = poly.points[:, 2]
    # Ground inside the box (cell centres y = 206, x = 102..106) is the top edge of the mask:
    # z0 + 2*dz + dz/2 = 11.25, so zone A (depths 0.25-0.75) spans 11.0-10.5 in elevation.
    assert sorted(set(np.round(z, 6))) == [9.9, 10.4, 10.5, 11.0]
    # 4 vertices per ring: 2 rings + 4 vertical edges per zone.
    assert poly.n_lines == 2 * (2 + 4)
    with pytest.raises(GeometryError, match="depth"):
        zone_outlines(zones, model=None)


def test_water_table_surface_and_multiblock(tmp_path):
    ds = make_model()
    wt = xr.DataArray(
        10.5 + 0.01 * ds.x.values[None, :] + 0 * ds.y.values[:, None],
        dims=("y", "x"),
        coords={"y": ds.y, "x": ds.x},
    )
    wt[0, 0] = np.nan
    grid = water_table_surface(wt)
    assert isinstance(grid, pv.StructuredGrid)
    assert grid.n_points == wt.size
    np.testing.assert_allclose(grid.points[1], (ds.x.values[1], ds.y.values[0], wt.values[0, 1]))
    zones = gpd.GeoDataFrame(
        {"name": ["A"], "top": [10.5], "bottom": [10.0], "reference": ["elevation"]},
        geometry=[shapely.box(101, 204, 107, 208)],
        crs=CRS,
    )
    path = write_site_vtm(
        ds, tmp_path / "site.vtm", samples=make_samples(), zones=zones, water_table=wt
    )
    blocks = pv.read(path)
    assert list(blocks.keys()) == ["model", "borings", "zones", "water_table"]
    np.testing.assert_array_equal(
        blocks["model"].cell_data["log10_k"], ds["log10_k"].values.ravel().astype("f4")
    )
    assert blocks["water_table"].n_points == wt.size
    assert sorted(p.name for p in (tmp_path / "site").iterdir()) == [
        "borings.vtp",
        "model.vti",
        "water_table.vts",
        "zones.vtp",
    ]


def test_site_vtm_refers_to_files_already_written(tmp_path):
    ds = make_model()
    model_file = write_model_vti(ds, tmp_path / "model.vti")
    borings_file = write_borings_vtp(make_samples(), tmp_path / "borings.vtp")
    path = write_site_vtm(
        ds,
        tmp_path / "site.vtm",
        samples=make_samples(),
        model_file=model_file,
        borings_file=borings_file,
    )
    assert 'file="model.vti"' in path.read_text()
    assert not (tmp_path / "site" / "model.vti").exists()
    blocks = pv.read(path)
    assert list(blocks.keys()) == ["model", "borings"]
    assert blocks["borings"].n_points == 8
    assert blocks["model"].n_cells == ds["mask"].size
