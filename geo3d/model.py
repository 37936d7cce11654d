"""The site-wide voxel model: kriged log10 K and EC, hydrofacies probabilities, simulations.

Coordinates are ``(x, y, z)`` in the site CRS, ``z`` the elevation, upward.  The gridder
:class:`VoxelModel` is fitted to the composited intervals and grids them on a grid from
:func:`geo3d.grid.site_grid`; the result (the VoxelModel Dataset) is an :class:`xarray.Dataset`
with the variables listed in the contributor guide (``mask``, ``log10_k``, ``log10_k_var``, ``ec``,
``ec_var``, ``k``, ``facies_code``, ``prob_<facies>``, ``saturated`` and, when simulations are
run, ``realizations``).  The facies classes are recorded in the attributes ``facies_names``,
``facies_log10_k_max``, ``facies_porosity`` and ``facies_effective_porosity`` (in code order,
lowest K first) so that the analysis functions can work from the Dataset alone.
"""

from __future__ import annotations

import logging
import time
import warnings
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from typing import Any, Protocol, Self

import numpy as np
import pandas as pd
import shapely
import xarray as xr
from scipy.special import ndtr, ndtri

from geo3d.errors import Geo3dWarning, ModelError
from geo3d.facies import FaciesClasses
from geo3d.geostats.crossval import CrossValidation, leave_one_group_out
from geo3d.geostats.facies_crossval import FaciesCrossValidation
from geo3d.geostats.kriging import OrdinaryKriging
from geo3d.geostats.simulation import conditional_simulation
from geo3d.geostats.variogram import VariogramFit, fit_anisotropic
from geo3d.grid import CRSInput, Raster, site_grid

__all__ = [
    "VoxelModel",
    "ModelResult",
    "Samples",
    "NormalScore",
    "WaterTable",
    "facies_probabilities",
    "most_likely_facies",
    "realization_probabilities",
    "saturated_cells",
    "deepest_bottom",
    "build_voxel_model",
]

logger = logging.getLogger(__name__)

_DIMS = ("z", "y", "x")

#: Attributes of the kriged variables: name -> (units, long_name).
_KRIGED_ATTRS = {
    "log10_k": ("log10(m/s)", "kriged log10 hydraulic conductivity"),
    "log10_k_var": ("log10(m/s)^2", "kriging variance of log10 K"),
    "ec": ("mS/m", "kriged bulk electrical conductivity"),
    "ec_var": ("(mS/m)^2", "kriging variance of EC"),
}


class WaterTable(Protocol):
    """A water-table surface: elevation (m) at points."""

    def elevation(self, x: np.ndarray, y: np.ndarray) -> np.ndarray:
        """Water-table elevation at the points ``(x, y)``."""
        ...


_PROB_KRIGING = "probability of %s (Gaussian, kriging mean and variance)"
_PROB_SIM = "probability of %s (frequency over the realizations)"

#: Called with the name of each finished step.
Progress = Callable[[str], None]


