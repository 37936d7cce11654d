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
import time
import warnings
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd
import shapely
import xarray as xr
from scipy.special import ndtr, ndtri

from geo3d.errors import Geo3dWarning, ModelError
from geo3d.facies import FaciesClasses
from geo3d.grid import build_mask, ground_surface, make_grid

__all__ = [
    "facies_probabilities",
    "NormalScore",
    "ModelResult",
    "build_voxel_model",
]

logger = logging.getLogger(__name__)


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
    """

    dataset: xr.Dataset
    variograms: dict[str, Any] = field(default_factory=dict)
    crossval: dict[str, Any] = field(default_factory=dict)
    timings: dict[str, float] = field(default_factory=dict)


_VARIOGRAM_KEYS = {
    "model": "model",
    "horizontal_range": "range_h",
    "range_h": "range_h",
    "vertical_range": "range_v",
    "range_v": "range_v",
    "azimuth": "azimuth",
    "anisotropy_minor": "minor_ratio",
    "minor_ratio": "minor_ratio",
    "elevation_tolerance": "elevation_tolerance",
    "horizontal_lags": "horizontal_lags",
    "vertical_lag": "vertical_lag",
}
_KRIGING_KEYS = {
    "neighbors": "neighbors",
    "max_per_boring": "max_per_group",
    "max_per_group": "max_per_group",
    "drift": "drift",
    "max_distance": "max_distance",
    "chunk_size": "chunk_size",
    "global_mode": "global_mode",
}


def _options(options: Any, keys: Mapping[str, str], what: str) -> dict[str, Any]:
    """Translate a settings mapping (or pydantic section) into keyword arguments."""
    if options is None:
        return {}
    if hasattr(options, "model_dump"):
        options = options.model_dump()
    out: dict[str, Any] = {}
    for key, value in dict(options).items():
        if key == "scheduler":
            continue
        if key not in keys:
            msg = f"{what} option {key!r} is unknown; expected one of {sorted(keys)}"
            raise ModelError(msg)
        if isinstance(value, str) and value == "auto" and key != "model":
            value = None
        if value is not None:
            out[keys[key]] = value
    return out


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


def _base_elevation(table: pd.DataFrame, base: Any) -> float:
    if base is None or (isinstance(base, str) and base == "auto"):
        half = 0.0
        if {"top", "bottom"} <= set(table.columns):
            half = (table["bottom"] - table["top"]).abs().fillna(0.0).to_numpy() / 2
        bottoms = table["z_mid"].to_numpy(float) - half
        finite = bottoms[np.isfinite(bottoms)]
        if finite.size == 0:
            msg = "model: no interval has a finite elevation (z_mid)"
            raise ModelError(msg)
        return float(finite.min())
    try:
        return float(base)
    except (TypeError, ValueError) as exc:
        msg = f"model: base must be 'auto' or an elevation in m, got {base!r}"
        raise ModelError(msg) from exc


def _krige(
    table: pd.DataFrame,
    column: str,
    targets: np.ndarray,
    *,
    variogram: dict[str, Any],
    kriging: dict[str, Any],
    scheduler: Any,
    crossval: bool,
) -> tuple[np.ndarray, np.ndarray, Any, Any, np.ndarray, np.ndarray, np.ndarray]:
    """Fit the variogram of one variable and krige it at the targets."""
    from geo3d.geostats.crossval import leave_one_group_out
    from geo3d.geostats.kriging import OrdinaryKriging
    from geo3d.geostats.variogram import fit_anisotropic

    rows = table[np.isfinite(table[column].to_numpy(float))]
    coords = rows[["x", "y", "z_mid"]].to_numpy(float)
    values = rows[column].to_numpy(float)
    groups = rows["boring_id"].to_numpy()
    if len(values) < 4 or np.ptp(values) == 0:
        msg = f"model: {column} needs at least 4 varying values to fit a variogram"
        raise ModelError(msg)
    detrend = "linear_z" if kriging.get("drift") == "linear_z" else "none"
    fit = fit_anisotropic(coords, values, groups, detrend=detrend, **variogram)
    estimator = OrdinaryKriging(fit.model, **kriging).fit(coords, values, groups)
    estimate, variance = estimator.predict(targets, scheduler=scheduler)
    cv = None
    if crossval and len(pd.unique(groups)) >= 2:
        cv = leave_one_group_out(coords, values, groups, model=fit.model, **kriging)
    return estimate, variance, fit, cv, coords, values, groups


def build_voxel_model(
    intervals: pd.DataFrame,
    *,
    boundary: shapely.Geometry,
    borings: pd.DataFrame,
    crs: Any,
    cell_size: Sequence[float],
    facies_classes: Sequence[Any],
    water_table: Any = None,
    dem: tuple[np.ndarray, Any] | None = None,
    base: float | str = "auto",
    padding: float = 0.0,
    variogram: Mapping[str, Any] | None = None,
    kriging: Mapping[str, Any] | None = None,
    n_realizations: int = 20,
    seed: int = 0,
    crossval: bool = True,
    normal_score: bool = True,
    progress: Callable[..., None] | None = None,
) -> ModelResult:
    """Build the site's voxel model of log10 K and EC with hydrofacies probabilities.

    Steps: grid over the boundary (:func:`geo3d.grid.make_grid`); ground surface from the DEM or
    the collars; mask (inside the boundary, below the ground, above the base); anisotropic
    variograms of ``log10_k`` and ``ec`` fitted to the intervals (vertical pairs within
    borings, horizontal pairs between borings at similar elevation); ordinary kriging of both
    on the model cells; leave-one-boring-out cross-validation; facies probabilities from the
    kriging estimate and variance of log10 K (Gaussian); the most likely facies; saturated
    cells from the water table; and, when ``n_realizations > 0``, conditional simulations of
    log10 K whose facies frequencies give ``prob_<facies>`` (the Gaussian ones are then kept
    as ``prob_<facies>_kriging``).

    Parameters
    ----------
    intervals
        Composited intervals: ``boring_id``, ``x``, ``y``, ``z_mid`` (elevation), ``log10_k``,
        ``ec`` [, ``top``, ``bottom`` depths].
    boundary
        Site boundary polygon.
    borings
        Collars: ``x``, ``y``, ``ground_elev``.
    crs
        Site CRS.
    cell_size
        ``(dx, dy, dz)`` in m.
    facies_classes
        Objects with ``name``, ``log10_k_max``, ``porosity``, ``effective_porosity``.
    water_table
        Object with ``.elevation(x, y)``; None = every model cell counts as saturated (noted
        in the attribute ``saturated_source``).
    dem
        ``(array, affine)`` ground raster; None = from the collars.
    base
        ``'auto'`` (the bottom of the deepest interval) or an elevation (m).
    padding
        Grid padding beyond the boundary (m).
    variogram
        Options of the variogram fit (``model``, ``horizontal_range``/``range_h``,
        ``vertical_range``/``range_v``, ``azimuth``, ``minor_ratio``/``anisotropy_minor``,
        ``elevation_tolerance``; ``None``/``'auto'`` = fitted).
    kriging
        Kriging options (``neighbors``, ``max_per_group``/``max_per_boring``, ``drift``,
        ``max_distance``, ``chunk_size``, ``global_mode``, ``scheduler``: a dask scheduler
        name or ``dask.distributed`` address; default local threads).
    n_realizations
        Conditional simulations of log10 K (0 = none).
    seed
        Seed of the simulations.
    crossval
        Run the leave-one-boring-out cross-validation.
    normal_score
        Simulate in normal-score space (:class:`NormalScore`, variogram fitted to the scores)
        and back-transform, so that the realizations reproduce the histogram of the data
        (a bimodal or censored log10 K is not Gaussian); False = simulate log10 K directly
        with its own variogram.
    progress
        Called as ``progress(fraction, message)`` after each step.

    Returns
    -------
    ModelResult

    References
    ----------
    .. [1] Journel, A.G., Huijbregts, C.J. (1978) Mining Geostatistics. Academic Press:
       ordinary kriging, kriging variance, conditioning simulations by kriging.
    .. [2] Deutsch, C.V., Journel, A.G. (1998) GSLIB, 2nd ed. Oxford University Press:
       probabilities of classes from realizations; normal-score transform before Gaussian
       simulation.
    """
    timings: dict[str, float] = {}
    clock = time.perf_counter()

    def step(name: str, fraction: float) -> None:
        nonlocal clock
        now = time.perf_counter()
        timings[name] = now - clock
        clock = now
        logger.info("model: %s done (%.2f s)", name, timings[name])
        if progress is not None:
            progress(fraction, name)

    table = _interval_table(intervals)
    facies = FaciesClasses.from_items(facies_classes)
    variogram_options = _options(variogram, _VARIOGRAM_KEYS, "variogram")
    kriging_settings = dict(kriging or {}) if not hasattr(kriging, "model_dump") else kriging
    # no scheduler given: dask's local threads (the kriging arithmetic releases the GIL)
    scheduler: Any = "threads"
    if isinstance(kriging_settings, Mapping):
        scheduler = kriging_settings.get("scheduler") or "threads"
    elif getattr(kriging_settings, "scheduler", None):
        scheduler = kriging_settings.scheduler
    kriging_options = _options(kriging_settings, _KRIGING_KEYS, "kriging")
    n_realizations = int(n_realizations)
    if n_realizations < 0:
        msg = f"model: n_realizations must be >= 0, got {n_realizations}"
        raise ModelError(msg)

    base_elev = _base_elevation(table, base)
    dx, dy, dz = (float(v) for v in cell_size)
    columns = make_grid(
        boundary,
        cell_size=(dx, dy, dz),
        top=base_elev + dz,
        base=base_elev,
        crs=crs,
        padding=padding,
    )
    ground = ground_surface(columns["x"].values, columns["y"].values, borings=borings, dem=dem)
    top = float(np.nanmax(ground))
    if top <= base_elev:
        msg = f"model: the ground ({top:.2f} m) is not above the base ({base_elev:.2f} m)"
        raise ModelError(msg)
    ds = make_grid(
        boundary, cell_size=(dx, dy, dz), top=top, base=base_elev, crs=crs, padding=padding
    )
    ds["ground_elev"] = (("y", "x"), ground)
    ds["ground_elev"].attrs.update(units="m", long_name="ground elevation")
    ds["mask"] = build_mask(ds, boundary, ground=ground, base=base_elev)
    mask = ds["mask"].values
    if not mask.any():
        msg = "model: no cell lies inside the boundary, below the ground and above the base"
        raise ModelError(msg)
    targets = ds.voxels.centres()
    shape = mask.shape
    step("grid", 0.05)

    def field_of(values: np.ndarray, fill: float = np.nan) -> np.ndarray:
        out = np.full(shape, fill, dtype=np.asarray(values).dtype)
        out[mask] = values
        return out

    variograms: dict[str, Any] = {}
    crossvals: dict[str, Any] = {}
    logk_estimate, logk_variance, logk_fit, logk_crossval, logk_coords, logk_values, logk_groups = (
        _krige(
            table,
            "log10_k",
            targets,
            variogram=variogram_options,
            kriging=kriging_options,
            scheduler=scheduler,
            crossval=crossval,
        )
    )
    variograms["log10_k"] = logk_fit
    if logk_crossval is not None:
        crossvals["log10_k"] = logk_crossval
    step("log10_k", 0.4)
    dims = ("z", "y", "x")
    ds["log10_k"] = (dims, field_of(logk_estimate))
    ds["log10_k_var"] = (dims, field_of(logk_variance))
    ds["k"] = 10.0 ** ds["log10_k"]
    ds["log10_k"].attrs.update(units="log10(m/s)", long_name="kriged log10 hydraulic conductivity")
    ds["log10_k_var"].attrs.update(units="log10(m/s)^2", long_name="kriging variance of log10 K")
    ds["k"].attrs.update(units="m/s", long_name="hydraulic conductivity (10**log10_k)")

    ec_ok = np.isfinite(table["ec"].to_numpy(float))
    ec_est = ec_var = np.full(len(targets), np.nan)
    if ec_ok.sum() >= 4 and np.ptp(table["ec"].to_numpy(float)[ec_ok]) > 0:
        ec_est, ec_var, ec_fit, ec_cv, *_ = _krige(
            table,
            "ec",
            targets,
            variogram=variogram_options,
            kriging=kriging_options,
            scheduler=scheduler,
            crossval=crossval,
        )
        variograms["ec"] = ec_fit
        if ec_cv is not None:
            crossvals["ec"] = ec_cv
    else:
        msg = "model: too few EC values to krige EC; ec is left empty"
        warnings.warn(msg, Geo3dWarning, stacklevel=2)
    ds["ec"] = (dims, field_of(ec_est))
    ds["ec_var"] = (dims, field_of(ec_var))
    ds["ec"].attrs.update(units="mS/m", long_name="kriged bulk electrical conductivity")
    ds["ec_var"].attrs.update(units="(mS/m)^2", long_name="kriging variance of EC")
    step("ec", 0.6)

    prob_kriging = facies_probabilities(ds["log10_k"].values, ds["log10_k_var"].values, facies)
    valid = np.isfinite(ds["log10_k"].values)
    codes = np.where(valid, np.argmax(np.nan_to_num(prob_kriging, nan=-1.0), axis=0), -1)
    ds["facies_code"] = (dims, codes.astype(np.int8))
    ds["facies_code"].attrs.update(
        long_name="most likely hydrofacies (kriging, Gaussian log10 K)",
        flag_values=list(range(len(facies.names))),
        flag_meanings=" ".join(facies.names),
    )

    if n_realizations > 0:
        from geo3d.geostats.simulation import conditional_simulation
        from geo3d.geostats.variogram import fit_anisotropic

        sim_values, sim_model = logk_values, logk_fit.model
        transform = None
        if normal_score:
            transform, sim_values = NormalScore.fit(logk_values, seed=seed)
            detrend = "linear_z" if kriging_options.get("drift") == "linear_z" else "none"
            score_fit = fit_anisotropic(
                logk_coords, sim_values, logk_groups, detrend=detrend, **variogram_options
            )
            variograms["log10_k_normal_score"] = score_fit
            sim_model = score_fit.model
        sims = conditional_simulation(
            logk_coords,
            sim_values,
            targets,
            model=sim_model,
            n_realizations=n_realizations,
            seed=seed,
            groups=logk_groups,
            scheduler=scheduler,
            **kriging_options,
        )
        if transform is not None:
            sims = transform.inverse(sims)
        realizations = np.full((n_realizations,) + shape, np.nan, dtype=np.float32)
        realizations[:, mask] = sims
        ds["realizations"] = (("realization",) + dims, realizations)
        ds["realizations"].attrs.update(
            units="log10(m/s)", long_name="conditional simulations of log10 K"
        )
        ds = ds.assign_coords(realization=np.arange(n_realizations))
        sim_codes = facies.classify(sims)
        for i, name in enumerate(facies.names):
            share = (sim_codes == i).mean(axis=0)
            share[~np.isfinite(sims).all(axis=0)] = np.nan
            ds[f"prob_{name}"] = (dims, field_of(share))
            ds[f"prob_{name}"].attrs.update(
                long_name=f"probability of {name} (frequency over the realizations)"
            )
            ds[f"prob_{name}_kriging"] = (dims, prob_kriging[i])
            ds[f"prob_{name}_kriging"].attrs.update(
                long_name=f"probability of {name} (Gaussian, kriging mean and variance)"
            )
        step("simulation", 0.9)
    else:
        for i, name in enumerate(facies.names):
            ds[f"prob_{name}"] = (dims, prob_kriging[i])
            ds[f"prob_{name}"].attrs.update(
                long_name=f"probability of {name} (Gaussian, kriging mean and variance)"
            )

    if water_table is not None:
        xx, yy = np.meshgrid(ds["x"].values, ds["y"].values)
        wt = np.asarray(water_table.elevation(xx.ravel(), yy.ravel()), float).reshape(xx.shape)
        saturated = mask & (ds["z"].values[:, None, None] <= wt[None])
        ds.attrs["saturated_source"] = "water table"
    else:
        saturated = mask.copy()
        ds.attrs["saturated_source"] = "no water table given: every model cell counted saturated"
    ds["saturated"] = (dims, saturated)

    for name in ds.data_vars:
        if ds[name].dtype.kind == "f" and ds[name].dims[-3:] == dims:
            ds[name] = ds[name].where(ds["mask"])
    ds.attrs.update(facies.attrs())
    ds.attrs["base"] = base_elev
    ds.attrs["n_realizations"] = n_realizations
    ds.attrs["seed"] = int(seed)
    ds.attrs["variogram_log10_k"] = repr(logk_fit.model)
    ds.attrs["simulation_space"] = "normal score" if normal_score else "log10_k"
    if "log10_k_normal_score" in variograms:
        ds.attrs["variogram_log10_k_normal_score"] = repr(variograms["log10_k_normal_score"].model)
    if "ec" in variograms:
        ds.attrs["variogram_ec"] = repr(variograms["ec"].model)
    ds.attrs["metadata"] = (
        f"Generated by geo3d.model.build_voxel_model: ordinary kriging "
        f"{kriging_options!r}, variogram {variogram_options!r}, {len(table)} intervals from "
        f"{table['boring_id'].nunique()} borings, {n_realizations} realizations (seed {seed})"
    )
    step("finish", 1.0)
    return ModelResult(ds, variograms, crossvals, timings)
