"""Tests of the voxel model on a synthetic layer-cake site whose layers are known."""

from dataclasses import dataclass

import numpy as np
import pandas as pd
import pytest
import shapely
import xarray as xr
from scipy.stats import norm

from geo3d.analysis.thickness import thickness_maps
from geo3d.analysis.volumes import zone_volumes
from geo3d.errors import ModelError
from geo3d.facies import FaciesClasses
from geo3d.model import (
    NormalScore,
    VoxelModel,
    build_voxel_model,
    facies_probabilities,
)


@dataclass
class Facies:
    name: str
    log10_k_max: float
    porosity: float
    effective_porosity: float


# default classes of the site template (common practice; porosities after Freeze & Cherry 1979
# Table 2.4)
CLASSES = [
    Facies("storage", -7.0, 0.45, 0.05),
    Facies("transitional", -5.0, 0.38, 0.15),
    Facies("transmissive", 0.0, 0.32, 0.25),
]
# synthetic layer cake: (top depth, bottom depth, log10 K), flat ground at 10 m
LAYERS = [(0, 3, -6.0), (3, 5, -8.0), (5, 8, -4.0), (8, 10, -8.0)]
SITE = shapely.box(0, 0, 60, 45)


class FlatWaterTable:
    def elevation(self, x, y):
        return np.full(np.shape(x), 6.0)


def layer_cake_intervals(seed=1, noise=0.05):
    """Synthetic composited intervals: 16 borings, 0.25 m intervals, 40 per boring."""
    rng = np.random.default_rng(seed)
    rows = []
    xs = [5.0, 20.0, 38.0, 55.0]
    ys = [4.0, 17.0, 29.0, 41.0]
    for i, x in enumerate(xs):
        for j, y in enumerate(ys):
            for top in np.arange(0.0, 10.0, 0.25):
                mid = top + 0.125
                value = next(v for t, b, v in LAYERS if t <= mid < b)
                rows.append(
                    {
                        "boring_id": f"B{i}{j}",
                        "x": x,
                        "y": y,
                        "top": top,
                        "bottom": top + 0.25,
                        "z_mid": 10.0 - mid,
                        "log10_k": value + rng.normal(0, noise),
                        "ec": 10.0 + 6.0 * (-4.0 - value) + rng.normal(0, 0.5),
                    }
                )
    intervals = pd.DataFrame(rows)
    borings = intervals.groupby("boring_id", as_index=False)[["x", "y"]].first()
    borings["ground_elev"] = 10.0
    return intervals, borings


# gridder settings of these tests: exponential variogram, 16 neighbours, at most 6 per boring
SETTINGS = {
    "variogram_model": "exponential",
    "range_h": None,
    "range_v": None,
    "azimuth": 0.0,
    "minor_ratio": 1.0,
    "elevation_tolerance": 0.5,
    "neighbors": 16,
    "max_per_group": 6,
    "drift": "none",
    "max_distance": None,
    "chunk_size": 20000,
    "scheduler": "threads",
}


def gridder(**changes):
    settings = {"n_realizations": 0, "seed": 0, **SETTINGS, **changes}
    return VoxelModel(facies_classes=FaciesClasses.from_items(CLASSES), **settings)


def build(intervals, borings, *, cell_size, crs=None, water_table=None, **changes):
    return build_voxel_model(
        intervals,
        gridder(**changes),
        boundary=SITE,
        borings=borings,
        crs=crs,
        cell_size=cell_size,
        base=None,
        padding=0.0,
        water_table=water_table,
    )


@pytest.fixture(scope="module")
def built():
    intervals, borings = layer_cake_intervals()
    return build(
        intervals,
        borings,
        crs="EPSG:32633",
        cell_size=(7.5, 7.5, 0.5),
        water_table=FlatWaterTable(),
        n_realizations=4,
        seed=7,
        normal_score=False,
    )


