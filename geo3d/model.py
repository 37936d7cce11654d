"""The site-wide voxel model: kriged log10 K and EC, hydrofacies probabilities, simulations.

Coordinates are ``(x, y, z)`` in the site CRS, ``z`` the elevation, upward.  The model is a
``VoxelModel``: an :class:`xarray.Dataset` on a grid from :func:`geo3d.grid.make_grid` with the
variables listed in the contributor guide (``mask``, ``log10_k``, ``log10_k_var``, ``ec``,
``ec_var``, ``k``, ``facies_code``, ``prob_<facies>``, ``saturated`` and, when simulations are
run, ``realizations``).  The facies classes are recorded in the attributes ``facies_names``,
``facies_log10_k_max``, ``facies_porosity`` and ``facies_effective_porosity`` (in code order,
lowest K first) so that the analysis functions can work from the Dataset alone.
"""

from __future__ import annotations

import logging
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
from scipy.special import ndtr

from geo3d.errors import ModelError

__all__ = [
    "FaciesTable",
    "facies_table",
    "classify_log10_k",
    "facies_probabilities",
    "ModelResult",
    "build_voxel_model",
]

logger = logging.getLogger(__name__)


@dataclass(frozen=True)
class FaciesTable:
    """Hydrofacies classes in code order (lowest K first), as plain arrays.

    Attributes
    ----------
    names
        Class names; the code of a class is its index.
    log10_k_max
        Upper bound of log10 K (m/s) of each class; the last one is ``+inf``.
    porosity, effective_porosity
        Total and effective porosity of each class (fractions).
    """

    names: tuple[str, ...]
    log10_k_max: np.ndarray
    porosity: np.ndarray
    effective_porosity: np.ndarray

    @property
    def log10_k_min(self) -> np.ndarray:
        """Lower bound of log10 K of each class (the first one is ``-inf``)."""
        return np.concatenate([[-np.inf], self.log10_k_max[:-1]])

    def code_of(self, name: str, *, default: int) -> int:
        """Code of the class called ``name``, or ``default`` when there is none."""
        return self.names.index(name) if name in self.names else default

    @property
    def transmissive(self) -> int:
        """Code of the transmissive class (named so, or the highest-K class)."""
        return self.code_of("transmissive", default=len(self.names) - 1)

    @property
    def storage(self) -> int:
        """Code of the storage class (named so, or the lowest-K class)."""
        return self.code_of("storage", default=0)

    def attrs(self) -> dict[str, Any]:
        """Return the table as Dataset attributes."""
        return {
            "facies_names": list(self.names),
            "facies_log10_k_max": [float(v) for v in self.log10_k_max],
            "facies_porosity": [float(v) for v in self.porosity],
            "facies_effective_porosity": [float(v) for v in self.effective_porosity],
        }


def facies_table(classes: Sequence[Any] | None = None, *, model: Any = None) -> FaciesTable:
    """Collect the facies classes from objects or from a model's attributes.

    Parameters
    ----------
    classes
        Objects with ``name``, ``log10_k_max``, ``porosity`` and ``effective_porosity``
        (such as ``geo3d.facies.FaciesClass``), in any order; sorted by ``log10_k_max``.
    model
        A VoxelModel (or a result with ``.dataset``) whose attributes hold the table; used when
        ``classes`` is None.

    Returns
    -------
    FaciesTable
    """
    if classes is None:
        ds = getattr(model, "dataset", model)
        attrs = getattr(ds, "attrs", {})
        if "facies_names" not in attrs:
            msg = "facies: no classes given and the model has no 'facies_names' attribute"
            raise ModelError(msg)
        names = [str(n) for n in np.ravel(attrs["facies_names"])]
        kmax = np.asarray(np.ravel(attrs["facies_log10_k_max"]), float)
        por = np.asarray(np.ravel(attrs["facies_porosity"]), float)
        eff = np.asarray(np.ravel(attrs["facies_effective_porosity"]), float)
    else:
        items = list(classes)
        if not items:
            msg = "facies: at least one class is needed"
            raise ModelError(msg)
        for i, item in enumerate(items):
            for attr in ("name", "log10_k_max", "porosity", "effective_porosity"):
                if not hasattr(item, attr):
                    msg = f"facies: class {i} lacks attribute '{attr}'"
                    raise ModelError(msg)
        order = np.argsort([float(c.log10_k_max) for c in items], kind="stable")
        items = [items[i] for i in order]
        names = [str(c.name) for c in items]
        kmax = np.array([float(c.log10_k_max) for c in items])
        por = np.array([float(c.porosity) for c in items])
        eff = np.array([float(c.effective_porosity) for c in items])
    if len(set(names)) != len(names):
        msg = f"facies: class names must be unique, got {names}"
        raise ModelError(msg)
    bad = [n for n, p, e in zip(names, por, eff, strict=True) if not (0 <= e <= p <= 1)]
    if bad:
        msg = f"facies: classes {bad} need 0 <= effective_porosity <= porosity <= 1"
        raise ModelError(msg)
    kmax = kmax.copy()
    kmax[-1] = np.inf
    return FaciesTable(tuple(names), kmax, por, eff)


def classify_log10_k(log10_k: np.ndarray, table: FaciesTable) -> np.ndarray:
    """Facies code of each log10 K value (``-1`` for NaN).

    A value equal to a class's ``log10_k_max`` belongs to the next class up.

    Examples
    --------
    >>> t = FaciesTable(("a", "b"), np.array([-6.0, np.inf]), np.ones(2), np.ones(2))
    >>> classify_log10_k(np.array([-7.0, -6.0, np.nan]), t).tolist()
    [0, 1, -1]
    """
    values = np.asarray(log10_k, float)
    codes = np.searchsorted(table.log10_k_max[:-1], values, side="right").astype(np.int8)
    codes[~np.isfinite(values)] = -1
    return codes


def facies_probabilities(mean: np.ndarray, variance: np.ndarray, table: FaciesTable) -> np.ndarray:
    """Probability of each facies from a Gaussian estimate of log10 K.

    ``P(class i) = Phi((upper_i - mu) / sigma) - Phi((lower_i - mu) / sigma)`` with ``mu`` the
    kriging estimate and ``sigma**2`` the kriging variance; a zero variance gives the indicator
    of the estimate's class.

    Parameters
    ----------
    mean, variance
        Kriging estimate and variance of log10 K, same shape.
    table
        Facies classes.

    Returns
    -------
    numpy.ndarray
        Shape ``(n_classes,) + mean.shape``; NaN where the estimate is NaN.

    References
    ----------
    .. [1] Journel, A.G., Huijbregts, C.J. (1978) Mining Geostatistics. Academic Press: the
       kriging estimate and variance as mean and variance of a Gaussian conditional law.
    """
    mu = np.asarray(mean, float)
    sigma = np.sqrt(np.clip(np.asarray(variance, float), 0.0, None))
    upper = table.log10_k_max.reshape((-1,) + (1,) * mu.ndim)
    lower = table.log10_k_min.reshape((-1,) + (1,) * mu.ndim)
    with np.errstate(divide="ignore", invalid="ignore"):
        zu = np.where(sigma > 0, (upper - mu) / sigma, np.where(mu < upper, np.inf, -np.inf))
        zl = np.where(sigma > 0, (lower - mu) / sigma, np.where(mu < lower, np.inf, -np.inf))
    prob = ndtr(zu) - ndtr(zl)
    prob[:, ~np.isfinite(mu)] = np.nan
    return np.clip(prob, 0.0, 1.0)
