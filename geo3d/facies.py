"""Hydrofacies: classes of similar hydraulic behaviour from log10 K (and EC).

Two ways to classify composited intervals:

* thresholds on log10 K (defaults: storage < 1e-7 m/s <= transitional < 1e-5 m/s <=
  transmissive; common practice), optionally with EC cut-offs that move an interval into a
  lower-K class when its EC says it is finer than its K alone suggests;
* a Gaussian mixture on standardized ``(log10 K, log10 EC)``, the number of components chosen
  by the Bayesian information criterion, components named (and merged) by the threshold class
  of their mean log10 K.

Codes are integers from 0 (lowest-K class) up; -1 means unclassified (no log10 K).  A minimum
layer thickness merges runs thinner than it into their neighbours.

References
----------
.. [1] Freeze, R.A., Cherry, J.A. (1979) Groundwater, Table 2.2 (K ranges) and Table 2.4
   (porosity).
.. [2] Dempster, A.P., Laird, N.M., Rubin, D.B. (1977) Maximum likelihood from incomplete
   data via the EM algorithm. J. R. Stat. Soc. B 39: 1-38.
.. [3] Schwarz, G. (1978) Estimating the dimension of a model. Ann. Stat. 6: 461-464 (BIC).
"""

from __future__ import annotations

import logging
from collections.abc import Iterable, Iterator, Mapping, Sequence
from dataclasses import dataclass
from typing import Any, overload

import numpy as np
from numpy.typing import ArrayLike
from scipy.stats import norm
from sklearn.mixture import GaussianMixture
from threadpoolctl import threadpool_limits

from geo3d.errors import ModelError

__all__ = [
    "FaciesClass",
    "FaciesClasses",
    "DEFAULT_CLASSES",
    "classify_thresholds",
    "classify_mixture",
    "apply_min_thickness",
]

logger = logging.getLogger(__name__)


@dataclass(frozen=True)
class FaciesClass:
    """One hydrofacies class.

    Attributes
    ----------
    name
        Class name, e.g. ``"transmissive"``.
    log10_k_max
        Upper bound of log10 K (m/s) of the class (exclusive); ignored for the last class.
    porosity
        Total porosity, 0..1.
    effective_porosity
        Effective (drainable, flowing) porosity, 0..1.
    """

    name: str
    log10_k_max: float
    porosity: float
    effective_porosity: float


# --- FaciesClasses: the one facies-class type (owned with the model) -------------------------


_ATTR_NAMES = (
    "facies_names",
    "facies_log10_k_max",
    "facies_porosity",
    "facies_effective_porosity",
)


