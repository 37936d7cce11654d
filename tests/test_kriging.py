import gstools as gs
import numpy as np
import pytest
from gstools_models import to_gstools
from hypothesis import given, settings
from hypothesis import strategies as st
from pykrige.ok3d import OrdinaryKriging3D

from geo3d.errors import ModelError
from geo3d.geostats.covariance import CovarianceModel
from geo3d.geostats.kriging import OrdinaryKriging
from geo3d.geostats.neighbours import NeighbourSearch


def _data(n=250, m=150, seed=1):
    rng = np.random.default_rng(seed)
    xyz = rng.uniform([0, 0, 0], [100, 100, 10], size=(n, 3))
    v = np.sin(xyz[:, 0] / 20) + xyz[:, 2] / 5 + rng.normal(0, 0.1, n)
    t = rng.uniform([0, 0, 0], [100, 100, 10], size=(m, 3))
    return xyz, v, t


def _pykrige(xyz, v, t, model, k):
    # pykrige rotates by anisotropy_angle_z counter-clockwise from +x, then stretches y and z:
    # scaling_y = major/minor range, scaling_z = horizontal/vertical range (pykrige core).
    pk = OrdinaryKriging3D(
        xyz[:, 0],
        xyz[:, 1],
        xyz[:, 2],
        v,
        variogram_model=model.kind,
        variogram_parameters={"psill": model.sill, "range": model.range_h, "nugget": model.nugget},
        anisotropy_scaling_y=1.0 / model.minor_ratio,
        anisotropy_scaling_z=model.range_h / model.range_v,
        anisotropy_angle_z=90.0 - model.azimuth,
    )
    return pk.execute("points", t[:, 0], t[:, 1], t[:, 2], backend="loop", n_closest_points=k)


@pytest.mark.parametrize(
    ("kind", "azimuth", "minor", "range_v"),
    [
        ("spherical", 0.0, 1.0, 60.0),
        ("exponential", 30.0, 0.5, 8.0),
        ("spherical", 120.0, 0.4, 5.0),
    ],
)
def test_equals_pykrige_moving_neighbourhood(kind, azimuth, minor, range_v):
    # Reference: pykrige OrdinaryKriging3D, loop backend, same k nearest (Murphy et al., PyKrige).
    xyz, v, t = _data()
    model = CovarianceModel(
        kind,
        sill=1.2,
        nugget=0.1,
        range_h=60.0,
        range_v=range_v,
        azimuth=azimuth,
        minor_ratio=minor,
    )
    est, var = OrdinaryKriging(model, neighbors=20, chunk_size=37).fit(xyz, v).predict(t)
    pe, pv = _pykrige(xyz, v, t, model, 20)
    np.testing.assert_allclose(est, pe, rtol=1e-6)
    np.testing.assert_allclose(var, pv, rtol=1e-6)


@pytest.mark.parametrize("kind", ["gaussian", "exponential", "matern"])
def test_global_mode_equals_gstools(kind):
    # Reference: gstools Krige, ordinary, global system, exact at data (Mueller et al. 2022).
    xyz, v, t = _data(n=120, m=80, seed=3)
    model = CovarianceModel(
        kind, sill=1.0, nugget=0.05, range_h=50.0, range_v=6.0, azimuth=45.0, minor_ratio=0.6
    )
    est, var = OrdinaryKriging(model, global_mode=True, chunk_size=30).fit(xyz, v).predict(t)
    ge, gv = gs.krige.Ordinary(to_gstools(model), xyz.T, v, exact=True)(t.T, return_var=True)
    np.testing.assert_allclose(est, ge, rtol=1e-6)
    np.testing.assert_allclose(var, gv, rtol=1e-6)
    # With all samples as neighbours the moving neighbourhood is the global system.
    e2, v2 = OrdinaryKriging(model, neighbors=len(xyz)).fit(xyz, v).predict(t)
    np.testing.assert_allclose(e2, est, rtol=1e-8)
    np.testing.assert_allclose(v2, var, rtol=1e-8)


@pytest.mark.parametrize("global_mode", [False, True])
def test_zero_nugget_reproduces_data(global_mode):
    # Kriging is an exact interpolator with zero variance at the data (Journel and Huijbregts
    # 1978, ch. V).
    xyz, v, _ = _data(n=150)
    model = CovarianceModel("spherical", sill=1.0, range_h=40.0, range_v=4.0)
    ok = OrdinaryKriging(model, neighbors=16, global_mode=global_mode).fit(xyz, v)
    est, var = ok.predict(xyz)
    np.testing.assert_allclose(est, v, atol=1e-9)
    np.testing.assert_allclose(var, 0.0, atol=1e-9)


