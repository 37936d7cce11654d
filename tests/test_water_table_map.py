"""Tests of the water-table products on the voxel grid."""

import math

import numpy as np
import pytest
import shapely

from geo3d.analysis.water_table import (
    depth_to_water_map,
    saturated_fraction,
    saturated_thickness,
    water_table_gradient,
    water_table_map,
)
from geo3d.errors import WaterLevelError
from geo3d.grid import make_grid


class PlaneWaterTable:
    """A planar water table h = c + a x + b y (the form of a three-point problem)."""

    method = "plane"

    def __init__(self, a, b, c):
        self.a, self.b, self.c = a, b, c

    def elevation(self, x, y):
        return self.c + self.a * np.asarray(x) + self.b * np.asarray(y)

    @property
    def gradient(self):
        return math.hypot(self.a, self.b)

    @property
    def flow_direction_deg(self):
        # down-gradient azimuth clockwise from north (from memory: atan2(-dh/dx, -dh/dy))
        return math.degrees(math.atan2(-self.a, -self.b)) % 360


def model(ground=10.0):
    ds = make_grid(shapely.box(0, 0, 20, 10), cell_size=(1, 1, 0.5), top=ground, base=0.0)
    shape = tuple(ds.sizes[d] for d in "zyx")
    ds["ground_elev"] = (("y", "x"), np.full(shape[1:], ground))
    ds["mask"] = (("z", "y", "x"), np.ones(shape, bool))
    return ds


def test_map_of_a_plane_and_its_gradient():
    wt = PlaneWaterTable(-0.01, 0.0, 7.0)
    out = water_table_map(model(), wt)
    # the map is the plane at the cell centres (construction)
    assert float(out.sel(x=0.5, y=0.5)) == pytest.approx(7.0 - 0.005)
    assert float(out.sel(x=19.5, y=9.5)) == pytest.approx(7.0 - 0.195)
    assert out.attrs["gradient"] == pytest.approx(0.01)
    # head falls toward +x: flow toward the east, azimuth 90 degrees (geometry)
    assert out.attrs["flow_direction_deg"] == pytest.approx(90.0)
    # central differences are exact for a plane (from memory): 0.01 everywhere, toward the east
    gradient = water_table_gradient(model(), wt)
    assert np.allclose(gradient["wt_gradient"], 0.01)
    assert np.allclose(gradient["wt_flow_direction_deg"], 90.0)
    tilted = water_table_gradient(model(), PlaneWaterTable(0.003, 0.004, 7.0))
    # |(0.003, 0.004)| = 0.005 (3-4-5 triangle); down-gradient toward south-west:
    # azimuth 180 + atan(3/4) = 216.87 degrees (geometry)
    assert np.allclose(tilted["wt_gradient"], 0.005)
    assert np.allclose(tilted["wt_flow_direction_deg"], 180 + np.degrees(np.arctan(0.75)))
    depth = depth_to_water_map(model(), wt)
    assert float(depth.sel(x=0.5, y=0.5)) == pytest.approx(3.005)


def test_saturated_thickness_of_zones():
    wt = PlaneWaterTable(0.0, 0.0, 6.2)
    zones = [
        {"name": "shallow", "geometry": shapely.box(0, 0, 10, 10), "top": 1.0, "bottom": 5.0},
        {"name": "deep", "geometry": shapely.box(10, 0, 20, 10), "top": 5.0, "bottom": 9.0},
    ]
    table = saturated_thickness(model(), zones, water_table=wt).set_index("zone")
    # water table at elevation 6.2 = depth 3.8: zone 1-5 m has 5 - 3.8 = 1.2 m saturated,
    # zone 5-9 m is wholly saturated (4 m); the site column 6.2 m (construction)
    assert table.loc["shallow", "mean_saturated_thickness_m"] == pytest.approx(1.2)
    assert table.loc["deep", "mean_saturated_thickness_m"] == pytest.approx(4.0)
    assert table.loc["site", "mean_saturated_thickness_m"] == pytest.approx(6.2)
    assert table.loc["shallow", "saturated_volume_m3"] == pytest.approx(100 * 1.2)
    frac = saturated_fraction(model(), wt)
    # the cell 6.0-6.5 m is 0.4 saturated (construction)
    assert frac[12, 0, 0] == pytest.approx(0.4)


def test_water_table_needs_elevation():
    with pytest.raises(WaterLevelError):
        water_table_map(model(), object())