@dataclass(frozen=True)
class FaciesClasses(Sequence[FaciesClass]):
    """The hydrofacies classes of a site, in code order (lowest K first).

    The code of a class is its index.  The classes are checked on creation: unique names,
    ``log10_k_max`` increasing from the first class up (the bound of the last class is not
    used), and ``0 <= effective_porosity <= porosity <= 1``.

    Attributes
    ----------
    classes
        The classes, lowest K first.

    Raises
    ------
    ModelError
        When a check fails.

    Examples
    --------
    >>> fc = FaciesClasses((FaciesClass("clay", -7.0, 0.45, 0.05),
    ...                     FaciesClass("sand", 0.0, 0.32, 0.25)))
    >>> fc.names, fc.storage, fc.transmissive
    (('clay', 'sand'), 0, 1)
    >>> fc.classify([-8.0, -7.0, float("nan")]).tolist()
    [0, 1, -1]
    """

    classes: tuple[FaciesClass, ...]

    def __post_init__(self) -> None:
        object.__setattr__(self, "classes", tuple(self.classes))
        names = [c.name for c in self.classes]
        if not names:
            msg = "facies: at least one class is needed"
            raise ModelError(msg)
        if len(set(names)) != len(names):
            msg = f"facies: class names must be unique, got {names}"
            raise ModelError(msg)
        bounds = [float(c.log10_k_max) for c in self.classes[:-1]]
        if any(b2 <= b1 for b1, b2 in zip(bounds, bounds[1:], strict=False)):
            msg = f"facies: log10_k_max must increase from the first class up, got {bounds}"
            raise ModelError(msg)
        bad = [
            c.name
            for c in self.classes
            if not (0 <= float(c.effective_porosity) <= float(c.porosity) <= 1)
        ]
        if bad:
            msg = f"facies: classes {bad} need 0 <= effective_porosity <= porosity <= 1"
            raise ModelError(msg)

    @classmethod
    def from_items(cls, items: Iterable[Any]) -> FaciesClasses:
        """Collect classes from objects with the attributes of :class:`FaciesClass`.

        The objects (with ``name``, ``log10_k_max``, ``porosity`` and ``effective_porosity``)
        may come in any order; they are sorted by ``log10_k_max`` (stable).
        """
        items = list(items)
        for i, item in enumerate(items):
            for attr in ("name", "log10_k_max", "porosity", "effective_porosity"):
                if not hasattr(item, attr):
                    msg = f"facies: class {i} lacks attribute '{attr}'"
                    raise ModelError(msg)
        order = np.argsort([float(c.log10_k_max) for c in items], kind="stable")
        return cls(
            tuple(
                FaciesClass(
                    str(items[i].name),
                    float(items[i].log10_k_max),
                    float(items[i].porosity),
                    float(items[i].effective_porosity),
                )
                for i in order
            )
        )

    @classmethod
    def from_attrs(cls, attrs: Mapping[str, Any]) -> FaciesClasses:
        """Classes recorded in Dataset attributes by :meth:`attrs`."""
        missing = [name for name in _ATTR_NAMES if name not in attrs]
        if missing:
            msg = f"facies: the model lacks the attribute(s) {missing} that record its classes"
            raise ModelError(msg)
        names, kmax, por, eff = (np.ravel(attrs[name]) for name in _ATTR_NAMES)
        if not len(names) == len(kmax) == len(por) == len(eff):
            msg = "facies: the model's facies attributes have different lengths"
            raise ModelError(msg)
        return cls(
            tuple(
                FaciesClass(str(n), float(k), float(p), float(e))
                for n, k, p, e in zip(names, kmax, por, eff, strict=True)
            )
        )

    def attrs(self) -> dict[str, Any]:
        """Return the classes as Dataset attributes (the last bound written as ``inf``)."""
        return {
            "facies_names": list(self.names),
            "facies_log10_k_max": [float(v) for v in self.log10_k_max],
            "facies_porosity": [float(v) for v in self.porosity],
            "facies_effective_porosity": [float(v) for v in self.effective_porosity],
        }

    def __len__(self) -> int:
        return len(self.classes)

    def __iter__(self) -> Iterator[FaciesClass]:
        return iter(self.classes)

    @overload
    def __getitem__(self, index: int) -> FaciesClass: ...

    @overload
    def __getitem__(self, index: slice) -> tuple[FaciesClass, ...]: ...

    def __getitem__(self, index: int | slice) -> FaciesClass | tuple[FaciesClass, ...]:
        return self.classes[index]

    @property
    def names(self) -> tuple[str, ...]:
        """Class names in code order."""
        return tuple(c.name for c in self.classes)

    @property
    def log10_k_max(self) -> np.ndarray:
        """Upper bound of log10 K (m/s) of each class; the last one is ``+inf``."""
        kmax = np.array([float(c.log10_k_max) for c in self.classes])
        kmax[-1] = np.inf
        return kmax

    @property
    def log10_k_min(self) -> np.ndarray:
        """Lower bound of log10 K of each class (the first one is ``-inf``)."""
        return np.concatenate([[-np.inf], self.log10_k_max[:-1]])

    @property
    def porosity(self) -> np.ndarray:
        """Total porosity of each class (fraction)."""
        return np.array([float(c.porosity) for c in self.classes])

    @property
    def effective_porosity(self) -> np.ndarray:
        """Effective porosity of each class (fraction)."""
        return np.array([float(c.effective_porosity) for c in self.classes])

    def code_of(self, name: str, *, default: int) -> int:
        """Code of the class called ``name``, or ``default`` when there is none."""
        names = self.names
        return names.index(name) if name in names else default

    @property
    def storage(self) -> int:
        """Code of the storage class (named so, or the lowest-K class)."""
        return self.code_of("storage", default=0)

    @property
    def transmissive(self) -> int:
        """Code of the transmissive class (named so, or the highest-K class)."""
        return self.code_of("transmissive", default=len(self.classes) - 1)

    def classify(self, log10_k: ArrayLike) -> np.ndarray:
        """Facies code (int8) of each log10 K value, ``-1`` for NaN.

        A value equal to a class's ``log10_k_max`` belongs to the next class up.
        """
        values = np.asarray(log10_k, float)
        codes = np.searchsorted(self.log10_k_max[:-1], values, side="right").astype(np.int8)
        codes[~np.isfinite(values)] = -1
        return codes


