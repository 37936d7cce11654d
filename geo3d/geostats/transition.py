"""Transition-probability (Markov-chain) description of hydrofacies along borings.

The facies sequence along a boring is read as a continuous-time Markov chain in depth
(Carle & Fogg 1996, 1997).  Its parameters come from the facies runs of the borings, with
their contacts kept:

* proportions ``p_k``: the share of logged thickness in each facies;
* mean lengths ``L_k``: the mean thickness of a run of facies ``k``, estimated with the runs
  cut by the end of a record counted as censored (exponential run lengths: total thickness over
  the number of observed contacts);
* embedded transition probabilities ``pi_kj``: the share of the contacts below a run of ``k``
  that open on ``j`` (downward);
* the rate matrix ``R``: ``r_kk = -1 / L_k``, ``r_kj = pi_kj / L_k``, and the transition
  probabilities ``T(h) = expm(R h)``.

Vertical proportion curves give the proportions as a function of elevation where they change
with depth.  :func:`bootstrap_borings` resamples borings with replacement so that each
realization can draw its own parameters.

References
----------
.. [1] Carle, S.F., Fogg, G.E. (1996) Transition probability-based indicator geostatistics.
   Mathematical Geology 28(4): 453-476 (continuous-lag Markov chain, T(h) = expm(R h), mean
   lengths and embedded transition probabilities, r_kk = -1/L_k).
.. [2] Carle, S.F., Fogg, G.E. (1997) Modeling spatial variability with one and
   multidimensional continuous-lag Markov chains. Mathematical Geology 29(7): 891-918.
.. [3] Norris, J.R. (1997) Markov Chains. Cambridge University Press, ch. 2 (continuous-time
   chains: exponential holding times of mean -1/q_kk, jumps by the embedded chain).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd
from scipy.linalg import expm, null_space

from geo3d.errors import ModelError

__all__ = [
    "facies_runs",
    "MarkovChain",
    "fit_markov_chain",
    "simulate_chain",
    "vertical_proportions",
    "bootstrap_borings",
    "independent_chain",
]

#: Gap between consecutive intervals (m) still read as contiguous.
_CONTIGUOUS = 1e-6


def facies_runs(intervals: pd.DataFrame) -> pd.DataFrame:
    """Cut each boring's facies column into runs of one facies, keeping the contacts.

    Parameters
    ----------
    intervals
        ``boring_id``, ``top``, ``bottom`` (depths, m), ``facies_code`` (-1 = unclassified)
        and optionally ``x``, ``y``, ``z_mid``.

    Returns
    -------
    pandas.DataFrame
        One row per run: ``boring_id``, ``facies_code``, ``top``, ``bottom``, ``thickness``,
        ``above`` and ``below`` (code of the run across the upper and lower contact, -1 where
        the run is cut by the end of the record, a gap or unclassified ground), and ``x``,
        ``y``, ``z_top``, ``z_bottom`` when the input has ``x``, ``y``, ``z_mid``.
    """
    missing = {"boring_id", "top", "bottom", "facies_code"} - set(intervals.columns)
    if missing:
        msg = f"facies runs: intervals lack column(s) {sorted(missing)}"
        raise ModelError(msg)
    table = intervals.sort_values(["boring_id", "top"], kind="stable")
    ids = table["boring_id"].to_numpy()
    codes = table["facies_code"].to_numpy(int)
    top = table["top"].to_numpy(float)
    bottom = table["bottom"].to_numpy(float)
    n = codes.size
    new_boring = np.r_[True, ids[1:] != ids[:-1]]
    gap = new_boring | np.r_[True, np.abs(top[1:] - bottom[:-1]) > _CONTIGUOUS]
    first = np.flatnonzero(gap | np.r_[True, codes[1:] != codes[:-1]])
    last = np.r_[first[1:] - 1, n - 1]
    keep = codes[first] >= 0
    first, last = first[keep], last[keep]
    after = np.minimum(last + 1, n - 1)
    out = pd.DataFrame(
        {
            "boring_id": ids[first],
            "facies_code": codes[first],
            "top": top[first],
            "bottom": bottom[last],
            "thickness": bottom[last] - top[first],
            "above": np.where(~gap[first], codes[np.maximum(first - 1, 0)], -1),
            "below": np.where((last + 1 < n) & ~gap[after], codes[after], -1),
        }
    )
    if {"x", "y", "z_mid"} <= set(table.columns):
        ground = table["z_mid"].to_numpy(float) + 0.5 * (top + bottom)
        out["x"] = table["x"].to_numpy(float)[first]
        out["y"] = table["y"].to_numpy(float)[first]
        out["z_top"] = ground[first] - top[first]
        out["z_bottom"] = ground[first] - bottom[last]
    return out


@dataclass(frozen=True)
class MarkovChain:
    """A continuous-lag Markov chain of facies along one direction.

    Attributes
    ----------
    proportions
        ``p_k`` (sum 1).
    mean_lengths
        ``L_k`` (m).
    embedded
        Embedded transition probabilities ``pi_kj`` (zero diagonal, rows sum to 1 where a
        facies has contacts).
    """

    proportions: np.ndarray
    mean_lengths: np.ndarray
    embedded: np.ndarray

    @property
    def rates(self) -> np.ndarray:
        """Transition-rate matrix ``R`` (``r_kk = -1/L_k``, ``r_kj = pi_kj / L_k``)."""
        rates = self.embedded / self.mean_lengths[:, None]
        np.fill_diagonal(rates, -1.0 / self.mean_lengths)
        return rates

    def transition(self, lag: float) -> np.ndarray:
        """Transition probabilities ``T(h) = expm(R h)`` at lag ``h`` (m)."""
        return expm(self.rates * float(lag))

    def stationary(self) -> np.ndarray:
        """Stationary proportions of the chain (the left null vector of ``R``)."""
        vec = null_space(self.rates.T)[:, 0]
        return vec / vec.sum()


def fit_markov_chain(runs: pd.DataFrame, n_classes: int) -> MarkovChain:
    """Estimate proportions, mean lengths and embedded transitions from facies runs.

    Parameters
    ----------
    runs
        :func:`facies_runs` output.
    n_classes
        Number of facies (codes ``0 .. n_classes-1``).

    Returns
    -------
    MarkovChain
        A facies with no run gets proportion 0, mean length equal to the mean of the others and
        independent juxtapositions; a facies whose runs never end at an observed contact gets
        its total thickness as mean length (one censored run).

    References
    ----------
    .. [1] Carle & Fogg (1996): mean lengths and embedded transition probabilities from
       boreholes.
    .. [2] Cox, D.R., Oakes, D. (1984) Analysis of Survival Data. Chapman & Hall, sec. 3.1:
       maximum-likelihood mean of censored exponential lengths, total length over events.
    """
    if runs.empty:
        msg = "Markov chain: no facies run to estimate it from"
        raise ModelError(msg)
    codes = runs["facies_code"].to_numpy(int)
    thick = runs["thickness"].to_numpy(float)
    below = runs["below"].to_numpy(int)
    total = np.bincount(codes, weights=thick, minlength=n_classes)[:n_classes]
    proportions = total / total.sum()
    ended = below >= 0
    events = np.bincount(codes[ended], minlength=n_classes)[:n_classes].astype(float)
    lengths = np.where(events > 0, total / np.maximum(events, 1), total)
    present = total > 0
    lengths = np.where(present, lengths, lengths[present].mean())
    counts = np.zeros((n_classes, n_classes))
    np.add.at(counts, (codes[ended], below[ended]), 1.0)
    np.fill_diagonal(counts, 0.0)
    embedded = np.zeros((n_classes, n_classes))
    for k in range(n_classes):
        if counts[k].sum() > 0:
            embedded[k] = counts[k] / counts[k].sum()
        else:
            others = np.where(np.arange(n_classes) != k, np.maximum(proportions, 1e-9), 0.0)
            embedded[k] = others / others.sum() if others.sum() > 0 else 0.0
    return MarkovChain(proportions, lengths, embedded)


def simulate_chain(
    chain: MarkovChain, length: float, step: float, rng: np.random.Generator
) -> np.ndarray:
    """Simulate the chain on a regular line (codes at ``step`` spacing over ``length``).

    The first state is drawn from the stationary proportions; each run lasts an exponential
    length of mean ``L_k`` and is followed by a state drawn from ``pi_k.``.

    References
    ----------
    .. [1] Norris (1997), sec. 2.6 (jump-chain / holding-time construction).
    """
    n = int(np.ceil(length / step))
    out = np.empty(n, dtype=np.int8)
    stationary = np.clip(chain.stationary(), 0.0, None)
    state = int(rng.choice(len(stationary), p=stationary / stationary.sum()))
    position = 0.0
    index = 0
    while index < n:
        end = position + rng.exponential(chain.mean_lengths[state])
        stop = min(n, int(np.ceil(end / step - 0.5)))
        out[index:stop] = state
        index, position = max(stop, index), end
        state = int(rng.choice(len(stationary), p=chain.embedded[state]))
    return out


def vertical_proportions(
    runs: pd.DataFrame,
    z_edges: np.ndarray,
    n_classes: int,
    *,
    window: float = 1.0,
    prior: float = 0.5,
) -> np.ndarray:
    """Vertical proportion curve: facies proportions per elevation slice.

    The logged thickness of each facies within ``window`` metres of each slice's centre is
    counted and shrunk towards the site-wide proportions with ``prior`` metres of weight, so
    slices with little data fall back on the global proportions.

    Parameters
    ----------
    runs
        :func:`facies_runs` output with ``z_top`` and ``z_bottom``.
    z_edges
        Increasing slice edges (m, elevation), ``n_slices + 1`` values.
    n_classes
        Number of facies.
    window
        Half-width (m) of the smoothing window.
    prior
        Weight (m of logged thickness) of the global proportions.

    Returns
    -------
    numpy.ndarray
        ``(n_slices, n_classes)``, rows sum to 1.

    References
    ----------
    .. [1] Deutsch, C.V. (2002) Geostatistical Reservoir Modeling. Oxford University Press,
       sec. 5.2 (vertical proportion curves as locally varying means of facies indicators).
    """
    edges = np.asarray(z_edges, float)
    centres = 0.5 * (edges[1:] + edges[:-1])
    lo = np.minimum(runs["z_top"], runs["z_bottom"]).to_numpy(float)
    hi = np.maximum(runs["z_top"], runs["z_bottom"]).to_numpy(float)
    codes = runs["facies_code"].to_numpy(int)
    overall = np.bincount(codes, weights=hi - lo, minlength=n_classes)[:n_classes]
    overall = overall / overall.sum()
    out = np.empty((centres.size, n_classes))
    for s, c in enumerate(centres):
        covered = np.clip(np.minimum(hi, c + window) - np.maximum(lo, c - window), 0.0, None)
        counts = np.bincount(codes, weights=covered, minlength=n_classes)[:n_classes]
        out[s] = (counts + prior * overall) / (counts.sum() + prior)
    return out


def bootstrap_borings(
    table: pd.DataFrame, rng: np.random.Generator, *, column: str = "boring_id"
) -> pd.DataFrame:
    """Resample whole borings with replacement (a copy drawn twice gets a new id).

    References
    ----------
    .. [1] Efron, B., Tibshirani, R.J. (1993) An Introduction to the Bootstrap. Chapman & Hall,
       ch. 6 (resampling independent units; here borings, since samples within a boring are
       correlated).
    """
    groups = table.groupby(column, sort=True).indices
    ids = list(groups)
    drawn = rng.integers(0, len(ids), len(ids))
    rows = np.concatenate([groups[ids[d]] for d in drawn])
    labels = np.concatenate(
        [
            np.full(groups[ids[d]].size, f"{ids[d]}#{copy}", dtype=object)
            for copy, d in enumerate(drawn)
        ]
    )
    out = table.iloc[rows].reset_index(drop=True)
    out[column] = labels
    return out


def independent_chain(proportions: Sequence[float], mean_lengths: Sequence[float]) -> MarkovChain:
    """Build a chain whose juxtapositions follow the facies proportions (maximum entropy).

    ``pi_kj = p_j / (1 - p_k)`` (Carle & Fogg 1997, the "independent" or maximum-entropy
    juxtaposition), typical of lateral directions, which borings do not sample.
    """
    p = np.asarray(proportions, float)
    lengths = np.asarray(mean_lengths, float)
    embedded = np.tile(p, (p.size, 1))
    np.fill_diagonal(embedded, 0.0)
    sums = embedded.sum(axis=1, keepdims=True)
    embedded = np.divide(embedded, sums, out=np.zeros_like(embedded), where=sums > 0)
    return MarkovChain(p, lengths, embedded)
