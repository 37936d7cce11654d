"""Tests of the voxel grid, its masks and the ``voxels`` accessor."""

import numpy as np
import pandas as pd
import pytest
import shapely
from affine import Affine
from hypothesis import given, settings
from hypothesis import strategies as st

from geo3d.errors import GeometryError, ModelError
from geo3d.grid import build_mask, ground_surface, height_fraction, make_grid
from geo3d.io.vtk import model_to_image


def test_make_grid_cell_centres_and_attrs():
    boundary = shapely.box(100.0, 200.0, 120.0, 210.0)
    ds = make_grid(boundary, cell_size=(2.0, 2.0, 0.5), top=10.0, base=5.0, crs="EPSG:32633")
    # 20 m / 2 m = 10 columns, 10 m / 2 m = 5 rows, 5 m / 0.5 m = 10 layers (arithmetic)
    assert ds.sizes == {"z": 10, "y": 5, "x": 10}
    assert ds["x"].values[0] == 101.0 and ds["x"].values[-1] == 119.0
    assert ds["z"].values[0] == 5.25 and ds["z"].values[-1] == 9.75
    assert np.all(np.diff(ds["y"].values) > 0)
    assert "UTM zone 33N" in ds.attrs["crs"]
    assert ds.voxels.cell_volume == 2.0  # 2 x 2 x 0.5 m3 (arithmetic)


def test_make_grid_padding_and_bad_input():
    boundary = shapely.box(0, 0, 10, 10)
    ds = make_grid(boundary, cell_size=(1, 1, 1), top=1, base=0, padding=2.0)
    # 10 m + 2 x 2 m padding = 14 columns (arithmetic)
    assert ds.sizes["x"] == 14 and ds["x"].values[0] == -1.5
    with pytest.raises(ModelError):
        make_grid(boundary, cell_size=(1, 0, 1), top=1, base=0)
    with pytest.raises(ModelError):
        make_grid(boundary, cell_size=(1, 1, 1), top=0, base=1)
    with pytest.raises(GeometryError):
        make_grid(shapely.Point(0, 0), cell_size=(1, 1, 1), top=1, base=0)


def test_ground_surface_reproduces_a_plane_from_collars():
    # linear interpolation is exact for a plane inside the hull (from memory: barycentric
    # interpolation reproduces linear functions); nearest collar outside it
    borings = pd.DataFrame({"x": [0, 10, 0, 10], "y": [0, 0, 10, 10]})
    borings["ground_elev"] = 50 + 0.1 * borings["x"] - 0.2 * borings["y"]
    x = np.array([2.5, 7.5, 20.0])
    y = np.array([2.5, 7.5])
    ground = ground_surface(x, y, borings=borings)
    assert ground[0, 0] == pytest.approx(50 + 0.25 - 0.5)
    assert ground[1, 1] == pytest.approx(50 + 0.75 - 1.5)
    assert np.isfinite(ground).all()


def test_ground_surface_from_dem_bilinear():
    # a DEM of a plane z = x + 2 y sampled at pixel centres; bilinear sampling is exact for a
    # plane (from memory)
    transform = Affine(1.0, 0.0, 0.0, 0.0, -1.0, 10.0)  # 1 m pixels, top-left at (0, 10)
    cols, rows = np.meshgrid(np.arange(10) + 0.5, np.arange(10) + 0.5)
    xs, ys = cols, 10 - rows
    dem = xs + 2 * ys
    ground = ground_surface(np.array([3.0, 4.2]), np.array([5.5]), dem=(dem, transform))
    assert ground[0] == pytest.approx([3.0 + 11.0, 4.2 + 11.0])


def test_mask_and_accessor():
    boundary = shapely.Polygon([(0, 0), (10, 0), (0, 10)])
    ds = make_grid(boundary, cell_size=(1, 1, 1), top=5, base=0)
    ground = np.full((10, 10), 3.0)
    ds["ground_elev"] = (("y", "x"), ground)
    ds["mask"] = build_mask(ds, boundary, ground=ground, base=0.0)
    # centre test: cell (i, j) is inside when (i + .5) + (j + .5) <= 10, i.e. i + j <= 9:
    # 55 columns (arithmetic); 3 layers below ground at 3 m
    assert int(ds["mask"].sum()) == 55 * 3
    centres = ds.voxels.centres()
    assert centres.shape == (165, 3)
    assert np.all(centres[:, 0] + centres[:, 1] <= 10) and np.all(centres[:, 2] < 3)
    depth = ds.voxels.depth_of()
    assert float(depth.sel(z=0.5).isel(x=0, y=0)) == 2.5
    grid = model_to_image(ds)
    assert grid.n_cells == 10 * 10 * 5
    assert int(grid.cell_data["mask"].sum()) == 165
    # pyvista cell centre of the first masked cell equals ours (x fastest)
    first = int(np.flatnonzero(grid.cell_data["mask"])[0])
    assert np.allclose(grid.cell_centers().points[first], centres[0])


