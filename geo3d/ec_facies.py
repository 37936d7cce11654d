"""Hydrofacies from EC where K is not measured (above the water table).

Injection above the water table does not give K, but the EC log runs through it.  An EC-facies
relation is learned where both are known (below the water table): a multinomial logistic
regression of the facies on log10 EC, which gives each unsaturated interval a probability of
each facies rather than a single class.  Facies so obtained are marked "from EC" wherever they
are used.  EC of unsaturated ground is lower than that of the same ground saturated (less pore
water), most in coarse soil, so the probabilities there lean towards the coarser classes; the
report says so.

References
----------
.. [1] Hastie, T., Tibshirani, R., Friedman, J. (2009) The Elements of Statistical Learning,
   2nd ed. Springer, sec. 4.4 (multinomial logistic regression).
.. [2] Archie, G.E. (1942) The electrical resistivity log as an aid in determining some
   reservoir characteristics. Trans. AIME 146: 54-62 (bulk EC falls with saturation).
"""

from __future__ import annotations

import numpy as np
from sklearn.linear_model import LogisticRegression

from geo3d.errors import ModelError

__all__ = ["EcFaciesClassifier"]


class EcFaciesClassifier:
    """Facies probabilities from bulk EC.

    Parameters
    ----------
    n_classes
        Number of facies (codes ``0 .. n_classes-1``).

    Attributes
    ----------
    classes_ : numpy.ndarray
        Facies codes seen in training.
    prior_ : numpy.ndarray
        Share of each facies in training (used where EC is missing).
    """

    def __init__(self, n_classes: int) -> None:
        self.n_classes = n_classes

    def fit(self, ec: np.ndarray, codes: np.ndarray) -> EcFaciesClassifier:
        """Learn from EC (mS/m, > 0) and facies codes (>= 0) of the same intervals."""
        ec = np.asarray(ec, float)
        codes = np.asarray(codes, int)
        ok = np.isfinite(ec) & (ec > 0) & (codes >= 0)
        if ok.sum() < 10:
            msg = "EC facies: need at least 10 intervals with EC and facies to learn from"
            raise ModelError(msg)
        self.prior_ = np.bincount(codes[ok], minlength=self.n_classes)[: self.n_classes]
        self.prior_ = self.prior_ / self.prior_.sum()
        self.classes_ = np.unique(codes[ok])
        self._model = None
        if self.classes_.size > 1:
            self._model = LogisticRegression(C=10.0, max_iter=1000)
            self._model.fit(np.log10(ec[ok])[:, None], codes[ok])
        return self

    def predict_proba(self, ec: np.ndarray) -> np.ndarray:
        """Facies probabilities ``(n, n_classes)``; the training shares where EC is missing."""
        ec = np.asarray(ec, float)
        out = np.tile(self.prior_, (ec.size, 1))
        ok = np.isfinite(ec) & (ec > 0)
        if self._model is None:
            out[ok] = 0.0
            out[ok, self.classes_[0]] = 1.0
        elif ok.any():
            out[np.ix_(ok, self._model.classes_)] = self._model.predict_proba(
                np.log10(ec[ok])[:, None]
            )
            missing = np.setdiff1d(np.arange(self.n_classes), self._model.classes_)
            out[np.ix_(ok, missing)] = 0.0
        return out
