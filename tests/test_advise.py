"""Tests of the boring advice: the variance-reduction criterion, greedy choice, constraints."""

import math

import numpy as np
import pytest
import shapely
from hypothesis import given, settings
from hypothesis import strategies as st
from layer_cake import CLASSES

from geo3d.analysis.advise import (
    BoringDesign,
    SupportPoints,
    advise_borings,
    candidate_grid,
    column_points,
    covariance_from_attrs,
    target_cells,
)
from geo3d.errors import GeometryError, ModelError
from geo3d.facies import FaciesClasses
from geo3d.geostats.covariance import CovarianceModel
from geo3d.grid import make_grid
from geo3d.model import facies_probabilities

EXPONENTIAL = CovarianceModel("exponential", sill=1.0, range_h=30.0, range_v=30.0)


def _line(xs):
    return np.column_stack([xs, np.zeros(len(xs)), np.zeros(len(xs))])


def _support(points, weights=None):
    n = len(points)
    weights = np.ones((1, n)) if weights is None else np.atleast_2d(weights)
    return SupportPoints(points, weights, np.ones(n), ["target"], (1, 1, 1))


def _posterior_variance(model, data, points):
    """Simple-kriging variance by direct solution of the full system (the reference)."""
    cov = lambda a, b: model.covariance(  # noqa: E731
        np.linalg.norm(model.scaled(a)[:, None] - model.scaled(b)[None], axis=2)
    )
    weights = np.linalg.solve(cov(data, data), cov(data, points))
    return model.total_sill - np.einsum("dp,dp->p", weights, cov(data, points))


def test_single_target_point_between_two_borings_is_drilled_at_the_midpoint():
    """Two borings at x = 0 and x = 20, a single target point at x = 10, candidates x = 1..19.

    Adding a datum at c lowers the variance at the target by C(t, c | D)^2 / C(c, c | D)
    (conditional Gaussian covariance), which cannot exceed the variance at t itself and
    equals it at c = t (no nugget): the best candidate is the midpoint, and its reduction is the
    simple-kriging variance of the midpoint from two symmetric data,
    ``1 - 2 r^2 / (1 + R)`` with r = rho(10 m) and R = rho(20 m) (Journel and Huijbregts 1978,
    ch. V, the two-point simple-kriging system solved by hand).
    """
    data = _line([0.0, 20.0])
    xs = np.arange(1.0, 20.0)
    design = BoringDesign(
        EXPONENTIAL, data, _line(xs)[:, None, :], _support(_line([10.0])), scale_to_model=False
    )
    scores = design.reductions()
    assert xs[np.argmax(scores)] == 10.0
    # exponential model with practical range 30 m: rho(h) = exp(-3 h / 30) (Journel and
    # Huijbregts 1978, practical range); r = exp(-1), R = exp(-2)
    r, big_r = math.exp(-1.0), math.exp(-2.0)
    assert scores.max() == pytest.approx(1 - 2 * r**2 / (1 + big_r), rel=1e-6)
    np.testing.assert_allclose(scores, scores[::-1], rtol=1e-9)  # mirror symmetry


def test_uniform_target_on_the_segment_is_best_served_by_the_midpoint():
    """Same borings, a uniform target of 20 points on the segment, candidates x = 1..19.

    The exponential covariance in 1D is Markov: given the values at the two borings, the field
    between them is independent of the rest, so a datum at c splits the segment into two
    independent bridges of lengths c and 20 - c and the summed variance after it is
    ``g(c) + g(20 - c)``, with g the integrated variance of a bridge. f is symmetric about the
    midpoint and g is convex (the bridge variance grows with the length at every point; for
    a short range g -> l^2 / 6 per unit variance, the Brownian bridge), so the summed
    variance is least, and its reduction greatest, at c = 10 (from memory: Markov property of
    the Ornstein-Uhlenbeck process). The reductions are also checked against a direct
    solution of the full kriging systems.
    """
    data = _line([0.0, 20.0])
    xs = np.arange(1.0, 20.0)
    target = _line(np.arange(0.5, 20.0, 1.0))
    design = BoringDesign(
        EXPONENTIAL, data, _line(xs)[:, None, :], _support(target), scale_to_model=False
    )
    scores = design.reductions()
    assert xs[np.argmax(scores)] == 10.0
    assert np.all(np.diff(scores[:9]) > 0) and np.all(np.diff(scores[9:]) < 0)
    before = _posterior_variance(EXPONENTIAL, data, target)
    for k in (0, 4, 9):
        after = _posterior_variance(EXPONENTIAL, np.vstack([data, _line([xs[k]])]), target)
        assert scores[k] == pytest.approx(float((before - after).sum()), rel=1e-6)