#: Default classes (common practice thresholds; porosities after Freeze & Cherry (1979)
#: Table 2.4 and Johnson (1967), as in the site-file template).
DEFAULT_CLASSES = FaciesClasses(
    (
        FaciesClass("storage", -7.0, 0.45, 0.05),
        FaciesClass("transitional", -5.0, 0.38, 0.15),
        FaciesClass("transmissive", 0.0, 0.32, 0.25),
    )
)

# --- end of FaciesClasses ------------------------------------------------------------------


def _check_classes(classes: Sequence) -> None:
    if len(classes) == 0:
        msg = "[facies] classes: expected at least one class"
        raise ModelError(msg)
    bounds = [float(c.log10_k_max) for c in classes[:-1]]
    if any(b2 <= b1 for b1, b2 in zip(bounds, bounds[1:], strict=False)):
        msg = f"[facies] classes: log10_k_max must increase from the first class up, got {bounds}"
        raise ModelError(msg)


def classify_thresholds(
    log10_k,
    classes: Sequence[FaciesClass] = DEFAULT_CLASSES,
    *,
    ec=None,
    ec_cutoffs: Sequence[float | None] | None = None,
) -> np.ndarray:
    """Classify by thresholds on log10 K, optionally corrected by EC.

    A value ``v`` belongs to the first class with ``v < log10_k_max``; the last class takes
    everything above.

    Parameters
    ----------
    log10_k
        log10 K (m/s); NaN gives code -1.
    classes
        Classes from the lowest K up (objects with ``name`` and ``log10_k_max``).
    ec
        Bulk EC (mS/m) of each value, needed with ``ec_cutoffs``.
    ec_cutoffs
        One EC limit per class (None for no limit): an interval whose EC exceeds the limit of
        its class moves down one class, repeatedly (high EC means finer grains).

    Returns
    -------
    ndarray of int
        0 for the lowest-K class, -1 for NaN input.

    Examples
    --------
    >>> classify_thresholds([-8.0, -7.0, -5.0001, -5.0]).tolist()
    [0, 1, 1, 2]
    """
    _check_classes(classes)
    lk = np.asarray(log10_k, dtype=float)
    bounds = np.array([float(c.log10_k_max) for c in classes[:-1]])
    codes = np.searchsorted(bounds, lk, side="right").astype(int)
    if ec_cutoffs is not None:
        if ec is None:
            msg = "EC cut-offs need the EC of each interval"
            raise ModelError(msg)
        if len(ec_cutoffs) != len(classes):
            msg = (
                f"[facies] EC cut-offs: expected {len(classes)} values (one per class), "
                f"got {len(ec_cutoffs)}"
            )
            raise ModelError(msg)
        ec = np.asarray(ec, dtype=float)
        limits = np.array([np.inf if c is None else float(c) for c in ec_cutoffs])
        for _ in range(len(classes)):
            demote = (codes > 0) & np.isfinite(ec) & (ec > limits[codes])
            if not demote.any():
                break
            codes = np.where(demote, codes - 1, codes)
    codes[~np.isfinite(lk)] = -1
    return codes


