"""Tests of injection plans: design volume, triangular layout coverage and per-point schedules."""

import math

import numpy as np
import pytest
import shapely
from hypothesis import given, settings
from hypothesis import strategies as st
from layer_cake import layer_cake as _layer_cake
from scipy.spatial import cKDTree

from geo3d.analysis.injection import (
    design_volume,
    injection_plan,
    radius_for_volume,
    triangular_layout,
)
from geo3d.errors import GeometryError, ModelError

SQRT3 = math.sqrt(3.0)


def layer_cake(realizations=None):
    return _layer_cake(size=(20.0, 12.0), cell=(0.5, 0.5, 0.5), realizations=realizations)


def max_gap(polygon, points, n=120):
    """Largest distance from a dense sample of the polygon (and its vertices) to a point."""
    minx, miny, maxx, maxy = polygon.bounds
    xs, ys = np.meshgrid(np.linspace(minx, maxx, n), np.linspace(miny, maxy, n))
    inside = shapely.contains_xy(polygon, xs, ys)
    boundary = shapely.get_coordinates(polygon.boundary.segmentize(0.05))
    sample = np.vstack([np.column_stack([xs[inside], ys[inside]]), boundary])
    distance, _ = cKDTree(points).query(sample)
    return float(distance.max())


def test_layout_of_an_aligned_rectangle_has_the_hand_count():
    # rectangle 4 spacings wide and 4 row steps high, lattice anchored at its corner: rows
    # 0, 2, 4 hold 5 points and rows 1, 3 hold 4 (spacing sqrt(3) r, rows 1.5 r apart, odd rows
    # shifted by half a spacing; Kershner 1939): 23 points, no gap points
    r = 2.0
    rect = shapely.box(0, 0, 4 * SQRT3 * r, 4 * 1.5 * r)
    points, added = triangular_layout(rect, r)
    assert len(points) == 23 and added == 0
    assert max_gap(rect, points) <= r * (1 + 1e-6)
    # nearest-neighbour spacing is sqrt(3) r (geometry of the triangular lattice)
    distance, _ = cKDTree(points).query(points, k=2)
    assert np.allclose(distance[:, 1], SQRT3 * r)


@settings(max_examples=12, deadline=None)
@given(
    cx=st.floats(-5, 5),
    cy=st.floats(-5, 5),
    radius=st.floats(1.0, 3.0),
    scale=st.floats(2.0, 8.0),
    shape=st.sampled_from(["circle", "ell", "triangle"]),
)
def test_layout_covers_any_polygon(cx, cy, radius, scale, shape):
    # every point of the polygon within r of an injection point, every point inside (the
    # covering requirement itself)
    if shape == "circle":
        polygon = shapely.Point(cx, cy).buffer(scale, quad_segs=8)
    elif shape == "ell":
        polygon = shapely.box(cx, cy, cx + 2 * scale, cy + scale).union(
            shapely.box(cx, cy, cx + scale / 2, cy + 2 * scale)
        )
    else:
        polygon = shapely.Polygon([(cx, cy), (cx + 2 * scale, cy), (cx, cy + 1.3 * scale)])
    points, _ = triangular_layout(polygon, radius)
    assert max_gap(polygon, points) <= radius * (1 + 1e-6)
    assert np.all(shapely.intersects_xy(polygon.buffer(1e-6), points[:, 0], points[:, 1]))


def test_layer_cake_plan_matches_hand_design_volume():
    r = 1.5
    rect = shapely.box(2.0, 1.0, 2.0 + 4 * SQRT3 * r, 1.0 + 4 * 1.5 * r)
    zone = {"name": "Z1", "geometry": rect, "top": 0.0, "bottom": 10.0, "reference": "depth"}
    plan = injection_plan(
        layer_cake(),
        zone,
        design_fraction=0.2,
        radius_of_influence=r,
        volume_unit="gal",
    )
    area = rect.area
    # V = A b n_e f with the 3 m transmissive layer, n_e 0.25, f 0.2 (hand computation)
    expected = area * 3.0 * 0.25 * 0.2
    s = plan.summary
    assert s["area_m2"] == pytest.approx(area)
    assert s["mean_target_thickness_m"] == pytest.approx(3.0, rel=2e-3)
    assert s["mean_effective_porosity"] == pytest.approx(0.25)
    assert s["design_volume_m3"] == pytest.approx(expected, rel=2e-3)
    assert s["n_points"] == 23  # hand count as in the aligned-rectangle test
    assert s["volume_per_point_circle_m3"] == pytest.approx(
        math.pi * r**2 * 3.0 * 0.25 * 0.2, rel=2e-3
    )
    # 1 US gal = 3.785411784e-3 m3 (NIST SP 811)
    assert s["design_volume_gal"] == pytest.approx(s["design_volume_m3"] / 3.785411784e-3)
    # one transmissive interval per point at depth 5-8 m with the point's share
    sched = plan.schedule
    assert len(sched) == 23
    assert np.allclose(sched["top_depth"], 5.0) and np.allclose(sched["bottom_depth"], 8.0)
    assert sched["volume_m3"].sum() == pytest.approx(s["design_volume_m3"])
    assert plan.points.crs is not None and len(plan.points) == 23
    assert np.allclose(plan.points["volume_gal"], plan.points["volume_m3"] / 3.785411784e-3)