def test_full_depth_columns_keep_the_midpoint():
    # the same layout with full-depth borings (5 points each) in an anisotropic field and a
    # slab-shaped uniform target: mirror symmetry about x = 10 (construction)
    model = CovarianceModel("spherical", sill=0.8, nugget=0.2, range_h=40.0, range_v=3.0)
    zs = np.linspace(-1.0, -5.0, 5)
    column = lambda x: np.column_stack([np.full(5, x), np.zeros(5), zs])  # noqa: E731
    data = np.vstack([column(0.0), column(20.0)])
    xs = np.arange(1.0, 20.0)
    gx, gz = np.meshgrid(np.arange(0.5, 20.0, 1.0), np.linspace(-0.5, -5.5, 6))
    target = np.column_stack([gx.ravel(), np.zeros(gx.size), gz.ravel()])
    cands = np.stack([column(x) for x in xs])
    for criterion in ("summed", "block"):
        design = BoringDesign(
            model, data, cands, _support(target), criterion=criterion, scale_to_model=False
        )
        scores = design.reductions()
        assert xs[np.argmax(scores)] == 10.0
        np.testing.assert_allclose(scores, scores[::-1], rtol=1e-7)


@settings(max_examples=25, deadline=None)
@given(seed=st.integers(0, 10_000), nugget=st.floats(0.0, 0.5), n_pick=st.integers(1, 3))
def test_adding_borings_never_raises_a_variance_and_matches_direct_kriging(seed, nugget, n_pick):
    # conditioning on more data cannot raise a Gaussian conditional variance (common
    # knowledge); the rank-m updates equal the kriging variance of the enlarged data set
    rng = np.random.default_rng(seed)
    model = CovarianceModel("exponential", sill=1.0 - nugget, nugget=nugget, range_h=25.0,
                            range_v=4.0)  # fmt: skip
    data = np.column_stack([rng.uniform(0, 30, 8), rng.uniform(0, 30, 8), rng.uniform(-6, 0, 8)])
    cands = np.stack([
        np.column_stack([np.full(3, x), np.full(3, y), [-1.0, -3.0, -5.0]])
        for x, y in rng.uniform(0, 30, (6, 2))
    ])  # fmt: skip
    target = np.column_stack([rng.uniform(0, 30, 15), rng.uniform(0, 30, 15),
                              rng.uniform(-6, 0, 15)])  # fmt: skip
    design = BoringDesign(model, data, cands, _support(target), scale_to_model=False)
    variance, block = design.variance_.copy(), design.block_variance_.copy()
    picks = rng.choice(6, size=n_pick, replace=False)
    for pick in picks:
        design.add(int(pick))
        assert np.all(design.variance_ <= variance + 1e-9)
        assert np.all(design.block_variance_ <= block + 1e-9)
        assert np.all(design.reductions() >= -1e-9)
        variance, block = design.variance_.copy(), design.block_variance_.copy()
    enlarged = np.vstack([data, *cands[picks]])
    direct = _posterior_variance(model, enlarged, target) / model.total_sill
    np.testing.assert_allclose(design.variance_, direct, atol=1e-6)


def _voxel_model(seed=0, n_sims=4):
    """A 40 m x 30 m x 6 m model with random probabilities, realizations and a saturated zone."""
    rng = np.random.default_rng(seed)
    ds = make_grid(shapely.box(0, 0, 40, 30), cell_size=(2.0, 2.0, 0.5), top=6.0, base=0.0)
    shape = tuple(ds.sizes[d] for d in "zyx")
    ds["ground_elev"] = (("y", "x"), np.full(shape[1:], 6.0))
    ds["mask"] = (("z", "y", "x"), np.ones(shape, bool))
    ds["saturated"] = (("z", "y", "x"), np.broadcast_to(ds["z"].values[:, None, None] < 5, shape))
    table = FaciesClasses.from_items(CLASSES)
    mean, var = rng.normal(-6, 1.5, shape), rng.uniform(0.1, 1.0, shape)
    ds["log10_k"] = (("z", "y", "x"), mean)
    ds["facies_code"] = (("z", "y", "x"), table.classify(mean))
    for i, name in enumerate(table.names):
        ds[f"prob_{name}"] = (("z", "y", "x"), facies_probabilities(mean, var, table)[i])
    sims = rng.normal(-6, 1.5, (n_sims,) + shape)
    ds["realizations"] = (("realization", "z", "y", "x"), sims)
    ds.attrs.update(table.attrs())
    ds.attrs["variogram_log10_k"] = repr(
        CovarianceModel("spherical", sill=1.2, nugget=0.1, range_h=25.0, range_v=2.0)
    )
    return ds


def _borings(xy):
    zs = np.arange(0.25, 5.0, 0.5)
    return np.vstack([np.column_stack([np.full(zs.size, x), np.full(zs.size, y), zs])
                      for x, y in xy])  # fmt: skip