@pytest.mark.slow
def test_model_contract(built):
    ds = built.dataset
    assert ds["log10_k"].dims == ("z", "y", "x")
    assert ds.sizes == {"z": 20, "y": 6, "x": 8, "realization": 4}
    # base 'auto' = bottom of the deepest interval, elevation 0 (construction)
    assert ds.attrs["base"] == pytest.approx(0.0)
    assert "UTM zone 33N" in ds.attrs["crs"]
    assert list(ds.attrs["facies_names"]) == ["storage", "transitional", "transmissive"]
    for name in ("mask", "log10_k_var", "ec", "ec_var", "k", "facies_code", "saturated"):
        assert name in ds
    assert bool(ds["mask"].all())  # flat ground at the grid top, box boundary
    prob = sum(ds[f"prob_{n}"] for n in ds.attrs["facies_names"])
    prob_k = sum(ds[f"prob_{n}_kriging"] for n in ds.attrs["facies_names"])
    assert np.allclose(prob, 1.0) and np.allclose(prob_k, 1.0)  # probabilities of a partition
    # water table at elevation 6: cells centred at or below 6 m are saturated (construction)
    assert np.array_equal(ds["saturated"].any(axis=(1, 2)).values, ds["z"].values <= 6.0)
    assert set(built.variograms) == {"log10_k", "ec"}
    assert set(built.crossval) == {"log10_k", "ec"}


@pytest.mark.slow
def test_layer_cake_is_recovered(built):
    maps = thickness_maps(built.dataset)
    # flat layers: transmissive 3 m (depth 5-8), storage 2 + 2 m (construction)
    assert np.allclose(maps["transmissive_thickness"], 3.0)
    assert np.allclose(maps["storage_thickness"], 4.0)
    assert np.allclose(maps["transmissive_top_depth"], 5.0)
    volumes = zone_volumes(built.dataset, None)
    volumes = volumes[volumes["band"] == "all"].set_index("facies")  # the whole site
    # bulk volume 60 x 45 m x 3 m = 8100 m3 (construction): exact from the most likely facies,
    # within 2 % as the expected value under the Gaussian assumption of the kriging
    ds = built.dataset
    assert volumes.loc["transmissive", "bulk_volume_m3_most_likely"] == pytest.approx(8100.0)
    gaussian = float(ds["prob_transmissive_kriging"].sum()) * ds.voxels.cell_volume
    assert gaussian == pytest.approx(8100.0, rel=0.02)
    # from 4 realizations: ordered percentiles within 5 %
    p10, p50, p90 = (volumes.loc["transmissive", f"bulk_volume_m3_p{p}"] for p in (10, 50, 90))
    assert p10 <= p50 <= p90
    assert p10 == pytest.approx(8100.0, rel=0.05) and p90 == pytest.approx(8100.0, rel=0.05)
    assert volumes.loc["transmissive", "bulk_volume_m3"] == pytest.approx(8100.0, rel=0.05)


@pytest.mark.slow
def test_crossval_error_is_near_the_noise(built):
    # leave one boring out of a flat layer cake with 0.05 log10 noise: the other borings see
    # the same layers at the same elevations, so the error is of the order of the noise
    # (construction) and unbiased
    summary = built.crossval["log10_k"].summary
    assert summary["n"] == 640
    assert summary["rmse"] < 0.3
    assert abs(summary["mean_error"]) < 0.05
    per_group = built.crossval["log10_k"].per_group
    assert len(per_group) == 16


@pytest.mark.slow
def test_realizations_spread_as_the_kriging_variance(built):
    # simulated in log10 K space, a simulation conditioned by kriging departs from the kriged
    # value by the kriging variance on average: E[(Z_cs - Z_k)^2] = sigma_k^2 (Journel &
    # Huijbregts 1978, ch. VII); 4 realizations x 960 cells, within +-50 %
    ds = built.dataset
    assert ds.attrs["simulation_space"] == "log10_k"
    mask = ds["mask"].values
    departure = (ds["realizations"].values - ds["log10_k"].values[None])[:, mask]
    ratio = np.mean(departure**2) / np.mean(ds["log10_k_var"].values[mask])
    assert 0.5 < ratio < 1.5
    # the facies frequencies over the realizations are the prob_ variables (definition)
    table = FaciesClasses.from_items(CLASSES)
    codes = table.classify(ds["realizations"].values)
    share = (codes == table.transmissive).mean(axis=0)
    assert np.allclose(share[mask], ds["prob_transmissive"].values[mask])