def test_anisotropy_improves_prediction_and_rotation_works():
    # A field whose correlation is 5x longer along one axis is predicted better with the matching
    # model than with an isotropic one, and rotating both field and model keeps that gain.
    for azimuth in (90.0, 30.0):
        truth = CovarianceModel(
            "gaussian", sill=1.0, range_h=60.0, range_v=100.0, azimuth=azimuth, minor_ratio=0.2
        )
        rng = np.random.default_rng(5)
        pts = np.column_stack([rng.uniform(0, 100, (600, 2)), np.zeros(600)])
        srf = gs.SRF(to_gstools(truth), seed=11)
        val = srf(pts.T)
        train, test = pts[:400], pts[400:]
        iso = CovarianceModel("gaussian", sill=1.0, range_h=25.0, range_v=100.0)
        wrong = CovarianceModel(
            "gaussian", sill=1.0, range_h=60.0, range_v=100.0, azimuth=azimuth + 90, minor_ratio=0.2
        )
        err = {}
        for name, m in (("truth", truth), ("iso", iso), ("wrong", wrong)):
            est, _ = OrdinaryKriging(m, neighbors=24).fit(train, val[:400]).predict(test)
            err[name] = np.sqrt(np.mean((est - val[400:]) ** 2))
        assert err["truth"] < 0.8 * err["iso"]
        assert err["truth"] < 0.8 * err["wrong"]


def test_max_distance_gives_nan_not_mean():
    xyz, v, _ = _data(n=50)
    model = CovarianceModel("exponential", sill=1.0, range_h=10.0, range_v=1.0)
    far = np.array([[500.0, 500.0, 5.0], [50.0, 50.0, 5.0]])
    ok = OrdinaryKriging(model, neighbors=8, max_distance=3.0).fit(xyz, v)
    est, var = ok.predict(far)
    assert np.isnan(est[0]) and np.isnan(var[0])
    assert np.isfinite(est[1]) and np.isfinite(var[1])
    glob = OrdinaryKriging(model, global_mode=True, max_distance=3.0).fit(xyz, v)
    est_g, _ = glob.predict(far)
    assert np.isnan(est_g[0]) and np.isfinite(est_g[1])


def test_per_group_cap_limits_neighbours_from_one_boring():
    # Borings: a dense one next to the target and three farther away. With a cap of 4 the
    # estimate must use the other borings, i.e. equal kriging with exactly those samples.
    z = np.arange(0.0, 10.0, 0.5)
    heads = [(0.0, 0.0), (30.0, 0.0), (0.0, 30.0), (-30.0, -30.0)]
    xyz = np.array([[x, y, zz] for x, y in heads for zz in z])
    groups = np.repeat(np.arange(4), len(z))
    rng = np.random.default_rng(2)
    v = rng.normal(size=len(xyz))
    model = CovarianceModel("exponential", sill=1.0, nugget=0.1, range_h=80.0, range_v=5.0)
    target = np.array([[2.0, 1.0, 4.9]])
    ok = OrdinaryKriging(model, neighbors=12, max_per_group=4).fit(xyz, v, groups)
    _, idx = ok.search_.query(model.scaled(target), 12, max_per_group=4)
    counts = np.bincount(groups[idx[0]], minlength=4)
    assert counts.max() <= 4 and counts.sum() == 12
    est, var = ok.predict(target)
    sub = idx[0]
    e2, v2 = OrdinaryKriging(model, neighbors=12).fit(xyz[sub], v[sub]).predict(target)
    np.testing.assert_allclose([est[0], var[0]], [e2[0], v2[0]], rtol=1e-10)


def test_linear_drift_reproduces_linear_field():
    # Kriging with a linear drift in z reproduces a field linear in z exactly (unbiasedness
    # constraints; Journel and Huijbregts 1978, ch. V.D).
    xyz, _, t = _data(n=200)
    v = 3.0 + 0.7 * xyz[:, 2]
    model = CovarianceModel("exponential", sill=1.0, nugget=0.01, range_h=30.0, range_v=3.0)
    est, var = OrdinaryKriging(model, neighbors=12, drift="linear_z").fit(xyz, v).predict(t)
    np.testing.assert_allclose(est, 3.0 + 0.7 * t[:, 2], rtol=1e-8)
    assert np.all(var >= 0)


def test_chunked_dask_and_serial_identical():
    xyz, v, t = _data(n=300, m=500)
    groups = np.repeat(np.arange(30), 10)
    model = CovarianceModel("spherical", sill=1.0, nugget=0.1, range_h=50.0, range_v=5.0)
    base = OrdinaryKriging(model, neighbors=16, max_per_group=3, chunk_size=10_000)
    e0, v0 = base.fit(xyz, v, groups).predict(t)
    small = OrdinaryKriging(model, neighbors=16, max_per_group=3, chunk_size=37).fit(xyz, v, groups)
    e1, v1 = small.predict(t)
    e2, v2 = small.predict(t, scheduler="threads")
    # Other chunk boundaries group the cells' systems differently: equal to rounding.
    np.testing.assert_allclose(e0, e1, rtol=1e-12, atol=1e-14)
    np.testing.assert_allclose(v0, v1, rtol=1e-12, atol=1e-14)
    # The same chunks on dask threads: bit for bit.
    np.testing.assert_array_equal(e1, e2)
    np.testing.assert_array_equal(v1, v2)