@settings(max_examples=10, deadline=None)
@given(
    seed=st.integers(0, 1000),
    min_distance=st.floats(0.0, 12.0),
    n=st.integers(1, 4),
    x_cut=st.floats(10.0, 35.0),
)
def test_chosen_borings_respect_the_minimum_distance_and_the_accessible_area(
    seed, min_distance, n, x_cut
):
    ds = _voxel_model(seed)
    existing = np.array([[5.0, 5.0], [35.0, 25.0], [20.0, 15.0]])
    accessible = shapely.box(0, 0, x_cut, 30)
    try:
        advice = advise_borings(ds, _borings(existing), existing, shapely.box(0, 0, 40, 30),
                                n_borings=n, spacing=3.0, min_distance=min_distance,
                                accessible=accessible, max_points=200)  # fmt: skip
    except GeometryError:  # no admissible candidate left is a clear error (construction)
        return
    xy = advice.proposed[["x", "y"]].to_numpy()
    assert len(xy) <= n
    assert np.all(xy[:, 0] <= x_cut)
    for k, point in enumerate(xy):
        assert np.hypot(*(existing - point).T).min() >= min_distance - 1e-9
        others = np.delete(xy, k, axis=0)
        if len(others):
            assert np.hypot(*(others - point).T).min() >= min_distance - 1e-9
    after = advice.proposed["p10_p90_after"].to_numpy()
    assert np.all(np.diff(np.r_[advice.proposed["p10_p90_before"].iloc[0], after]) <= 1e-9)


def test_advice_tables_and_targets():
    ds = _voxel_model(3)
    existing = np.array([[5.0, 5.0], [35.0, 25.0]])
    zones = [
        {"name": "A", "top": 1.0, "bottom": 4.0, "geometry": shapely.box(2, 2, 18, 28)},
        {"name": "B", "top": 1.0, "bottom": 4.0, "geometry": shapely.box(22, 2, 38, 28)},
    ]
    for target in ("storage", "transmissive", "injection"):
        advice = advise_borings(ds, _borings(existing), existing, shapely.box(0, 0, 40, 30),
                                n_borings=2, zones=zones, target=target, spacing=4.0,
                                max_points=300)  # fmt: skip
        assert list(advice.zones["zone"]) == ["all zones", "A", "B"]
        assert list(advice.proposed["rank"]) == [1, 2]
        assert set(advice.proposed["driver_zone"]) <= {"A", "B"}
        assert (advice.zones["p10_p90_after_2"] <= advice.zones["p10_p90_before"] + 1e-9).all()
        assert advice.unit == ("m" if target == "transmissive" else "m3")
    # the storage weights of one zone are its covered cell volumes: 16 x 26 m x 3 m (construction)
    cells = target_cells(ds, zones, "storage")
    assert cells.weights["A"].sum() == pytest.approx(16 * 26 * 3)
    assert cells.weights["all zones"].sum() == pytest.approx(2 * 16 * 26 * 3)
    # the mean transmissive thickness weights sum to the zone's thickness, 3 m, and the combined
    # target is the area-weighted mean of the two equal zones (construction)
    thick = target_cells(ds, zones, "transmissive")
    assert thick.weights["A"].sum() == pytest.approx(3.0)
    assert thick.weights["all zones"].sum() == pytest.approx(3.0)


def test_candidates_columns_and_errors():
    grid = candidate_grid(shapely.box(0, 0, 10, 10), 5.0, existing=np.array([[2.0, 2.0]]),
                          min_distance=1.0)  # fmt: skip
    assert grid.tolist() == [[7.5, 2.5], [2.5, 7.5], [7.5, 7.5]]
    with pytest.raises(GeometryError, match="spacing"):
        candidate_grid(shapely.box(0, 0, 10, 10), 0.0)
    with pytest.raises(GeometryError, match=r"at most 1500 .* at least 2.58 m"):
        candidate_grid(shapely.box(0, 0, 100, 100), 1.0)  # 10000 candidates: sqrt(10000/1500)
    ds = _voxel_model()
    points = column_points(ds, np.array([[10.9, 3.1]]), levels=4)
    # nearest column x = 11, y = 3; saturated cells z = 0.25 .. 4.75 (construction)
    np.testing.assert_allclose(points[0, :, 2], [4.75, 3.25, 1.75, 0.25])
    np.testing.assert_allclose(points[0, :, :2], [[10.9, 3.1]] * 4)
    assert covariance_from_attrs(ds).range_v == 2.0
    with pytest.raises(ModelError, match="target"):
        target_cells(ds, None, "volume")
    with pytest.raises(ModelError, match="at least 1"):
        advise_borings(ds, _borings([[5, 5]]), np.array([[5.0, 5.0]]), shapely.box(0, 0, 40, 30),
                       n_borings=0)  # fmt: skip
