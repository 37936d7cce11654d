import numpy as np
import pytest

from geo3d.errors import ModelError
from geo3d.geostats.covariance import CovarianceModel
from geo3d.geostats.kriging import OrdinaryKriging
from geo3d.geostats.simulation import conditional_simulation, unconditional_fields


def _case(nugget):
    model = CovarianceModel(
        "exponential",
        sill=1.0,
        nugget=nugget,
        range_h=30.0,
        range_v=3.0,
        azimuth=30.0,
        minor_ratio=0.6,
    )
    rng = np.random.default_rng(0)
    xyz = rng.uniform([0, 0, 0], [100, 100, 10], (40, 3))
    v = rng.normal(size=40)
    targets = np.vstack(
        [xyz[:8], rng.uniform([0, 0, 0], [100, 100, 10], (60, 3)), [[1000.0, 1000.0, 5.0]]]
    )
    return model, xyz, v, targets


@pytest.mark.parametrize("nugget", [0.0, 0.1])
def test_realizations_reproduce_data_and_kriging_moments(nugget):
    # Conditioning by kriging (Journel and Huijbregts 1978, ch. VII): realizations equal the
    # data at data locations; their mean is the kriging estimate and their variance the kriging
    # variance (tolerances for 400 realizations: sampling error of a mean ~ 0.05 sd, of a
    # variance ~ 7 %, plus the randomization method's approximation).
    model, xyz, v, targets = _case(nugget)
    sims = conditional_simulation(
        xyz, v, targets, model=model, n_realizations=400, seed=7, neighbors=16, mode_no=200
    )
    assert sims.shape == (400, len(targets))
    np.testing.assert_allclose(sims[:, :8], np.broadcast_to(v[:8], (400, 8)), atol=1e-9)
    est, var = OrdinaryKriging(model, neighbors=16).fit(xyz, v).predict(targets)
    free = slice(8, None)
    z = (sims[:, free].mean(axis=0) - est[free]) / np.sqrt(var[free] / 400)
    assert np.mean(np.abs(z)) < 1.2  # E|N(0,1)| = 0.80
    ratio = sims[:, free].var(axis=0) / var[free]
    assert np.median(ratio) == pytest.approx(1.0, abs=0.1)
    # Far from all data the variance is the model's total sill.
    assert sims[:, -1].var() == pytest.approx(model.total_sill, rel=0.2)


def test_unconditional_variance_and_seed():
    model, _, _, targets = _case(0.0)
    a = unconditional_fields(targets, model=model, n_realizations=300, seed=1, mode_no=200)
    b = unconditional_fields(targets, model=model, n_realizations=300, seed=1, mode_no=200)
    np.testing.assert_array_equal(a, b)
    # Variance of the field = sill (definition of the model); 300 realizations, 10 %.
    assert a.var() == pytest.approx(1.0, rel=0.1)


@pytest.mark.parametrize("kind", ["exponential", "spherical", "gaussian", "matern"])
def test_unconditional_covariance_reproduced(kind):
    # The mean product of field values at a lag reproduces the model covariance (definition;
    # 150 realizations x 200 point pairs, tolerance 0.075 of the sill) along the rotated major
    # axis and vertically.
    model = CovarianceModel(
        kind, sill=2.0, range_h=30.0, range_v=3.0, azimuth=30.0, minor_ratio=0.5
    )
    rng = np.random.default_rng(0)
    p0 = rng.uniform(0, 100, (200, 3))
    a30 = np.radians(30.0)
    for h, lag in [
        (0.25, [7.5 * np.sin(a30), 7.5 * np.cos(a30), 0.0]),
        (0.5, [15 * np.sin(a30), 15 * np.cos(a30), 0.0]),
        (0.5, [0.0, 0.0, 1.5]),
        (0.5, [7.5 * np.cos(a30), -7.5 * np.sin(a30), 0.0]),
    ]:
        pts = np.vstack([p0, p0 + np.asarray(lag)])
        f = unconditional_fields(pts, model=model, n_realizations=150, seed=2, mode_no=200)
        cov = np.mean(f[:, :200] * f[:, 200:])
        assert cov == pytest.approx(float(model.covariance(np.array(h))), abs=0.15)


def test_chunked_dask_and_serial_identical():
    model, xyz, v, targets = _case(0.1)
    kw = {"model": model, "n_realizations": 5, "seed": 3, "neighbors": 12, "mode_no": 100}
    s0 = conditional_simulation(xyz, v, targets, **kw)
    s1 = conditional_simulation(xyz, v, targets, chunk_size=7, **kw)
    s2 = conditional_simulation(xyz, v, targets, chunk_size=7, scheduler="threads", **kw)
    np.testing.assert_allclose(s0, s1, rtol=1e-12, atol=1e-12)
    np.testing.assert_array_equal(s1, s2)
    s3 = conditional_simulation(xyz, v, targets, **{**kw, "seed": 4})
    assert not np.allclose(s0, s3)


def test_bad_arguments():
    model, xyz, v, targets = _case(0.0)
    with pytest.raises(ModelError):
        conditional_simulation(xyz, v, targets, model=model, n_realizations=0, seed=1)
    with pytest.raises(ModelError):
        conditional_simulation(xyz, v, targets[:, :2], model=model, n_realizations=1, seed=1)


def test_lattice_evaluation_equals_pointwise():
    # exp(i k.x) = exp(i kx x) exp(i ky y) exp(i kz z): the factorised evaluation on voxel
    # centres equals the cosine sum point by point (identity; rounding at site coordinates).
    from geo3d.geostats.simulation import _Field

    model = CovarianceModel(
        "spherical", sill=1.0, range_h=50.0, range_v=3.0, azimuth=30.0, minor_ratio=0.5
    )
    field = _Field(model, 5, 300)
    xs = 600_000.0 + np.arange(30) * 2.0
    ys = 5_400_000.0 + np.arange(25) * 2.0
    zs = np.arange(8) * 0.5
    zz, yy, xx = np.meshgrid(zs, ys, xs, indexing="ij")
    pts = np.column_stack([xx.ravel(), yy.ravel(), zz.ravel()])
    keep = np.random.default_rng(1).random(len(pts)) < 0.8
    pts = pts[keep]
    assert len(pts) >= 2000  # takes the lattice path
    np.testing.assert_allclose(field(pts), field._on_points(pts), atol=1e-7)
