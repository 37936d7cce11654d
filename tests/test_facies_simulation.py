"""Tests of the sequential indicator simulation of facies."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from geo3d.geostats.facies_simulation import (
    FaciesModel,
    fit_facies_model,
    lateral_lengths,
    simulate_facies,
)

CELL = (2.0, 2.0, 0.25)


def _grid(nx: int = 12, ny: int = 12, nz: int = 24) -> np.ndarray:
    x = (np.arange(nx) + 0.5) * CELL[0]
    y = (np.arange(ny) + 0.5) * CELL[1]
    z = (np.arange(nz) + 0.5) * CELL[2]
    zz, yy, xx = np.meshgrid(z, y, x, indexing="ij")
    return np.column_stack([xx.ravel(), yy.ravel(), zz.ravel()])


MODEL = FaciesModel(
    np.array([0.3, 0.2, 0.5]), np.array([8.0, 5.0, 12.0]), np.array([0.5, 0.3, 0.8])
)


def test_cells_holding_data_take_the_data_facies_in_every_realization():
    targets = _grid()
    rng = np.random.default_rng(0)
    data = np.column_stack([np.full(24, 5.1), np.full(24, 9.2), (np.arange(24) + 0.4) * 0.25])
    codes = rng.integers(0, 3, 24)
    sims = simulate_facies(
        targets, data, codes, model=MODEL, n_realizations=3, seed=2, cell_size=CELL
    )
    # the cell containing each datum (x 4-6, y 8-10, its 0.25 m slice)
    cell = (np.floor(data[:, 2] / 0.25) * 144 + 4 * 12 + 2).astype(int)
    assert (sims[:, cell] == codes[None, :]).all()


def test_unconditional_proportions_match_the_model():
    sims = simulate_facies(
        _grid(), np.empty((0, 3)), np.empty(0), model=MODEL, n_realizations=4, seed=3,
        cell_size=CELL,
    )  # fmt: skip
    shares = np.bincount(sims.ravel(), minlength=3) / sims.size
    # sisim reproduces the target proportions up to ergodic fluctuations (Deutsch & Journel
    # 1998, sec. V.1.5); 4 realizations of a 12 x 12 x 24 grid with these lengths: a few 0.01
    np.testing.assert_allclose(shares, MODEL.proportions, atol=0.06)


def test_vertical_proportion_curve_is_followed():
    edges = np.array([0.0, 3.0, 6.0])
    vpc = np.array([[1.0, 0.0, 0.0], [0.0, 0.0, 1.0]])
    model = FaciesModel(MODEL.proportions, MODEL.length_h, MODEL.length_v, edges, vpc)
    targets = _grid()
    sims = simulate_facies(
        targets, np.empty((0, 3)), np.empty(0), model=model, n_realizations=2, seed=4,
        cell_size=CELL,
    )  # fmt: skip
    # a slice with a single facies has that facies' indicator at its mean: kriging adds nothing
    assert (sims[:, targets[:, 2] < 3.0] == 0).all()
    assert (sims[:, targets[:, 2] > 3.0] == 2).all()


def test_each_realization_can_have_its_own_model():
    seen = []

    def model(r: int) -> FaciesModel:
        seen.append(r)
        only = np.zeros(3)
        only[r] = 1.0
        return FaciesModel(only, MODEL.length_h, MODEL.length_v)

    sims = simulate_facies(
        _grid(4, 4, 4), np.empty((0, 3)), np.empty(0), model=model, n_realizations=3, seed=5,
        cell_size=CELL,
    )  # fmt: skip
    assert seen == [0, 1, 2]
    assert [set(s.tolist()) for s in sims] == [{0}, {1}, {2}]


def _layered_intervals(n_borings: int, spacing: float) -> pd.DataFrame:
    # facies 2 above 5 m elevation, facies 0 below, in every boring (ground at 10 m)
    rows = []
    for b in range(n_borings):
        for i in range(40):
            top = i * 0.25
            z_mid = 10.0 - top - 0.125
            rows.append({"boring_id": f"B{b}", "x": b * spacing, "y": 0.0, "top": top,
                         "bottom": top + 0.25, "z_mid": z_mid,
                         "facies_code": 2 if z_mid > 5.0 else 0})  # fmt: skip
    return pd.DataFrame(rows)


def test_fit_gives_markov_chain_lengths_and_layered_proportions():
    intervals = _layered_intervals(6, 10.0)
    fitted = fit_facies_model(intervals, 3, z_edges=np.arange(0.0, 10.5, 0.5), vpc_window=0.25)
    assert fitted.proportions.tolist() == pytest.approx([0.5, 0.0, 0.5])
    # each boring: one 5 m run of facies 2 ending on a contact, one 5 m run of facies 0 cut by
    # the end of the record: L_2 = 30 m / 6 contacts = 5 m, L_0 = 30 m / 0 contacts -> total;
    # lv = L (1 - p) (Carle & Fogg 1996)
    assert fitted.length_v[2] == pytest.approx(5.0 * 0.5)
    # lowest slice: 6 borings x 0.5 m of facies 0, shrunk by 0.5 m of the global proportions
    # (0.5, 0, 0.5): (3 + 0.25) / 3.5 = 13/14 (the curve's definition)
    assert fitted.vpc[0].tolist() == pytest.approx([13 / 14, 0.0, 1 / 14])
    assert fitted.vpc[-1].tolist() == pytest.approx([1 / 14, 0.0, 13 / 14])


def test_lateral_length_is_long_for_continuous_layers():
    intervals = _layered_intervals(8, 10.0)
    lengths = lateral_lengths(intervals, np.array([0.5, 0.0, 0.5]))
    # identical layering in every boring: no lateral change up to 70 m, so the fitted length
    # runs to the upper bound of the search
    assert lengths[0] > 100.0
    assert np.isnan(lengths[1])
