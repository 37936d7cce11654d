import gstools as gs
import numpy as np
import pytest
import skgstat as skg
from gstools_models import to_gstools

from geo3d.errors import ModelError
from geo3d.geostats.covariance import CovarianceModel
from geo3d.geostats.variogram import (
    experimental_horizontal,
    experimental_isotropic,
    experimental_vertical,
    fit_anisotropic,
    fit_model,
)


def test_meuse_log_zinc_matches_gstat():
    # Meuse data shipped by scikit-gstat (Pebesma and Bivand 2005). gstat defaults: cutoff one
    # third of the bounding-box diagonal, 15 equal bins, weights N_j/h_j^2 (fit.method 7).
    coords, zinc = skg.data.meuse(variable="zinc")["sample"]
    table = experimental_isotropic(coords, np.log(zinc.ravel().astype(float)))
    # First bins of gstat's variogram(log(zinc)~1, meuse): np 57, dist 79.29, gamma 0.1234;
    # np 299, dist 163.97, gamma 0.2162 (gstat documentation, from memory).
    assert table["n_pairs"].iloc[:2].tolist() == [57, 299]
    np.testing.assert_allclose(table["lag"].iloc[:2], [79.29, 163.97], rtol=1e-3)
    np.testing.assert_allclose(table["gamma"].iloc[:2], [0.1234, 0.2162], rtol=2e-3)
    model, _ = fit_model(table["lag"], table["gamma"], table["n_pairs"], kind="spherical")
    # fit.variogram(v, vgm(1, "Sph", 800, 1)): nugget 0.0507, psill 0.5906, range 897 m
    # (Pebesma, gstat documentation); tolerance 2 %.
    assert model.nugget == pytest.approx(0.0507, rel=0.02)
    assert model.sill == pytest.approx(0.5906, rel=0.02)
    assert model.range_h == pytest.approx(897.0, rel=0.02)


def test_experimental_vertical_and_horizontal_by_hand():
    # Two borings, three samples each; semivariance = half mean squared difference (Matheron).
    coords = np.array(
        [[0, 0, 0.0], [0, 0, 1.0], [0, 0, 2.0], [10, 0, 0.0], [10, 0, 1.05], [10, 0, 5.0]]
    )
    values = np.array([0.0, 1.0, 3.0, 2.0, 2.0, 7.0])
    groups = np.array(["a", "a", "a", "b", "b", "b"])
    vert = experimental_vertical(coords, values, groups, lag=1.0, max_lag=3.0)
    # Bins centred on multiples of the lag: (0, 0.5], (0.5, 1.5], (1.5, 2.5], (2.5, 3].
    # Bin (0.5, 1.5]: pairs (0,1) d1 sq1, (1,2) d1 sq4, (b0,b1) d1.05 sq0 -> gamma 5/6.
    # Bin (1.5, 2.5]: pair (0,2) d2 sq9 -> gamma 4.5; the 3.95 and 5 m pairs are beyond max_lag.
    np.testing.assert_allclose(vert["gamma"], [5 / 6, 4.5])
    np.testing.assert_allclose(vert["lag"], [(1 + 1 + 1.05) / 3, 2.0])
    assert vert["n_pairs"].tolist() == [3, 1]
    hor = experimental_horizontal(
        coords, values, groups, lags=np.array([0.0, 20.0]), elevation_tolerance=0.1
    )
    # Pairs between borings within 0.1 m: (a0,b0) sq4, (a1,b1) sq1 -> gamma 1.25 at 10 m.
    assert hor["n_pairs"].tolist() == [2]
    np.testing.assert_allclose(hor["gamma"], [1.25])
    np.testing.assert_allclose(hor["lag"], [10.0])
    # Direction: the only pairs run east-west, so a north-south search finds none.
    assert (
        len(
            experimental_horizontal(
                coords,
                values,
                groups,
                lags=np.array([0.0, 20.0]),
                elevation_tolerance=0.1,
                azimuth=0.0,
            )
        )
        == 0
    )
    east = experimental_horizontal(
        coords, values, groups, lags=np.array([0.0, 20.0]), elevation_tolerance=0.1, azimuth=270.0
    )
    assert east["n_pairs"].tolist() == [2]