def classify_mixture(
    log10_k,
    ec,
    *,
    max_classes: int = 5,
    seed: int = 0,
    classes: Sequence[FaciesClass] = DEFAULT_CLASSES,
    merge: bool = True,
    k_only=None,
) -> tuple[np.ndarray, list[str]]:
    """Classify by a Gaussian mixture on standardized ``(log10 K, log10 EC)``.

    Mixtures of 1 to ``max_classes`` full-covariance components are fitted by EM; the count
    with the lowest BIC is kept.  Components are ordered by their mean log10 K and named after
    the threshold class in which their mean log10 K falls.  With ``merge`` (the default),
    components that fall in the same class are merged, so codes and names are those of
    ``classes`` (code 0 = lowest K) and each hydrofacies keeps its porosities: the mixture
    decides which intervals belong together, the thresholds only name the groups.  Without
    ``merge`` every component is its own class (code 0 = lowest mean K) and repeated names
    get a suffix (``"transmissive_2"``).

    Parameters
    ----------
    log10_k
        log10 K (m/s).
    ec
        Bulk EC, mS/m (> 0).
    max_classes
        Largest number of components tried.
    seed
        Random state of the EM initialisation.
    classes
        Threshold classes used to name the components.
    merge
        Merge components named after the same class.
    k_only
        Boolean mask of values whose EC must not be used (e.g. EC-above-trend intervals, where pore
        water rather than grain size sets EC): they are left out of the fit and assigned by
        the mixture's marginal distribution of log10 K.

    Returns
    -------
    codes : ndarray of int
        -1 where log10 K (or, outside ``k_only``, EC) is missing.
    names : list of str
        Name of each code.

    Raises
    ------
    ModelError
        With fewer valid intervals than ``3 * max_classes``.

    References
    ----------
    .. [1] Dempster et al. (1977) EM; Schwarz (1978) BIC.
    """
    _check_classes(classes)
    lk = np.asarray(log10_k, dtype=float)
    ec = np.asarray(ec, dtype=float)
    lec = np.log10(np.where(ec > 0, ec, np.nan))
    only_k = np.zeros(lk.size, bool) if k_only is None else np.asarray(k_only, dtype=bool)
    fit = np.isfinite(lk) & np.isfinite(lec) & ~only_k
    _require_intervals(int(fit.sum()), max_classes)
    raw = np.column_stack([lk, lec])
    centre, spread = raw[fit].mean(axis=0), raw[fit].std(axis=0)
    data = (raw[fit] - centre) / spread
    best = _best_mixture(data, max_classes=max_classes, seed=seed)
    component = np.full(lk.size, -1, dtype=int)
    component[fit] = best.predict(data)
    by_k = np.isfinite(lk) & only_k
    if by_k.any():
        component[by_k] = _component_of_k(best, (lk[by_k] - centre[0]) / spread[0])
    mean_k = best.means_[:, 0] * spread[0] + centre[0]
    class_of = classify_thresholds(mean_k, classes)
    shown = np.round(np.sort(mean_k), 2).tolist()
    logger.info("mixture hydrofacies: %d components by BIC, mean log10 K %s", len(mean_k), shown)
    if merge:
        codes = np.where(component >= 0, class_of[np.maximum(component, 0)], -1)
        return codes, [c.name for c in classes]
    return _components_by_k(component, mean_k, [classes[int(c)].name for c in class_of])


def _require_intervals(n: int, max_classes: int) -> None:
    if n < 3 * max_classes:
        msg = (
            f"Gaussian-mixture hydrofacies need at least {3 * max_classes} intervals with K "
            f"and EC, got {n}; use [facies] method = 'thresholds'"
        )
        raise ModelError(msg)