def test_schedule_shares_by_transmissivity():
    rect = shapely.box(4.0, 4.0, 8.0, 8.0)
    zone = {"name": "Z2", "geometry": rect, "top": 0.0, "bottom": 10.0, "reference": "depth"}
    plan = injection_plan(
        layer_cake(),
        zone,
        design_fraction=0.1,
        radius_of_influence=3.0,
        target="all",
    )
    one = plan.schedule[plan.schedule["point_id"] == 1].set_index("facies", append=True)
    # four layers; shares by K b (Freeze & Cherry 1979, T = K b): 3 m at 1e-6, 2 m at 1e-8,
    # 3 m at 1e-4, 2 m at 1e-8
    t_total = 3e-6 + 2e-8 + 3e-4 + 2e-8
    shares = plan.schedule[plan.schedule["point_id"] == 1]["share"].to_numpy()
    assert len(one) == 4
    assert shares == pytest.approx([3e-6 / t_total, 2e-8 / t_total, 3e-4 / t_total, 2e-8 / t_total])
    # all material: b = 10 m, n_e = (3 x 0.15 + 2 x 0.05 + 3 x 0.25 + 2 x 0.05) / 10
    n_e = (3 * 0.15 + 2 * 0.05 + 3 * 0.25 + 2 * 0.05) / 10
    assert plan.summary["mean_effective_porosity"] == pytest.approx(n_e)
    assert plan.summary["design_volume_m3"] == pytest.approx(design_volume(16, 10, n_e, 0.1))


def test_radius_from_volume_per_point_and_depth_target():
    rect = shapely.box(4.0, 4.0, 12.0, 10.0)
    zone = {"name": "Z3", "geometry": rect}
    vp = 2.0
    plan = injection_plan(
        layer_cake(),
        zone,
        design_fraction=0.25,
        volume_per_point=vp,
        target=(5.0, 6.5),
    )
    # depth range 5-6.5 m is all transmissive: b = 1.5, n_e = 0.25;
    # r = sqrt(V / (pi b n_e f)) (the circle volume pi r^2 b n_e f solved for r)
    r = math.sqrt(vp / (math.pi * 1.5 * 0.25 * 0.25))
    assert plan.summary["radius_of_influence_m"] == pytest.approx(r, rel=1e-3)
    assert radius_for_volume(vp, thickness=1.5, effective_porosity=0.25, design_fraction=0.25) == (
        pytest.approx(r)
    )
    assert np.allclose(plan.schedule["bottom_depth"], 6.5)


def test_percentiles_from_realizations():
    field = layer_cake()["log10_k"].values
    sims = np.stack([field + s for s in (-1.5, -0.5, 0.0, 0.5, 1.5)])
    zone = {"name": "Z", "geometry": shapely.box(2, 2, 8, 8), "top": 0, "bottom": 10}
    plan = injection_plan(
        layer_cake(sims),
        zone,
        design_fraction=0.2,
        radius_of_influence=2.0,
    )
    s = plan.summary
    # transmissive thickness 0, 3, 3, 3, 6 m under these shifts (construction); V = A b n_e f
    assert s["design_volume_m3_p50"] == pytest.approx(36 * 3 * 0.25 * 0.2)
    assert s["design_volume_m3_p10"] <= s["design_volume_m3_p50"] <= s["design_volume_m3_p90"]


def test_bad_plan_input():
    with pytest.raises(GeometryError):
        injection_plan(layer_cake(), {"name": "N"}, design_fraction=0.2, radius_of_influence=1)
    zone = {"name": "Z", "geometry": shapely.box(2, 2, 8, 8)}
    with pytest.raises(ModelError):
        injection_plan(layer_cake(), zone, design_fraction=0.0, radius_of_influence=1)
    with pytest.raises(ModelError):
        injection_plan(layer_cake(), zone, design_fraction=0.2)