def test_column_fraction_exact_for_a_triangle():
    boundary = shapely.box(0, 0, 4, 4)
    ds = make_grid(boundary, cell_size=(1, 1, 1), top=1, base=0)
    triangle = shapely.Polygon([(0, 0), (4, 0), (0, 4)])
    frac = ds.voxels.column_fraction(triangle).values
    # cells on the diagonal are cut in half; the total is the triangle area 8 (geometry)
    assert frac.sum() == pytest.approx(8.0)
    assert frac[0, 3] == pytest.approx(0.5) and frac[0, 0] == 1.0 and frac[3, 3] == 0.0


@settings(max_examples=25, deadline=None)
@given(
    x0=st.floats(-5, 5),
    y0=st.floats(-5, 5),
    w=st.floats(0.3, 9),
    h=st.floats(0.3, 9),
)
def test_column_fraction_area_of_a_box_property(x0, y0, w, h):
    # the covered area of a box equals the part of its area inside the grid (geometry)
    ds = make_grid(shapely.box(0, 0, 6, 6), cell_size=(1.5, 1.0, 1), top=1, base=0)
    box = shapely.box(x0, y0, x0 + w, y0 + h)
    frac = ds.voxels.column_fraction(box).values
    expected = box.intersection(shapely.box(0, 0, 6, 6)).area
    assert frac.sum() * 1.5 == pytest.approx(expected, rel=1e-9, abs=1e-9)
    assert np.all((frac >= 0) & (frac <= 1))


@settings(max_examples=50, deadline=None)
@given(lower=st.floats(-1, 4), thickness=st.floats(0, 5))
def test_height_fraction_sums_to_covered_height(lower, thickness):
    # the covered heights add up to the part of [lower, upper] inside [0, 3] (arithmetic)
    z = np.array([0.25, 0.75, 1.25, 1.75, 2.25, 2.75])
    frac = height_fraction(z, 0.5, lower, lower + thickness)
    expected = max(0.0, min(3.0, lower + thickness) - max(0.0, lower))
    assert frac.sum() * 0.5 == pytest.approx(expected, abs=1e-9)
    assert np.all((frac >= 0) & (frac <= 1))


def test_facies_classes_round_trip_through_the_dataset_attributes():
    from geo3d.facies import DEFAULT_CLASSES, FaciesClass, FaciesClasses

    ds = make_grid(shapely.box(0, 0, 2, 2), cell_size=(1, 1, 1), top=1, base=0)
    ds.attrs.update(DEFAULT_CLASSES.attrs())
    classes = ds.voxels.facies_classes
    assert classes.names == DEFAULT_CLASSES.names
    assert classes.log10_k_max.tolist() == [-7.0, -5.0, np.inf]
    assert classes.porosity.tolist() == [0.45, 0.38, 0.32]
    assert classes.effective_porosity.tolist() == [0.05, 0.15, 0.25]
    assert (classes.storage, classes.transmissive) == (0, 2)
    # classes in any order are sorted by their upper bound
    shuffled = FaciesClasses.from_items(reversed(list(DEFAULT_CLASSES)))
    assert shuffled.names == DEFAULT_CLASSES.names
    with pytest.raises(ModelError, match="unique"):
        FaciesClasses((FaciesClass("a", -7, 0.4, 0.1), FaciesClass("a", 0, 0.3, 0.2)))
    with pytest.raises(ModelError, match="effective_porosity"):
        FaciesClasses((FaciesClass("a", 0, 0.2, 0.3),))
    with pytest.raises(ModelError, match="facies_names"):
        _ = make_grid(
            shapely.box(0, 0, 2, 2), cell_size=(1, 1, 1), top=1, base=0
        ).voxels.facies_classes