def _borings(seed, truth, n_borings=36):
    rng = np.random.default_rng(seed)
    xy = rng.uniform(0, 300, size=(n_borings, 2))
    z = np.arange(0.0, 15.0, 0.25)
    coords = np.array([[x, y, zz] for x, y in xy for zz in z])
    groups = np.repeat(np.arange(n_borings), len(z))
    values = gs.SRF(to_gstools(truth), seed=seed)(coords.T)
    return coords, values, groups


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_fit_recovers_simulated_anisotropic_field(seed):
    # Truth: gstools field with a known model; one realization from 36 borings. Tolerances
    # (stated, common practice for single-realization variograms): total sill 25 %, horizontal
    # range 50 %, vertical range 35 %.
    truth = CovarianceModel("exponential", sill=1.0, nugget=0.05, range_h=80.0, range_v=4.0)
    coords, values, groups = _borings(seed, truth)
    fit = fit_anisotropic(coords, values, groups, model="exponential", elevation_tolerance=0.3)
    assert fit.model.total_sill == pytest.approx(1.05, rel=0.25)
    assert fit.model.range_h == pytest.approx(80.0, rel=0.5)
    assert fit.model.range_v == pytest.approx(4.0, rel=0.35)
    assert fit.vertical["n_pairs"].sum() > 0 and fit.horizontal["n_pairs"].sum() > 0


def test_auto_picks_lowest_misfit_and_detrend():
    truth = CovarianceModel("gaussian", sill=1.0, nugget=0.01, range_h=100.0, range_v=5.0)
    coords, values, groups = _borings(4, truth)
    values = values + 0.5 * coords[:, 2]
    fit = fit_anisotropic(coords, values, groups, detrend="linear_z", azimuth=40.0, minor_ratio=0.5)
    assert set(fit.candidates) == {"exponential", "spherical", "gaussian"}
    assert fit.kind == min(fit.candidates, key=fit.candidates.get)
    assert fit.model.azimuth == 40.0 and fit.model.minor_ratio == 0.5
    # The removed drift is close to the imposed 0.5 per m (a field of range 5 m over 15 m).
    assert fit.trend[1] == pytest.approx(0.5, abs=0.15)
    fixed = fit_anisotropic(coords, values, groups, model="spherical", range_h=70.0, range_v=3.0)
    assert (fixed.model.range_h, fixed.model.range_v) == (70.0, 3.0)


def test_fit_errors():
    with pytest.raises(ModelError):
        fit_model([1.0, 2.0], [0.1, 0.2], [5, 5])
    coords = np.zeros((4, 3))
    with pytest.raises(ModelError):
        fit_anisotropic(coords, np.arange(4.0), np.arange(4), model="cubic")


def test_block_binning_equals_all_pairs_at_once(monkeypatch):
    # Pairs binned block by block (memory linear in samples) give the same bins as all pairs
    # formed at once and binned together (the direct definition, GSLIB sec. III.1).
    from scipy.spatial.distance import pdist, squareform

    from geo3d.geostats import variogram as vg

    rng = np.random.default_rng(3)
    heads = rng.uniform(0, 200, size=(15, 2))
    coords = np.array([[x, y, z] for x, y in heads for z in rng.uniform(0, 10, 25)])
    groups = np.repeat(np.arange(15), 25)
    values = rng.normal(size=len(coords))
    edges = np.linspace(0.0, 150.0, 11)
    monkeypatch.setattr(vg, "_PAIR_BLOCK", 7)
    got = vg.experimental_horizontal(coords, values, groups, lags=edges, elevation_tolerance=0.8)
    i, j = np.triu_indices(len(coords), k=1)
    sel = (groups[i] != groups[j]) & (np.abs(coords[i, 2] - coords[j, 2]) <= 0.8)
    dxy = squareform(pdist(coords[:, :2]))[i[sel], j[sel]]
    want = vg._bin_pairs(dxy, (values[i[sel]] - values[j[sel]]) ** 2, edges)
    np.testing.assert_array_equal(got["n_pairs"], want["n_pairs"])
    np.testing.assert_allclose(got[["lag", "gamma"]], want[["lag", "gamma"]], rtol=1e-12)
    vert = vg.experimental_vertical(coords, values, groups, lag=0.5, max_lag=5.0)
    same = groups[i] == groups[j]
    dz = np.abs(coords[i[same], 2] - coords[j[same], 2])
    vedges = np.concatenate([[0.0], np.arange(0.25, 5.0, 0.5), [5.0]])
    want_v = vg._bin_pairs(dz, (values[i[same]] - values[j[same]]) ** 2, vedges)
    np.testing.assert_array_equal(vert["n_pairs"], want_v["n_pairs"])
    np.testing.assert_allclose(vert[["lag", "gamma"]], want_v[["lag", "gamma"]], rtol=1e-12)
