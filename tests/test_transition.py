"""Tests of the transition-probability (Markov-chain) facies statistics."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from geo3d.geostats.transition import (
    MarkovChain,
    bootstrap_borings,
    facies_runs,
    fit_markov_chain,
    independent_chain,
    simulate_chain,
    vertical_proportions,
)

# A three-facies chain (invented parameters): mean lengths (m) and embedded probabilities.
LENGTHS = np.array([1.5, 0.6, 1.0])
EMBEDDED = np.array([[0.0, 0.7, 0.3], [0.5, 0.0, 0.5], [0.2, 0.8, 0.0]])


def _chain() -> MarkovChain:
    return MarkovChain(np.full(3, 1 / 3), LENGTHS, EMBEDDED)


def _intervals(codes: np.ndarray, step: float, boring_id: str) -> pd.DataFrame:
    top = np.arange(codes.size) * step
    return pd.DataFrame(
        {"boring_id": boring_id, "top": top, "bottom": top + step, "facies_code": codes}
    )


def _stationary_of_embedded_times_lengths() -> np.ndarray:
    # Norris (1997) thm 3.5.5 / Carle & Fogg (1996): the stationary law of a continuous-time
    # chain is the jump chain's stationary law weighted by the mean holding times
    values, vectors = np.linalg.eig(EMBEDDED.T)
    v = np.real(vectors[:, np.argmin(np.abs(values - 1))])
    p = v / v.sum() * LENGTHS
    return p / p.sum()


def test_rates_and_transition_probabilities():
    chain = _chain()
    # r_kk = -1/L_k, r_kj = pi_kj / L_k: rows sum to zero (Carle & Fogg 1996)
    np.testing.assert_allclose(np.diag(chain.rates), -1 / LENGTHS)
    np.testing.assert_allclose(chain.rates.sum(axis=1), 0.0, atol=1e-12)
    np.testing.assert_allclose(chain.transition(0.0), np.eye(3), atol=1e-12)
    # T(h) tends to the stationary proportions in every row as h grows
    far = chain.transition(200.0)
    expected = _stationary_of_embedded_times_lengths()
    np.testing.assert_allclose(far, np.tile(expected, (3, 1)), atol=1e-9)
    np.testing.assert_allclose(chain.stationary(), expected, atol=1e-12)


def test_simulated_chain_has_the_specified_proportions_and_mean_lengths():
    step = 0.005
    codes = simulate_chain(_chain(), 6000.0, step, np.random.default_rng(4))
    proportions = np.bincount(codes, minlength=3) / codes.size
    # about 2000-6000 runs per facies: sampling error of a proportion of a few 0.01
    np.testing.assert_allclose(proportions, _stationary_of_embedded_times_lengths(), atol=0.03)
    runs = facies_runs(_intervals(codes, step, "line"))
    inner = runs[(runs["above"] >= 0) & (runs["below"] >= 0)]
    means = inner.groupby("facies_code")["thickness"].mean().to_numpy()
    # exponential lengths: relative standard error 1/sqrt(n), n > 1500 -> under 3 %
    np.testing.assert_allclose(means, LENGTHS, rtol=0.06)


def test_fit_recovers_the_chain_from_borings():
    rng = np.random.default_rng(5)
    step = 0.01
    table = pd.concat(
        [_intervals(simulate_chain(_chain(), 15.0, step, rng), step, f"B{i}") for i in range(300)]
    )
    fitted = fit_markov_chain(facies_runs(table), 3)
    # censored runs (cut by the record's ends) counted as censored: mean lengths unbiased
    np.testing.assert_allclose(fitted.mean_lengths, LENGTHS, rtol=0.08)
    np.testing.assert_allclose(fitted.embedded, EMBEDDED, atol=0.05)
    np.testing.assert_allclose(
        fitted.proportions, _stationary_of_embedded_times_lengths(), atol=0.04
    )


def test_runs_keep_contacts_and_stop_at_gaps_and_unclassified():
    table = pd.DataFrame(
        {
            "boring_id": "B",
            "top": [0.0, 0.5, 1.0, 1.5, 2.5, 3.0],
            "bottom": [0.5, 1.0, 1.5, 2.0, 3.0, 3.5],
            "facies_code": [-1, 2, 2, 0, 0, 1],
        }
    )
    runs = facies_runs(table)
    assert runs[["facies_code", "top", "bottom", "above", "below"]].values.tolist() == [
        [2, 0.5, 1.5, -1, 0],
        [0, 1.5, 2.0, 2, -1],  # a gap (2.0-2.5 m) ends the run: censored
        [0, 2.5, 3.0, -1, 1],
        [1, 3.0, 3.5, 0, -1],
    ]


def test_vertical_proportions_follow_the_layering():
    runs = pd.DataFrame(
        {
            "facies_code": [0, 2] * 10,
            "z_top": [5.0, 10.0] * 10,
            "z_bottom": [0.0, 5.0] * 10,
        }
    )
    vpc = vertical_proportions(runs, np.arange(0.0, 10.5, 1.0), 3, window=0.5, prior=0.0)
    np.testing.assert_allclose(vpc.sum(axis=1), 1.0)
    assert vpc[0].tolist() == [1.0, 0.0, 0.0]
    assert vpc[-1].tolist() == [0.0, 0.0, 1.0]


def test_independent_chain_juxtaposes_in_proportion():
    chain = independent_chain([0.2, 0.3, 0.5], [1.0, 1.0, 1.0])
    # Carle & Fogg (1997): pi_kj = p_j / (1 - p_k)
    assert chain.embedded[0].tolist() == pytest.approx([0.0, 0.3 / 0.8, 0.5 / 0.8])


def test_bootstrap_spread_shrinks_with_more_borings():
    rng = np.random.default_rng(6)
    step = 0.05

    def spread(n_borings: int) -> float:
        table = pd.concat(
            [_intervals(simulate_chain(_chain(), 8.0, step, rng), step, f"B{i}")
             for i in range(n_borings)]
        )  # fmt: skip
        draws = [
            fit_markov_chain(facies_runs(bootstrap_borings(table, rng)), 3).proportions[0]
            for _ in range(40)
        ]
        return float(np.std(draws))

    few, many = spread(5), spread(45)
    # bootstrap standard errors scale as 1/sqrt(n): 45 borings give about 1/3 of 5 borings'
    # (Efron & Tibshirani 1993); allow sampling noise of the 40 draws
    assert many < 0.6 * few
