"""Leave-one-boring-out cross-validation of the facies model.

For each boring, the indicator model (:func:`geo3d.geostats.facies_simulation.fit_facies_model`)
is fitted to the other borings, and the probability of each facies at the held-out boring's
intervals is the simple indicator kriging of the other borings' intervals, corrected for order
relations, as in one step of the sequential indicator simulation.  The scores say how well the
model predicts a boring it has not seen:

* the confusion matrix of the observed facies against the most probable one;
* the Brier score ``BS = mean_i sum_k (p_ik - o_ik)^2`` (Brier 1950), with ``o_ik = 1`` for the
  observed facies, and the Brier skill score ``1 - BS / BS_ref`` against the site proportions
  alone (``BS_ref``; Wilks 2011): 1 is a perfect prediction, 0 no better than the proportions.

References
----------
.. [1] Brier, G.W. (1950) Verification of forecasts expressed in terms of probability. Monthly
   Weather Review 78(1): 1-3.
.. [2] Wilks, D.S. (2011) Statistical Methods in the Atmospheric Sciences, 3rd ed. Academic
   Press, sec. 8.4.2 (Brier score and skill score).
.. [3] Deutsch, C.V., Journel, A.G. (1998) GSLIB, 2nd ed., sec. VI.2.3 (cross-validation).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd
from scipy.spatial import cKDTree

from geo3d.errors import ModelError
from geo3d.geostats.facies_simulation import facies_probabilities, fit_facies_model

__all__ = ["FaciesCrossValidation", "facies_cross_validation"]


@dataclass(frozen=True)
class FaciesCrossValidation:
    """Leave-one-boring-out facies predictions and their scores.

    Attributes
    ----------
    names
        Facies names in code order.
    predictions
        One row per held-out interval: ``boring_id, z_mid, observed`` (code) and ``p_<name>``.
    """

    names: tuple[str, ...]
    predictions: pd.DataFrame

    @property
    def probabilities(self) -> np.ndarray:
        """``(n, n_classes)`` predicted probabilities."""
        return self.predictions[[f"p_{n}" for n in self.names]].to_numpy(float)

    @property
    def observed(self) -> np.ndarray:
        """Observed facies codes."""
        return self.predictions["observed"].to_numpy(int)

    def confusion(self) -> pd.DataFrame:
        """Count observed (rows) against most probable (columns) facies."""
        n = len(self.names)
        predicted = np.argmax(self.probabilities, axis=1) if len(self.predictions) else []
        table = np.zeros((n, n), dtype=int)
        np.add.at(table, (self.observed, predicted), 1)
        labels = list(self.names)
        return pd.DataFrame(table, index=pd.Index(labels, name="observed"),
                            columns=pd.Index(labels, name="predicted"))  # fmt: skip

    def brier(self) -> float:
        """Brier score (0 = perfect, 2 = certain and always wrong)."""
        onehot = np.eye(len(self.names))[self.observed]
        return float(np.mean(np.sum((self.probabilities - onehot) ** 2, axis=1)))

    def brier_reference(self) -> float:
        """Brier score of the site proportions (of the observed facies) used as the forecast."""
        onehot = np.eye(len(self.names))[self.observed]
        share = onehot.mean(axis=0)
        return float(np.mean(np.sum((share[None, :] - onehot) ** 2, axis=1)))

    def brier_skill(self) -> float:
        """Brier skill score ``1 - BS / BS_ref`` (NaN when the reference is 0)."""
        reference = self.brier_reference()
        return float(1.0 - self.brier() / reference) if reference > 0 else float("nan")

    def accuracy(self) -> float:
        """Share of intervals whose most probable facies is the observed one."""
        table = self.confusion().to_numpy()
        return float(np.trace(table) / table.sum()) if table.sum() else float("nan")


def facies_cross_validation(
    intervals: pd.DataFrame,
    names: tuple[str, ...] | list[str],
    *,
    z_edges: np.ndarray | None = None,
    neighbors: int = 12,
) -> FaciesCrossValidation:
    """Predict every boring's facies from the other borings (leave one boring out).

    Parameters
    ----------
    intervals
        ``boring_id, x, y, z_mid, top, bottom, facies_code`` (codes ``< 0`` are left out).
    names
        Facies names in code order.
    z_edges
        Slice edges of the vertical proportion curve (None = site-wide proportions).
    neighbors
        Conditioning intervals per prediction.

    Returns
    -------
    FaciesCrossValidation

    Examples
    --------
    Two facies in two layers, four borings: each held-out boring is predicted from the others.

    >>> rows = [dict(boring_id=b, x=x, y=0.0, z_mid=z, top=9.5 - z, bottom=10.5 - z,
    ...              facies_code=int(z < 5)) for b, x in zip("ABCD", (0, 5, 10, 15))
    ...         for z in np.arange(0.5, 10, 1.0)]
    >>> cv = facies_cross_validation(pd.DataFrame(rows), ["clay", "sand"])
    >>> cv.accuracy()
    1.0
    """
    table = intervals[intervals["facies_code"].to_numpy(int) >= 0].copy()
    table["boring_id"] = table["boring_id"].astype(str)
    borings = table["boring_id"].unique()
    if borings.size < 3:
        msg = f"facies cross-validation: needs at least 3 borings, got {borings.size}"
        raise ModelError(msg)
    n_classes = len(names)
    parts = []
    for boring in borings:
        held = table["boring_id"].to_numpy() == boring
        train = table[~held]
        model = fit_facies_model(train, n_classes, z_edges=z_edges)
        known_xyz = train[["x", "y", "z_mid"]].to_numpy(float)
        known_codes = train["facies_code"].to_numpy(int)
        targets = table.loc[held, ["x", "y", "z_mid"]].to_numpy(float)
        scale = np.array([1.0, 1.0, np.mean(model.length_h) / np.mean(model.length_v)])
        k = min(int(neighbors), known_codes.size)
        _, nb = cKDTree(known_xyz * scale).query(targets * scale, k=k)
        prob = facies_probabilities(model, targets, known_xyz, known_codes, nb.reshape(-1, k))
        part = table.loc[held, ["boring_id", "z_mid"]].copy()
        part["observed"] = table.loc[held, "facies_code"].to_numpy(int)
        for j, name in enumerate(names):
            part[f"p_{name}"] = prob[:, j]
        parts.append(part)
    return FaciesCrossValidation(tuple(names), pd.concat(parts, ignore_index=True))