def facies_probabilities(
    mean: np.ndarray, variance: np.ndarray, classes: FaciesClasses
) -> np.ndarray:
    """Probability of each facies from a Gaussian estimate of log10 K.

    ``P(class i) = Phi((upper_i - mu) / sigma) - Phi((lower_i - mu) / sigma)`` with ``mu`` the
    kriging estimate and ``sigma**2`` the kriging variance; a zero variance gives the indicator
    of the estimate's class.

    Parameters
    ----------
    mean, variance
        Kriging estimate and variance of log10 K, same shape.
    classes
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
    upper = classes.log10_k_max.reshape((-1,) + (1,) * mu.ndim)
    lower = classes.log10_k_min.reshape((-1,) + (1,) * mu.ndim)
    with np.errstate(divide="ignore", invalid="ignore"):
        zu = np.where(sigma > 0, (upper - mu) / sigma, np.where(mu < upper, np.inf, -np.inf))
        zl = np.where(sigma > 0, (lower - mu) / sigma, np.where(mu < lower, np.inf, -np.inf))
    prob = ndtr(zu) - ndtr(zl)
    prob[:, ~np.isfinite(mu)] = np.nan
    return np.clip(prob, 0.0, 1.0)


@dataclass(frozen=True)
class NormalScore:
    """Normal-score transform of a sample and its inverse.

    Each datum is replaced by the standard normal quantile of its rank, ``Phi^-1((r - 0.5) /
    n)``; ties (such as censored values set to a detection bound) are broken at random so
    that they spread over their share of the distribution ("despiking").  The inverse
    interpolates linearly between the sorted scores and the sorted data and holds the extreme
    data beyond them.

    Attributes
    ----------
    values
        Sorted data.
    scores
        Sorted normal scores (same length).

    References
    ----------
    .. [1] Deutsch, C.V., Journel, A.G. (1998) GSLIB, 2nd ed. Oxford University Press,
       section V.1.6 (normal-score transform, despiking of ties, back transform).

    Examples
    --------
    >>> transform, scores = NormalScore.fit(np.array([3.0, 1.0, 2.0]))
    >>> np.round(scores, 4).tolist()
    [0.9674, -0.9674, 0.0]
    >>> transform.inverse(scores).tolist()
    [3.0, 1.0, 2.0]
    """

    values: np.ndarray
    scores: np.ndarray

    @classmethod
    def fit(cls, values: np.ndarray, *, seed: int = 0) -> tuple[NormalScore, np.ndarray]:
        """Learn the transform; return it and the scores of ``values`` (in their order)."""
        data = np.asarray(values, float)
        if data.ndim != 1 or data.size < 2 or not np.isfinite(data).all():
            msg = "normal score: need a 1D array of at least 2 finite values"
            raise ModelError(msg)
        n = data.size
        tie_break = np.random.default_rng(seed).random(n)
        order = np.lexsort((tie_break, data))
        scores = np.empty(n)
        scores[order] = ndtri((np.arange(n) + 0.5) / n)
        return cls(data[order], scores[order]), scores

    def inverse(self, scores: np.ndarray) -> np.ndarray:
        """Back-transform normal scores to data values (NaN stays NaN)."""
        scores = np.asarray(scores, float)
        out = np.interp(scores, self.scores, self.values)
        return np.where(np.isfinite(scores), out, np.nan)


@dataclass
class ModelResult:
    """The voxel model and how it was made.

    Attributes
    ----------
    dataset
        The VoxelModel (xarray Dataset).
    variograms
        ``'log10_k'`` and ``'ec'`` -> :class:`geo3d.geostats.variogram.VariogramFit`; with
        simulations in normal-score space also ``'log10_k_normal_score'``.
    crossval
        ``'log10_k'`` and ``'ec'`` -> :class:`geo3d.geostats.crossval.CrossValidation`
        (leave one boring out); empty when not run.
    timings
        Step -> wall-clock seconds.
    facies_crossval
        Leave-one-boring-out facies predictions and scores
        (:class:`geo3d.geostats.facies_crossval.FaciesCrossValidation`), from the facies-first
        engine; None otherwise.
    """

    dataset: xr.Dataset
    variograms: dict[str, VariogramFit] = field(default_factory=dict)
    crossval: dict[str, CrossValidation] = field(default_factory=dict)
    timings: dict[str, float] = field(default_factory=dict)
    facies_crossval: FaciesCrossValidation | None = None


@dataclass(frozen=True)
class Samples:
    """The finite values of one interval column with their coordinates and borings."""

    coords: np.ndarray
    values: np.ndarray
    groups: np.ndarray

    @classmethod
    def of(cls, table: pd.DataFrame, column: str) -> Samples:
        """Rows of ``table`` where ``column`` is finite."""
        rows = table[np.isfinite(table[column].to_numpy(float))]
        return cls(
            rows[["x", "y", "z_mid"]].to_numpy(float),
            rows[column].to_numpy(float),
            rows["boring_id"].to_numpy(),
        )

    @property
    def varies(self) -> bool:
        """At least 4 values, not all equal: enough to fit a variogram."""
        return len(self.values) >= 4 and bool(np.ptp(self.values) > 0)


def _interval_table(intervals: pd.DataFrame) -> pd.DataFrame:
    if not isinstance(intervals, pd.DataFrame):
        msg = f"model: intervals must be a DataFrame, got {type(intervals)!r}"
        raise ModelError(msg)
    missing = {"boring_id", "x", "y", "z_mid", "log10_k"} - set(intervals.columns)
    if missing:
        msg = f"model: intervals table lacks column(s) {sorted(missing)}"
        raise ModelError(msg)
    table = intervals.copy()
    if "ec" not in table:
        table["ec"] = np.nan
    table["boring_id"] = table["boring_id"].astype(str)
    return table


def deepest_bottom(intervals: pd.DataFrame) -> float:
    """Elevation of the bottom of the deepest interval: the model base by default.

    Parameters
    ----------
    intervals
        ``z_mid`` (elevation, m) [, ``top``, ``bottom`` depths] per interval.

    Examples
    --------
    >>> deepest_bottom(pd.DataFrame({"z_mid": [5.0, 2.0], "top": [0, 2], "bottom": [1, 4]}))
    1.0
    """
    table = intervals
    half = 0.0
    if {"top", "bottom"} <= set(table.columns):
        half = (table["bottom"] - table["top"]).abs().fillna(0.0).to_numpy() / 2
    bottoms = table["z_mid"].to_numpy(float) - half
    finite = bottoms[np.isfinite(bottoms)]
    if finite.size == 0:
        msg = "model: no interval has a finite elevation (z_mid)"
        raise ModelError(msg)
    return float(finite.min())


def most_likely_facies(prob: np.ndarray, classes: FaciesClasses) -> xr.Variable:
    """Code of the most probable facies of each cell (-1 where the probabilities are NaN).

    Parameters
    ----------
    prob
        ``(n_classes, nz, ny, nx)`` probabilities from :func:`facies_probabilities`.
    classes
        The facies classes (their names label the codes).

    Returns
    -------
    xarray.Variable
        int8, dims ``("z", "y", "x")``, CF ``flag_values`` / ``flag_meanings``.
    """
    valid = np.isfinite(prob).all(axis=0)
    codes = np.where(valid, np.argmax(np.nan_to_num(prob, nan=-1.0), axis=0), -1)
    return xr.Variable(
        _DIMS,
        codes.astype(np.int8),
        {
            "long_name": "most likely hydrofacies (kriging, Gaussian log10 K)",
            "flag_values": list(range(len(classes))),
            "flag_meanings": " ".join(classes.names),
        },
    )


def realization_probabilities(
    sims: np.ndarray, classes: FaciesClasses
) -> list[tuple[str, np.ndarray]]:
    """Frequency of each facies over realizations of log10 K.

    Parameters
    ----------
    sims
        ``(n_realizations, m)`` simulated log10 K at ``m`` cells.
    classes
        The facies classes.

    Returns
    -------
    list of (name, ndarray)
        One ``(m,)`` share per class, in code order; NaN where a realization is NaN.

    References
    ----------
    .. [1] Deutsch, C.V., Journel, A.G. (1998) GSLIB, 2nd ed.: probabilities of classes from
       realizations.
    """
    sim_codes = classes.classify(sims)
    undefined = ~np.isfinite(sims).all(axis=0)
    shares = []
    for i, name in enumerate(classes.names):
        share = (sim_codes == i).mean(axis=0)
        share[undefined] = np.nan
        shares.append((name, share))
    return shares


def saturated_cells(grid: xr.Dataset, water_table: WaterTable | None) -> tuple[np.ndarray, str]:
    """Model cells at or below the water table.

    Parameters
    ----------
    grid
        A grid with a ``mask``.
    water_table
        Object with ``.elevation(x, y)`` (m); None = every model cell counts as saturated.

    Returns
    -------
    saturated : ndarray of bool
        ``(nz, ny, nx)``.
    source : str
        How the cells were chosen (recorded as the attribute ``saturated_source``).
    """
    mask = grid.voxels.mask
    if water_table is None:
        return mask.copy(), "no water table given: every model cell counted saturated"
    xx, yy = np.meshgrid(grid["x"].values, grid["y"].values)
    wt = np.asarray(water_table.elevation(xx.ravel(), yy.ravel()), float).reshape(xx.shape)
    return mask & (grid["z"].values[:, None, None] <= wt[None]), "water table"


class VoxelModel:
    """The site's voxel model of log10 K and EC as a gridder: fit to intervals, then grid.

    :meth:`fit` learns from the composited intervals the anisotropic variograms of
    ``log10_k`` and ``ec`` (vertical pairs within borings, horizontal pairs between borings at
    similar elevation), an ordinary-kriging estimator of each, their leave-one-boring-out
    cross-validation and, for the simulations, the normal-score transform of log10 K.
    :meth:`grid` kriges both variables on the cells of a grid (one code path for both),
    derives the facies probabilities from the kriging estimate and variance of log10 K
    (Gaussian), the most likely facies, the saturated cells and, when ``n_realizations > 0``,
    conditional simulations of log10 K whose facies frequencies give ``prob_<facies>`` (the
    Gaussian ones are then kept as ``prob_<facies>_kriging``).

    Parameters
    ----------
    facies_classes
        The hydrofacies classes.
    variogram_model, range_h, range_v, azimuth, minor_ratio, elevation_tolerance
        Variogram fit (:func:`geo3d.geostats.variogram.fit_anisotropic`; ``variogram_model``
        is its ``model``, None ranges are fitted).
    neighbors, max_per_group, drift, max_distance, chunk_size
        Kriging settings (:class:`geo3d.geostats.kriging.OrdinaryKriging`).
    scheduler
        A dask scheduler name (``'threads'``) or a ``dask.distributed`` address.
    n_realizations
        Conditional simulations of log10 K (0 = none).
    seed
        Seed of the simulations (and of the tie-breaking of the normal-score transform).
    normal_score
        Simulate in normal-score space (:class:`NormalScore`, variogram fitted to the scores)
        and back-transform, so that the realizations reproduce the histogram of the data (a
        bimodal or censored log10 K is not Gaussian); False = simulate log10 K directly with
        its own variogram.
    crossval
        Run the leave-one-boring-out cross-validation.

    Attributes
    ----------
    samples_
        Column -> :class:`Samples` used for ``log10_k`` and (when kriged) ``ec``; for
        normal-score simulations also ``'log10_k_normal_score'`` (the scores).
    variograms_
        Column -> :class:`geo3d.geostats.variogram.VariogramFit` (and
        ``'log10_k_normal_score'`` for normal-score simulations).
    estimators_
        Column -> fitted :class:`geo3d.geostats.kriging.OrdinaryKriging`.
    crossval_
        Column -> :class:`geo3d.geostats.crossval.CrossValidation`.
    normal_score_
        The normal-score transform of log10 K (None without it).
    water_table_
        The water table given to :meth:`fit`.
    n_intervals_, n_borings_
        Counts of the intervals and borings fitted.

    References
    ----------
    .. [1] Journel, A.G., Huijbregts, C.J. (1978) Mining Geostatistics. Academic Press:
       ordinary kriging, kriging variance, conditioning simulations by kriging.
    .. [2] Deutsch, C.V., Journel, A.G. (1998) GSLIB, 2nd ed. Oxford University Press:
       probabilities of classes from realizations; normal-score transform before Gaussian
       simulation.
    """

    samples_: dict[str, Samples]
    variograms_: dict[str, VariogramFit]
    estimators_: dict[str, OrdinaryKriging]
    crossval_: dict[str, CrossValidation]
    normal_score_: NormalScore | None
    water_table_: WaterTable | None
    n_intervals_: int
    n_borings_: int

    def __init__(
        self,
        *,
        facies_classes: FaciesClasses,
        variogram_model: str,
        range_h: float | None,
        range_v: float | None,
        azimuth: float,
        minor_ratio: float,
        elevation_tolerance: float,
        neighbors: int,
        max_per_group: int,
        drift: str,
        max_distance: float | None,
        chunk_size: int,
        scheduler: str,
        n_realizations: int,
        seed: int,
        normal_score: bool = True,
        crossval: bool = True,
    ) -> None:
        self.facies_classes = facies_classes
        self.variogram_model = variogram_model
        self.range_h, self.range_v = range_h, range_v
        self.azimuth, self.minor_ratio = azimuth, minor_ratio
        self.elevation_tolerance = elevation_tolerance
        self.neighbors, self.max_per_group = neighbors, max_per_group
        self.drift, self.max_distance, self.chunk_size = drift, max_distance, chunk_size
        self.scheduler = scheduler
        self.n_realizations, self.seed = int(n_realizations), seed
        self.normal_score, self.crossval = normal_score, crossval
        if self.n_realizations < 0:
            msg = f"model: n_realizations must be >= 0, got {self.n_realizations}"
            raise ModelError(msg)

    def variogram_settings(self) -> dict[str, Any]:
        """Keyword arguments of :func:`~geo3d.geostats.variogram.fit_anisotropic`."""
        return {
            "model": self.variogram_model,
            "range_h": self.range_h,
            "range_v": self.range_v,
            "azimuth": self.azimuth,
            "minor_ratio": self.minor_ratio,
            "elevation_tolerance": self.elevation_tolerance,
            "detrend": "linear_z" if self.drift == "linear_z" else "none",
        }

    def kriging_settings(self) -> dict[str, Any]:
        """Keyword arguments of :class:`~geo3d.geostats.kriging.OrdinaryKriging`."""
        return {
            "neighbors": self.neighbors,
            "max_per_group": self.max_per_group,
            "drift": self.drift,
            "max_distance": self.max_distance,
            "chunk_size": self.chunk_size,
        }

    def fit(self, intervals: pd.DataFrame, *, water_table: WaterTable | None = None) -> Self:
        """Learn the variograms, kriging estimators and transforms from the intervals.

        Parameters
        ----------
        intervals
            Composited intervals: ``boring_id``, ``x``, ``y``, ``z_mid`` (elevation),
            ``log10_k``, ``ec`` [, ``top``, ``bottom`` depths].
        water_table
            Its ``.elevation(x, y)`` sets the saturated cells; None = every model cell counts
            as saturated (noted in the attribute ``saturated_source``).

        Returns
        -------
        VoxelModel
            ``self``, fitted.
        """
        table = _interval_table(intervals)
        self.samples_, self.variograms_, self.estimators_, self.crossval_ = {}, {}, {}, {}
        for column in ("log10_k", "ec"):
            samples = Samples.of(table, column)
            if samples.varies:
                self._fit_column(column, samples)
            elif column == "log10_k":
                msg = "model: log10_k needs at least 4 varying values to fit a variogram"
                raise ModelError(msg)
            else:
                msg = "model: too few EC values to krige EC; ec is left empty"
                warnings.warn(msg, Geo3dWarning, stacklevel=2)
        self.normal_score_ = None
        if self.n_realizations > 0 and self.normal_score:
            logk = self.samples_["log10_k"]
            self.normal_score_, scores = NormalScore.fit(logk.values, seed=self.seed)
            normal = Samples(logk.coords, scores, logk.groups)
            self.samples_["log10_k_normal_score"] = normal
            self.variograms_["log10_k_normal_score"] = fit_anisotropic(
                normal.coords, normal.values, normal.groups, **self.variogram_settings()
            )
        self.water_table_ = water_table
        self.n_intervals_ = len(table)
        self.n_borings_ = int(table["boring_id"].nunique())
        return self

    def _fit_column(self, column: str, samples: Samples) -> None:
        """Fit the variogram, the kriging estimator and the cross-validation of one column."""
        coords, values, groups = samples.coords, samples.values, samples.groups
        fit = fit_anisotropic(coords, values, groups, **self.variogram_settings())
        kriging = self.kriging_settings()
        self.samples_[column] = samples
        self.variograms_[column] = fit
        self.estimators_[column] = OrdinaryKriging(fit.model, **kriging).fit(coords, values, groups)
        if self.crossval and len(pd.unique(groups)) >= 2:
            self.crossval_[column] = leave_one_group_out(
                coords, values, groups, model=fit.model, **kriging
            )

    def grid(self, grid: xr.Dataset, *, progress: Progress | None = None) -> xr.Dataset:
        """Krige, classify and simulate on the cells of a grid.

        Parameters
        ----------
        grid
            A grid with ``mask`` (and ``ground_elev``), e.g. from :func:`geo3d.grid.site_grid`.
        progress
            Called as ``progress(step)`` after each step (``'log10_k'``, ``'ec'``,
            ``'simulation'``).

        Returns
        -------
        xarray.Dataset
            The VoxelModel: the grid's variables and ``log10_k``, ``log10_k_var``, ``k``,
            ``ec``, ``ec_var``, ``facies_code``, ``prob_<facies>`` [, ``prob_<facies>_kriging``,
            ``realizations``], ``saturated``; NaN outside the mask.
        """
        if not hasattr(self, "estimators_"):
            msg = "VoxelModel.grid called before fit"
            raise ModelError(msg)
        if "mask" not in grid:
            msg = "VoxelModel.grid: the grid has no 'mask'; make it with geo3d.grid.site_grid"
            raise ModelError(msg)
        ds = grid.copy()
        targets = ds.voxels.centres()
        for column in ("log10_k", "ec"):
            self._krige_column(ds, column, targets)
            if column == "log10_k":
                ds["k"] = 10.0 ** ds["log10_k"]
                ds["k"].attrs.update(units="m/s", long_name="hydraulic conductivity (10**log10_k)")
            if progress is not None:
                progress(column)
        classes = self.facies_classes
        prob_kriging = facies_probabilities(ds["log10_k"].values, ds["log10_k_var"].values, classes)
        ds["facies_code"] = most_likely_facies(prob_kriging, classes)
        if self.n_realizations > 0:
            ds = self._simulate(ds, targets, prob_kriging)
            if progress is not None:
                progress("simulation")
        else:
            for i, name in enumerate(classes.names):
                ds[f"prob_{name}"] = (_DIMS, prob_kriging[i], {"long_name": _PROB_KRIGING % name})
        saturated, source = saturated_cells(ds, self.water_table_)
        ds["saturated"] = (_DIMS, saturated)
        for var in ds.data_vars:
            if ds[var].dtype.kind == "f" and ds[var].dims[-3:] == _DIMS:
                ds[var] = ds[var].where(ds["mask"])
        ds.attrs = self._attrs(grid, saturated_source=source)
        return ds

    def _krige_column(self, ds: xr.Dataset, column: str, targets: np.ndarray) -> None:
        """Write the kriging estimate and variance of one column (NaN when not kriged)."""
        if column in self.estimators_:
            estimate, variance = self.estimators_[column].predict(targets, scheduler=self.scheduler)
        else:
            estimate = variance = np.full(len(targets), np.nan)
        mask = ds.voxels.mask
        for name, values in ((column, estimate), (f"{column}_var", variance)):
            units, long_name = _KRIGED_ATTRS[name]
            ds[name] = (_DIMS, _scatter(values, mask), {"units": units, "long_name": long_name})

    def _simulate(
        self, ds: xr.Dataset, targets: np.ndarray, prob_kriging: np.ndarray
    ) -> xr.Dataset:
        """Add the realizations of log10 K and the facies probabilities from them."""
        key = "log10_k" if self.normal_score_ is None else "log10_k_normal_score"
        samples = self.samples_[key]
        sims = conditional_simulation(
            samples.coords,
            samples.values,
            targets,
            model=self.variograms_[key].model,
            n_realizations=self.n_realizations,
            seed=self.seed,
            groups=samples.groups,
            scheduler=self.scheduler,
            **self.kriging_settings(),
        )
        if self.normal_score_ is not None:
            sims = self.normal_score_.inverse(sims)
        mask = ds.voxels.mask
        realizations = np.full((self.n_realizations, *mask.shape), np.nan, dtype=np.float32)
        realizations[:, mask] = sims
        ds["realizations"] = (
            ("realization", *_DIMS),
            realizations,
            {"units": "log10(m/s)", "long_name": "conditional simulations of log10 K"},
        )
        ds = ds.assign_coords(realization=np.arange(self.n_realizations))
        shares = realization_probabilities(sims, self.facies_classes)
        for i, (name, share) in enumerate(shares):
            ds[f"prob_{name}"] = (_DIMS, _scatter(share, mask), {"long_name": _PROB_SIM % name})
            ds[f"prob_{name}_kriging"] = (
                _DIMS,
                prob_kriging[i],
                {"long_name": _PROB_KRIGING % name},
            )
        return ds

    def _attrs(self, grid: xr.Dataset, *, saturated_source: str) -> dict[str, Any]:
        """Attributes of the VoxelModel: the grid's, the classes and how the model was made."""
        attrs = dict(grid.attrs)
        base = attrs.pop("base", None)
        if base is None:
            base = float(grid["z"].values[0]) - grid.voxels.cell_size[2] / 2
        attrs["saturated_source"] = saturated_source
        attrs.update(self.facies_classes.attrs())
        attrs.update(base=base, n_realizations=self.n_realizations, seed=int(self.seed))
        attrs["variogram_log10_k"] = repr(self.variograms_["log10_k"].model)
        attrs["simulation_space"] = "normal score" if self.normal_score else "log10_k"
        for key in ("log10_k_normal_score", "ec"):
            if key in self.variograms_:
                attrs[f"variogram_{key}"] = repr(self.variograms_[key].model)
        variogram = {k: v for k, v in self.variogram_settings().items() if k != "detrend"}
        attrs["metadata"] = (
            f"Generated by geo3d.model.build_voxel_model: ordinary kriging "
            f"{_given(self.kriging_settings())!r}, variogram {_given(variogram)!r}, "
            f"{self.n_intervals_} intervals from {self.n_borings_} borings, "
            f"{self.n_realizations} realizations (seed {self.seed})"
        )
        return attrs


