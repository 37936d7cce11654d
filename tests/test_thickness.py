"""Tests of the thickness maps against a layer-cake site whose answers are known exactly."""

import numpy as np
import pytest
import shapely
from hypothesis import given, settings
from hypothesis import strategies as st
from layer_cake import CLASSES, layer_cake

from geo3d.analysis.thickness import column_runs, nan_percentiles, thickness_maps
from geo3d.errors import ModelError
from geo3d.facies import FaciesClasses
from geo3d.grid import make_grid


def test_layer_cake_thickness_maps_exact():
    maps = thickness_maps(layer_cake())
    # flat layers: the answers are the layer thicknesses (construction); T = sum K b
    # (Freeze & Cherry 1979, section 2.6)
    assert np.allclose(maps["transmissive_thickness"], 3.0)
    assert np.allclose(maps["storage_thickness"], 4.0)
    assert np.allclose(maps["column_height"], 10.0)
    assert np.allclose(maps["storage_layers"], 2)
    assert np.allclose(maps["transmissive_top_depth"], 5.0)
    assert np.allclose(maps["transmissive_bottom_depth"], 8.0)
    assert np.allclose(maps["transmissive_top_elev"], 5.0)
    assert np.allclose(maps["transmissive_bottom_elev"], 2.0)
    assert np.allclose(maps["transmissivity"], 3 * 1e-6 + 2 * 1e-8 + 3 * 1e-4 + 2 * 1e-8)
    assert maps["transmissivity"].attrs["units"] == "m2/s"
    assert maps["transmissive_thickness"].dims == ("y", "x")


def test_depth_range_cuts_cells_by_covered_height():
    maps = thickness_maps(layer_cake(), depth_range=(4.0, 6.25))
    # 6.25 m lies inside a 0.5 m cell (elevation 3.5-4.0): counted by covered height
    assert np.allclose(maps["transmissive_thickness"], 1.25)  # 6.25 - 5 (construction)
    assert np.allclose(maps["storage_thickness"], 1.0)  # 5 - 4
    assert np.allclose(maps["transmissive_bottom_depth"], 6.25)
    assert np.allclose(maps["column_height"], 2.25)
    # T over the range: 1.25 m at 1e-4, 1 m at 1e-8 (Freeze & Cherry 1979, T = K b)
    assert np.allclose(maps["transmissivity"], 1.25e-4 + 1e-8)


def test_main_zone_is_the_thickest_run():
    # two transmissive runs: the lower (3 m) is the main one (construction)
    length, end, count = column_runs(np.array([0, 1, 1, 1, 0, 1, 0], bool))
    assert (int(length), int(end), int(count)) == (3, 3, 2)


def test_realization_percentiles_bracket():
    base = layer_cake()
    field = base["log10_k"].values
    sims = np.stack([field + shift for shift in (-1.5, -0.5, 0.0, 0.5, 1.5)])
    maps = thickness_maps(layer_cake(realizations=sims))
    # shifts of -1.5, -0.5, 0, 0.5, 1.5 reclassify the layers (-6, -8, -4, -8) so that the
    # transmissive thickness is 0, 3, 3, 3, 6 m and the storage thickness 7, 4, 4, 4, 0 m
    # (construction); percentiles by linear interpolation (numpy default)
    assert np.allclose(maps["transmissive_thickness_p50"], 3.0)
    assert np.allclose(maps["transmissive_thickness_p90"], 4.8)  # 3 + 0.6 x (6 - 3)
    assert np.allclose(maps["transmissive_thickness_p10"], 1.2)  # 0 + 0.4 x (3 - 0)
    assert np.allclose(maps["storage_thickness_p10"], 1.6)  # 0 + 0.4 x (4 - 0)
    assert np.allclose(maps["storage_thickness_p90"], 5.8)  # 4 + 0.6 x (7 - 4)


@settings(max_examples=30, deadline=None)
@given(
    seed=st.integers(0, 10_000),
    n_sims=st.integers(0, 4),
    top=st.floats(0, 3),
    thick=st.floats(0.1, 6),
)
def test_thickness_properties(seed, n_sims, top, thick):
    # invariants (common sense): 0 <= thickness <= column height; T >= 0; P10 <= P50 <= P90
    rng = np.random.default_rng(seed)
    ds = make_grid(shapely.box(0, 0, 3, 2), cell_size=(1, 1, 0.5), top=6, base=0)
    shape = tuple(ds.sizes[d] for d in "zyx")
    ground = rng.uniform(2, 6, shape[1:])
    ds["ground_elev"] = (("y", "x"), ground)
    ds["mask"] = (("z", "y", "x"), ds["z"].values[:, None, None] <= ground[None])
    table = FaciesClasses.from_items(CLASSES)
    field = np.where(ds["mask"].values, rng.normal(-6, 2, shape), np.nan)
    ds["log10_k"] = (("z", "y", "x"), field)
    ds["facies_code"] = (("z", "y", "x"), table.classify(field))
    ds.attrs.update(table.attrs())
    if n_sims:
        sims = np.where(ds["mask"].values, rng.normal(-6, 2, (n_sims,) + shape), np.nan)
        ds["realizations"] = (("realization", "z", "y", "x"), sims)
    maps = {k: v.fillna(0.0) for k, v in thickness_maps(ds, depth_range=(top, top + thick)).items()}
    height = maps["column_height"].values
    assert np.all(height <= thick + 1e-9)
    for name in ("transmissive_thickness", "storage_thickness"):
        values = maps[name].values
        assert np.all(values >= 0) and np.all(values <= height + 1e-9)
    total = maps["transmissive_thickness"] + maps["storage_thickness"]
    assert np.all(total.values <= height + 1e-9)
    assert np.all(maps["transmissivity"].values >= 0)
    if n_sims:
        for name in ("transmissive_thickness", "storage_thickness", "transmissivity"):
            p10, p50, p90 = (maps[f"{name}_p{p}"].values for p in (10, 50, 90))
            assert np.all(p10 <= p50 + 1e-12) and np.all(p50 <= p90 + 1e-12)


def test_thickness_needs_a_dataset():
    with pytest.raises(ModelError, match="VoxelModel"):
        thickness_maps({"not": "a model"})


@settings(max_examples=40, deadline=None)
@given(seed=st.integers(0, 10_000), n=st.integers(1, 7), nan_share=st.floats(0, 0.9))
def test_nan_percentiles_match_numpy(seed, n, nan_share):
    # reference: numpy.nanpercentile (linear interpolation)
    import warnings

    rng = np.random.default_rng(seed)
    stack = rng.normal(size=(n, 5, 4))
    stack[rng.random(stack.shape) < nan_share] = np.nan
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        expected = np.nanpercentile(stack, [10, 50, 90], axis=0)
    got = nan_percentiles(stack, [10, 50, 90])
    assert np.allclose(got, expected, equal_nan=True)
