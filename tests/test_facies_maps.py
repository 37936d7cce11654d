"""Column summaries of the hydrofacies (geo3d.analysis.facies_maps)."""

from __future__ import annotations

import numpy as np
import pytest
import xarray as xr

from geo3d.analysis.facies_maps import facies_column_maps
from geo3d.errors import ModelError
from geo3d.facies import DEFAULT_CLASSES


def column_model() -> xr.Dataset:
    """Two columns of four 0.5 m cells; the second lies outside the model (invented values)."""
    codes = np.array([0, 0, 2, -1])[:, None, None] * np.ones((1, 1, 2), dtype=int)
    mask = np.zeros((4, 1, 2), dtype=bool)
    mask[:3, :, 0] = True
    codes = np.where(mask, codes, -1).astype(np.int8)
    ds = xr.Dataset(
        coords={"z": [0.25, 0.75, 1.25, 1.75], "y": [0.5], "x": [0.5, 1.5]},
        attrs=DEFAULT_CLASSES.attrs(),
    )
    ds["mask"] = (("z", "y", "x"), mask)
    ds["facies_code"] = (("z", "y", "x"), codes)
    storage = np.where(mask, np.array([0.9, 0.6, 0.0, 0.0])[:, None, None], np.nan)
    ds["prob_storage"] = (("z", "y", "x"), storage)
    return ds


def test_thickness_is_cell_count_times_cell_height():
    maps = facies_column_maps(column_model())
    # definition: two storage cells and one transmissive cell of 0.5 m each
    assert float(maps["thickness_storage"][0, 0]) == pytest.approx(1.0)
    assert float(maps["thickness_transmissive"][0, 0]) == pytest.approx(0.5)
    assert float(maps["thickness_transitional"][0, 0]) == 0.0
    assert maps["thickness_storage"].attrs["units"] == "m"


def test_mean_probability_skips_cells_outside_the_model():
    maps = facies_column_maps(column_model())
    # definition: mean of the three cells inside, (0.9 + 0.6 + 0.0) / 3
    assert float(maps["mean_prob_storage"][0, 0]) == pytest.approx(0.5)
    assert "mean_prob_transmissive" not in maps  # the model holds no such probability


def test_columns_outside_the_model_are_nan():
    maps = facies_column_maps(column_model())
    for grid in maps.values():
        assert grid.dims == ("y", "x")
        assert np.isnan(float(grid[0, 1]))


def test_model_without_facies_gives_no_maps():
    assert facies_column_maps(column_model().drop_vars("facies_code")) == {}


def test_not_a_model_is_refused():
    with pytest.raises(ModelError, match="VoxelModel"):
        facies_column_maps(np.zeros((2, 2, 2)))  # type: ignore[arg-type]