def _component_of_k(best: GaussianMixture, z: np.ndarray) -> np.ndarray:
    """Most likely component of standardized log10 K values by the marginal in log10 K."""
    sd = np.sqrt(best.covariances_[:, 0, 0])
    density = best.weights_ * norm.pdf(z[:, None], best.means_[:, 0], sd)
    return np.argmax(density, axis=1)


def _best_mixture(data: np.ndarray, *, max_classes: int, seed: int) -> GaussianMixture:
    """Fit mixtures of 1 to ``max_classes`` components; return the one with the lowest BIC."""
    best, best_bic = None, np.inf
    # a few thousand points in 2D: one thread is fastest (no OpenMP oversubscription)
    with threadpool_limits(limits=1):
        for n in range(1, max_classes + 1):
            gm = GaussianMixture(
                n_components=n, covariance_type="full", random_state=seed, n_init=2
            )
            gm.fit(data)
            bic = gm.bic(data)
            logger.debug("mixture with %d components: BIC %.1f", n, bic)
            if bic < best_bic:
                best, best_bic = gm, bic
    if best is None:  # every BIC was NaN: degenerate data
        msg = "Gaussian-mixture hydrofacies: no mixture could be fitted to the intervals"
        raise ModelError(msg)
    return best


def _components_by_k(
    component: np.ndarray, mean_k: np.ndarray, class_names: list[str]
) -> tuple[np.ndarray, list[str]]:
    """Code each component by its rank in mean log10 K; name it after its threshold class."""
    order = np.argsort(mean_k)
    rank = np.empty_like(order)
    rank[order] = np.arange(order.size)
    codes = np.where(component >= 0, rank[np.maximum(component, 0)], -1)
    names: list[str] = []
    for comp in order:
        name = class_names[comp]
        count = sum(1 for n in names if n == name or n.startswith(name + "_"))
        names.append(name if count == 0 else f"{name}_{count + 1}")
    return codes, names


def apply_min_thickness(codes, top, bottom, groups, *, min_thickness: float) -> np.ndarray:
    """Merge runs of one class thinner than ``min_thickness`` into their neighbours.

    Within each group (boring), consecutive intervals of the same code form a run.  The
    thinnest run below the minimum takes the code of its thicker neighbour (the only one at
    either end) and runs are rebuilt, until every run is thick enough or the group is a single
    run.  Unclassified intervals (-1) are never changed nor used as neighbours.

    Parameters
    ----------
    codes
        Class code per interval, sorted by depth within each group.
    top, bottom
        Interval depths, m.
    groups
        Boring id per interval.
    min_thickness
        m; 0 leaves the codes unchanged.

    Returns
    -------
    ndarray of int

    Examples
    --------
    >>> apply_min_thickness([2, 2, 0, 2, 2], [0, 1, 2, 2.1, 3], [1, 2, 2.1, 3, 4],
    ...                     ["B"] * 5, min_thickness=0.3).tolist()
    [2, 2, 2, 2, 2]
    """
    codes = np.asarray(codes, dtype=int).copy()
    top = np.asarray(top, dtype=float)
    bottom = np.asarray(bottom, dtype=float)
    groups = np.asarray(groups)
    if min_thickness <= 0:
        return codes
    for gid in np.unique(groups):
        idx = np.flatnonzero(groups == gid)
        idx = idx[codes[idx] >= 0]
        while idx.size:
            c = codes[idx]
            starts = np.flatnonzero(np.r_[True, c[1:] != c[:-1]])
            ends = np.r_[starts[1:], c.size]
            if starts.size <= 1:
                break
            thick = np.array(
                [bottom[idx[e - 1]] - top[idx[s]] for s, e in zip(starts, ends, strict=True)]
            )
            thin = np.flatnonzero(thick < min_thickness - 1e-9)
            if thin.size == 0:
                break
            r = thin[np.argmin(thick[thin])]
            if r == 0:
                target = 1
            elif r == starts.size - 1:
                target = r - 1
            else:
                target = r - 1 if thick[r - 1] >= thick[r + 1] else r + 1
            codes[idx[starts[r] : ends[r]]] = c[starts[target]]
    return codes