def _given(settings: Mapping[str, Any]) -> dict[str, Any]:
    return {k: v for k, v in settings.items() if v is not None}


def _scatter(values: np.ndarray, mask: np.ndarray) -> np.ndarray:
    """Put the values of the masked cells into a full grid (NaN elsewhere)."""
    out = np.full(mask.shape, np.nan, dtype=np.asarray(values).dtype)
    out[mask] = values
    return out


def build_voxel_model(
    intervals: pd.DataFrame,
    gridder: VoxelModel,
    *,
    boundary: shapely.Geometry,
    borings: pd.DataFrame,
    crs: CRSInput,
    cell_size: tuple[float, float, float],
    base: float | None,
    padding: float,
    dem: Raster | None = None,
    water_table: WaterTable | None = None,
    progress: Callable[[float, str], None] | None = None,
) -> ModelResult:
    """Fit a :class:`VoxelModel` to the intervals and grid it over the site, in one call.

    The convenience the pipeline uses: ``gridder.fit(intervals)``, the site grid built once
    (:func:`geo3d.grid.site_grid`, base = ``base`` or the bottom of the deepest interval),
    ``gridder.grid(grid)``, the timing of each step.

    Parameters
    ----------
    intervals
        Composited intervals (see :meth:`VoxelModel.fit`).
    gridder
        An unfitted :class:`VoxelModel` with its settings.
    boundary, borings, crs, cell_size, padding, dem
        The site grid (see :func:`geo3d.grid.site_grid`).
    base
        Base elevation (m); None = the bottom of the deepest interval (:func:`deepest_bottom`).
    water_table
        See :meth:`VoxelModel.fit`.
    progress
        Called as ``progress(fraction, step)`` after each step.

    Returns
    -------
    ModelResult
    """
    timings: dict[str, float] = {}
    clock = time.perf_counter()
    fractions = {"fit": 0.35, "grid": 0.4, "log10_k": 0.55, "ec": 0.6, "simulation": 0.9}

    def step(name: str) -> None:
        nonlocal clock
        now = time.perf_counter()
        timings[name], clock = now - clock, now
        logger.info("model: %s done (%.2f s)", name, timings[name])
        if progress is not None:
            progress(fractions.get(name, 1.0), name)

    gridder.fit(intervals, water_table=water_table)
    step("fit")
    grid = site_grid(
        boundary,
        cell_size=cell_size,
        base=deepest_bottom(intervals) if base is None else float(base),
        crs=crs,
        padding=padding,
        borings=borings,
        dem=dem,
    )
    step("grid")
    dataset = gridder.grid(grid, progress=step)
    step("finish")
    crossval = dict(gridder.crossval_)
    return ModelResult(dataset, dict(gridder.variograms_), crossval, timings)