def test_several_value_sets_share_weights():
    xyz, v, t = _data(n=100, m=40)
    model = CovarianceModel("exponential", sill=1.0, range_h=30.0, range_v=3.0)
    e1, var1 = OrdinaryKriging(model, neighbors=10).fit(xyz, v).predict(t)
    two = np.column_stack([v, 2 * v])
    both, var2 = OrdinaryKriging(model, neighbors=10).fit(xyz, two).predict(t)
    np.testing.assert_allclose(both[:, 0], e1)
    np.testing.assert_allclose(both[:, 1], 2 * e1)
    np.testing.assert_array_equal(var1, var2)


def test_bad_input_raises():
    model = CovarianceModel("exponential", range_h=30.0, range_v=3.0)
    xyz, v, _ = _data(n=20)
    with pytest.raises(ModelError, match="row 3"):
        bad = v.copy()
        bad[3] = np.nan
        OrdinaryKriging(model).fit(xyz, bad)
    with pytest.raises(ModelError, match="same place"):
        OrdinaryKriging(model).fit(np.vstack([xyz, xyz[:1]]), np.append(v, 0.0))
    with pytest.raises(ModelError, match="drift"):
        OrdinaryKriging(model, drift="quadratic").fit(xyz, v)
    with pytest.raises(ModelError, match="before fit"):
        OrdinaryKriging(model).predict(xyz)


@settings(max_examples=30, deadline=None)
@given(
    seed=st.integers(0, 10_000),
    k=st.integers(1, 12),
    cap=st.integers(1, 5),
    n_groups=st.integers(1, 6),
)
def test_capped_search_equals_brute_force(seed, k, cap, n_groups):
    # Invariant (definition): the capped neighbourhood is the distance-ordered list of samples,
    # skipping any sample whose group already has `cap` members, truncated to k.
    rng = np.random.default_rng(seed)
    pts = rng.uniform(0, 1, (40, 3))
    groups = rng.integers(0, n_groups, 40)
    targets = rng.uniform(0, 1, (5, 3))
    search = NeighbourSearch(pts, groups)
    dist, idx = search.query(targets, k, max_per_group=cap)
    for t, row in zip(targets, idx, strict=True):
        order = np.argsort(np.linalg.norm(pts - t, axis=1), kind="stable")
        want, taken = [], {}
        for i in order:
            if taken.get(groups[i], 0) < cap and len(want) < k:
                want.append(i)
                taken[groups[i]] = taken.get(groups[i], 0) + 1
        got = row[row < len(pts)]
        assert got.tolist() == want
    # The slower candidate-filtering search (used when the per-group search is not provably
    # exact) gives the same neighbourhoods.
    _, idx2 = search._query_candidates(targets, k, cap, np.inf, None)
    np.testing.assert_array_equal(idx2, idx)


def test_distributed_client_identical_to_serial():
    # A dask.distributed scheduler (in-process here; an address works the same way).
    distributed = pytest.importorskip("dask.distributed")
    xyz, v, t = _data(n=120, m=300)
    model = CovarianceModel("exponential", sill=1.0, nugget=0.1, range_h=40.0, range_v=4.0)
    ok = OrdinaryKriging(model, neighbors=12, chunk_size=64).fit(xyz, v)
    e0, v0 = ok.predict(t)
    with distributed.Client(processes=False, n_workers=1, threads_per_worker=2) as client:
        e1, v1 = ok.predict(t, scheduler=client)
        e2, v2 = ok.predict(t, scheduler=client.scheduler.address)
    np.testing.assert_array_equal(e0, e1)
    np.testing.assert_array_equal(v0, v1)
    np.testing.assert_array_equal(e0, e2)
    np.testing.assert_array_equal(v0, v2)
    import dask

    with (
        dask.config.set({"distributed.comm.timeouts.connect": "1s"}),
        pytest.raises(ModelError, match=r"\[kriging\] scheduler"),
    ):
        ok.predict(t, scheduler="tcp://127.0.0.1:1")


def test_without_precomputed_covariance_same_result(monkeypatch):
    # Large data sets build each kriging matrix from distances instead of gathering it from
    # the sample covariance matrix: same systems, same results (to rounding).
    import geo3d.geostats.kriging as kriging_module

    xyz, v, t = _data(n=200, m=120)
    groups = np.repeat(np.arange(20), 10)
    model = CovarianceModel("spherical", sill=1.0, nugget=0.1, range_h=40.0, range_v=4.0)
    opts = {"neighbors": 12, "max_per_group": 3, "max_distance": 0.8}
    e0, v0 = OrdinaryKriging(model, **opts).fit(xyz, v, groups).predict(t)
    monkeypatch.setattr(kriging_module, "_FULL_COV_MAX", 0)
    ok = OrdinaryKriging(model, **opts).fit(xyz, v, groups)
    assert ok._cov_full is None
    e1, v1 = ok.predict(t)
    np.testing.assert_allclose(e1, e0, rtol=1e-10, atol=1e-12)
    np.testing.assert_allclose(v1, v0, rtol=1e-10, atol=1e-12)
    assert np.isnan(e0).sum() == np.isnan(e1).sum()