@pytest.mark.slow
def test_normal_score_realizations_keep_the_data_range():
    # back-transformed realizations stay inside the data range and honour the layer
    # proportions of the layer cake (4 m storage, 3 m transitional, 3 m transmissive of 10 m;
    # construction) within 0.1
    intervals, borings = layer_cake_intervals()
    result = build(
        intervals, borings, cell_size=(15.0, 15.0, 0.5), n_realizations=6, seed=3, crossval=False
    )
    ds = result.dataset
    assert ds.attrs["simulation_space"] == "normal score"
    assert "log10_k_normal_score" in result.variograms
    values = ds["realizations"].values[:, ds["mask"].values]
    assert values.min() >= intervals["log10_k"].min() - 1e-12
    assert values.max() <= intervals["log10_k"].max() + 1e-12
    codes = FaciesClasses.from_items(CLASSES).classify(values)
    shares = [(codes == i).mean() for i in range(3)]
    assert shares == pytest.approx([0.4, 0.3, 0.3], abs=0.1)


def test_normal_score_transform():
    rng = np.random.default_rng(0)
    data = rng.lognormal(size=999)
    transform, scores = NormalScore.fit(data)
    # scores are the standard normal quantiles of (r - 0.5) / n (Deutsch & Journel 1998,
    # section V.1.6): symmetric about 0, variance just under 1
    assert np.mean(scores) == pytest.approx(0.0, abs=1e-12)
    assert np.var(scores) == pytest.approx(1.0, abs=0.01)
    assert np.array_equal(np.argsort(scores), np.argsort(data))
    assert np.allclose(transform.inverse(scores), data)  # round trip (construction)
    # ties (a censored value repeated) are spread over distinct scores
    tied = np.r_[np.full(50, -9.5), rng.normal(-5, 1, 50)]
    _, tied_scores = NormalScore.fit(tied, seed=1)
    assert len(np.unique(tied_scores[:50])) == 50
    assert np.all(tied_scores[:50] < np.median(tied_scores))
    # beyond the extreme scores the extreme data are held (no extrapolation)
    assert transform.inverse(np.array([-9.0, 9.0])).tolist() == [data.min(), data.max()]


def test_facies_probabilities_match_the_normal_law():
    table = FaciesClasses.from_items(CLASSES)
    prob = facies_probabilities(np.array([-6.5]), np.array([0.25]), table)
    # N(-6.5, 0.5^2): P(< -7) = Phi(-1), P(-7..-5) = Phi(3) - Phi(-1), P(>= -5) = 1 - Phi(3)
    # (normal law; scipy.stats.norm as reference)
    assert prob[:, 0] == pytest.approx([norm.cdf(-1), norm.cdf(3) - norm.cdf(-1), 1 - norm.cdf(3)])
    # zero variance: the class of the estimate (indicator)
    assert facies_probabilities(np.array([-5.0]), np.array([0.0]), table)[:, 0].tolist() == [
        0.0,
        0.0,
        1.0,
    ]


def test_bad_inputs_are_reported():
    intervals, borings = layer_cake_intervals()
    with pytest.raises(ModelError, match="z_mid"):
        build(intervals.drop(columns="z_mid"), borings, cell_size=(10, 10, 1))
    with pytest.raises(ModelError, match="n_realizations"):
        gridder(n_realizations=-1)
    with pytest.raises(ModelError, match="before fit"):
        gridder().grid(xr.Dataset())
    constant = intervals.assign(log10_k=-5.0)
    with pytest.raises(ModelError, match="4 varying values"):
        gridder().fit(constant)
    with pytest.raises(ModelError, match="not above the base"):
        build_voxel_model(
            intervals,
            gridder(crossval=False),
            boundary=SITE,
            borings=borings,
            crs=None,
            cell_size=(10, 10, 1),
            base=12.0,  # above the flat ground at 10 m
            padding=0.0,
        )
