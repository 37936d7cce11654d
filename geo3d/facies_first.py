"""The facies-first voxel model: simulate hydrofacies, then log10 K within each facies.

Steps:

1. grid, ground and mask as in :func:`geo3d.model.build_voxel_model`; saturated cells from the
   water table;
2. conditioning facies: the classified intervals (below the water table, from K); above the
   water table, facies drawn per realization from an EC-facies relation learned below it
   (:class:`geo3d.ec_facies.EcFaciesClassifier`), marked "from EC";
3. per realization, the indicator model (proportions, vertical proportion curve, Markov-chain
   vertical lengths, lateral lengths) is fitted to a bootstrap resample of the borings, so
   that the realizations carry the uncertainty of the parameters, and the facies are simulated
   by sequential indicator simulation (:mod:`geo3d.geostats.facies_simulation`);
4. ``prob_<facies>`` are the facies frequencies over the realizations, ``facies_code`` the most
   frequent facies, ``facies_realizations`` the realizations themselves;
5. log10 K per facies: the facies' own normal law fitted to its exact and censored values
   (censored ones as inequalities, :mod:`geo3d.geostats.censored`), its own variogram, and
   ordinary kriging of its values (censored ones at their expectation beyond the bound); the
   cell's ``log10_k`` is the mean over the facies probabilities and ``log10_k_var`` the total
   variance.  Above the water table, where K is not measured, ``log10_k`` is left empty.
6. EC is kriged as in the Gaussian model; ``facies_source`` says where the facies of the
   conditioning data came from (1 from K logs, 2 from EC).

References
----------
.. [1] Carle, S.F., Fogg, G.E. (1996) Transition probability-based indicator geostatistics.
   Mathematical Geology 28(4): 453-476.
.. [2] Deutsch, C.V., Journel, A.G. (1998) GSLIB, 2nd ed. Oxford University Press (sisim;
   facies first, then properties within facies, sec. V.7).
.. [3] Efron, B., Tibshirani, R.J. (1993) An Introduction to the Bootstrap. Chapman & Hall.
"""

from __future__ import annotations

import logging
import time
import warnings
from collections.abc import Callable, Mapping, Sequence
from typing import Any

import numpy as np
import pandas as pd
import shapely
import xarray as xr
from scipy.ndimage import gaussian_filter1d

from geo3d.ec_facies import EcFaciesClassifier
from geo3d.errors import Geo3dWarning, ModelError
from geo3d.facies import FaciesClasses
from geo3d.geostats.censored import censored_expectation, fit_censored_normal
from geo3d.geostats.facies_crossval import FaciesCrossValidation, facies_cross_validation
from geo3d.geostats.facies_simulation import fit_facies_model, simulate_facies
from geo3d.geostats.kriging import OrdinaryKriging
from geo3d.geostats.transition import bootstrap_borings
from geo3d.geostats.variogram import fit_anisotropic
from geo3d.grid import site_grid
from geo3d.model import ModelResult

__all__ = ["build_facies_first_model", "data_facies_draws"]

logger = logging.getLogger(__name__)

#: Values of one facies needed to fit its own variogram (fewer: its kriged mean is constant).
_MIN_FOR_VARIOGRAM = 30


def _grid(table, boundary, borings, crs, cell_size, dem, base, padding) -> xr.Dataset:
    if base is None or (isinstance(base, str) and base == "auto"):
        base = float((table["z_mid"] - 0.5 * (table["bottom"] - table["top"]).abs()).min())
    return site_grid(boundary, cell_size=tuple(float(v) for v in cell_size), base=float(base),
                     crs=crs, padding=padding, borings=borings, dem=dem)  # fmt: skip


def _saturated(ds: xr.Dataset, water_table: Any) -> np.ndarray:
    mask = ds["mask"].values
    if water_table is None:
        return mask.copy()
    xx, yy = np.meshgrid(ds["x"].values, ds["y"].values)
    wt = np.asarray(water_table.elevation(xx.ravel(), yy.ravel()), float).reshape(xx.shape)
    return mask & (ds["z"].values[:, None, None] <= wt[None])


def _unsaturated_draws(table: pd.DataFrame, n_classes: int) -> tuple[np.ndarray, np.ndarray]:
    """Rows of intervals without facies (above the water table) and their EC probabilities."""
    known = table["facies_code"].to_numpy(int) >= 0
    ec = table["ec"].to_numpy(float)
    unknown = np.flatnonzero(~known & np.isfinite(ec))
    if unknown.size == 0:
        return unknown, np.empty((0, n_classes))
    try:
        classifier = EcFaciesClassifier(n_classes).fit(ec[known], table["facies_code"][known])
    except ModelError as exc:
        warnings.warn(f"facies above the water table not estimated: {exc}", Geo3dWarning,
                      stacklevel=3)  # fmt: skip
        return np.empty(0, int), np.empty((0, n_classes))
    return unknown, classifier.predict_proba(ec[unknown])


def _run_ids(table: pd.DataFrame) -> np.ndarray:
    """Index of the facies run (consecutive intervals of one boring and facies) of each row."""
    boring = table["boring_id"].to_numpy()
    code = table["facies_code"].to_numpy(int)
    new = np.r_[True, (boring[1:] != boring[:-1]) | (code[1:] != code[:-1])]
    return np.cumsum(new) - 1


#: Step (log10 units) of the grid on which the interval posteriors are computed, and the
#: smoothing of the empirical prior.
_POSTERIOR_STEP = 0.02
_PRIOR_SMOOTHING = 0.05


def _run_posteriors(values: np.ndarray, runs: np.ndarray, scatter: float) -> tuple[np.ndarray, ...]:
    """Posterior weights of the true log10 K of each run on a grid (empirical Bayes).

    Returns ``(grid, weights)``: ``weights[r]`` is proportional to ``f(t) * phi((m_r - t) / s)``
    on ``grid``, with ``f`` the smoothed histogram of the exact interval values (the prior),
    ``m_r`` the run's mean value and ``s`` the scatter.
    """
    n_runs = int(runs.max()) + 1
    means = np.bincount(runs, weights=values, minlength=n_runs) / np.maximum(
        np.bincount(runs, minlength=n_runs), 1
    )
    pad = 4.0 * scatter + 4.0 * _PRIOR_SMOOTHING
    grid = np.arange(values.min() - pad, values.max() + pad + _POSTERIOR_STEP, _POSTERIOR_STEP)
    prior = np.histogram(values, bins=np.r_[grid - _POSTERIOR_STEP / 2, grid[-1] + 0.01])[0]
    prior = gaussian_filter1d(prior.astype(float), _PRIOR_SMOOTHING / _POSTERIOR_STEP)
    if scatter <= 0:
        weights = np.zeros((n_runs, grid.size))
        weights[np.arange(n_runs), np.abs(grid[None, :] - means[:, None]).argmin(axis=1)] = 1.0
        return grid, weights
    weights = prior[None, :] * np.exp(-0.5 * ((means[:, None] - grid[None, :]) / scatter) ** 2)
    total = weights.sum(axis=1, keepdims=True)
    return grid, np.where(total > 0, weights / np.where(total > 0, total, 1.0), 0.0)


def data_facies_draws(
    table: pd.DataFrame,
    facies: FaciesClasses,
    *,
    n_realizations: int,
    error: tuple[float, float],
    rng: np.random.Generator,
) -> np.ndarray:
    """Facies of the conditioning intervals, redrawn per realization from their K error.

    The log-derived log10 K of an interval is uncertain (:meth:`geo3d.logs.calibration.
    Calibration.log10_k_error`): a site-wide offset ``N(0, offset_sd)`` shared by every interval
    and a scatter ``N(0, scatter_sd)`` shared by the intervals of one facies run.  The true
    value of a run given its measured mean ``m`` follows Bayes' theorem with the distribution of
    all measured values as the prior (empirical Bayes): ``p(t | m) ~ f(t) phi((m - t) / s)``,
    so that a run near a class threshold on the flank of a dense mode is pulled towards the
    mode rather than spread evenly across the threshold.  Each realization draws the offset,
    moves the class thresholds by it and draws each run's facies from its posterior class
    probabilities.  Censored intervals (K at or beyond a bound) and unclassified ones keep
    their code.

    Returns
    -------
    numpy.ndarray
        ``(n_realizations, n_intervals)`` facies codes.

    References
    ----------
    .. [1] Carroll, R.J., Ruppert, D., Stefanski, L.A., Crainiceanu, C.M. (2006) Measurement
       Error in Nonlinear Models, 2nd ed. Chapman & Hall/CRC, ch. 8 (Bayesian treatment of
       a covariate measured with error).
    .. [2] Efron, B. (2010) Large-Scale Inference. Cambridge University Press, ch. 1
       (empirical Bayes: the prior estimated from the ensemble of measurements).
    """
    codes = np.tile(table["facies_code"].to_numpy(int), (n_realizations, 1))
    offset_sd, scatter_sd = (float(v) for v in error)
    if offset_sd <= 0 and scatter_sd <= 0:
        return codes
    censored = table.get("k_censored", pd.Series("", index=table.index)).fillna("")
    values = table["log10_k"].to_numpy(float)
    exact = np.flatnonzero((codes[0] >= 0) & np.isfinite(values) & (censored.to_numpy() == ""))
    if exact.size == 0:
        return codes
    runs = np.unique(_run_ids(table)[exact], return_inverse=True)[1]
    grid, weights = _run_posteriors(values[exact], runs, scatter_sd)
    n_classes = len(facies.names)
    for r in range(n_realizations):
        onehot = np.eye(n_classes)[facies.classify(grid + rng.normal(0.0, offset_sd))]
        prob = weights @ onehot
        u = rng.random(prob.shape[0])[:, None]
        drawn = np.minimum((np.cumsum(prob, axis=1) < u).sum(axis=1), n_classes - 1)
        codes[r, exact] = drawn[runs]
    return codes


def _facies_realizations(
    table: pd.DataFrame,
    ds: xr.Dataset,
    facies: FaciesClasses,
    *,
    n_realizations: int,
    seed: int,
    bootstrap: bool,
    neighbors: int,
    data_error: tuple[float, float],
) -> np.ndarray:
    n_classes = len(facies.names)
    mask = ds["mask"].values
    targets = ds.voxels.centres()
    dz = ds.voxels.cell_size[2]
    z_edges = np.arange(float(ds["z"].values.min()) - dz / 2, float(ds["z"].values.max()) + dz, dz)
    unknown, probs = _unsaturated_draws(table, n_classes)
    rng = np.random.default_rng(np.random.SeedSequence([seed, 1]))
    draws = np.random.default_rng(np.random.SeedSequence([seed, 3]))
    codes = data_facies_draws(
        table, facies, n_realizations=n_realizations, error=data_error, rng=draws
    )
    for r in range(n_realizations):
        u = rng.random(unknown.size)[:, None]
        codes[r, unknown] = np.minimum((np.cumsum(probs, axis=1) < u).sum(axis=1), n_classes - 1)
    xyz = table[["x", "y", "z_mid"]].to_numpy(float)

    def model(r: int):
        data = table.assign(facies_code=codes[r])
        if bootstrap:
            data = bootstrap_borings(data, np.random.default_rng([seed, 2, r]))
        return fit_facies_model(data, n_classes, z_edges=z_edges)

    out = np.empty((n_realizations, int(mask.sum())), dtype=np.int8)
    for r in range(n_realizations):
        out[r] = simulate_facies(targets, xyz, codes[r], model=model(r), n_realizations=1,
                                 seed=seed + r, cell_size=ds.voxels.cell_size,
                                 neighbors=neighbors)[0]  # fmt: skip
    return out


def _krige_within(
    table: pd.DataFrame, code: int, targets: np.ndarray, variogram: Mapping[str, Any],
    kriging: Mapping[str, Any],
) -> tuple[np.ndarray, np.ndarray]:  # fmt: skip
    """Kriged mean and variance of log10 K of one facies (its own law and variogram)."""
    rows = table[(table["facies_code"] == code) & np.isfinite(table["log10_k"])]
    m = len(targets)
    if rows.empty:
        return np.full(m, np.nan), np.full(m, np.nan)
    censored = rows.get("k_censored", pd.Series("", index=rows.index)).fillna("").to_numpy()
    values = rows["log10_k"].to_numpy(float)
    mu, sigma = fit_censored_normal(values, censored)
    values = censored_expectation(values, censored, mu, sigma)
    if len(values) < _MIN_FOR_VARIOGRAM or np.ptp(values) == 0:
        return np.full(m, mu), np.full(m, sigma**2)
    coords = rows[["x", "y", "z_mid"]].to_numpy(float)
    groups = rows["boring_id"].astype(str).to_numpy()
    fit = fit_anisotropic(coords, values, groups, **dict(variogram))
    estimator = OrdinaryKriging(fit.model, **dict(kriging)).fit(coords, values, groups)
    mean, var = estimator.predict(targets)
    return mean, var


def _log10_k(table, ds, prob, saturated, variogram, kriging) -> tuple[np.ndarray, np.ndarray]:
    mask = ds["mask"].values
    targets = ds.voxels.centres()
    n_classes = prob.shape[0]
    means = np.zeros((n_classes, len(targets)))
    second = np.zeros(len(targets))
    first = np.zeros(len(targets))
    for k in range(n_classes):
        mean, var = _krige_within(table, k, targets, variogram, kriging)
        p = prob[k][mask]
        mean = np.where(np.isfinite(mean), mean, 0.0)
        var = np.where(np.isfinite(var), var, 0.0)
        means[k] = mean
        first += p * mean
        second += p * (var + mean**2)
    out = np.full(mask.shape, np.nan)
    out_var = np.full(mask.shape, np.nan)
    out[mask] = first
    out_var[mask] = np.maximum(second - first**2, 0.0)
    out[~saturated] = np.nan
    out_var[~saturated] = np.nan
    return out, out_var


def _ec(table: pd.DataFrame, targets: np.ndarray, variogram, kriging) -> tuple[np.ndarray, ...]:

    rows = table[np.isfinite(table["ec"].to_numpy(float))]
    if len(rows) < 4 or np.ptp(rows["ec"].to_numpy(float)) == 0:
        warnings.warn("model: too few EC values to krige EC; ec is left empty", Geo3dWarning,
                      stacklevel=3)  # fmt: skip
        return np.full(len(targets), np.nan), np.full(len(targets), np.nan)
    coords = rows[["x", "y", "z_mid"]].to_numpy(float)
    values = rows["ec"].to_numpy(float)
    groups = rows["boring_id"].astype(str).to_numpy()
    fit = fit_anisotropic(coords, values, groups, **dict(variogram))
    return OrdinaryKriging(fit.model, **dict(kriging)).fit(coords, values, groups).predict(targets)


def _facies_variables(
    ds: xr.Dataset, sims: np.ndarray, names: Sequence[str]
) -> tuple[xr.Dataset, np.ndarray]:
    """Add ``prob_<facies>``, ``facies_code``, ``facies_realizations``; return the probabilities."""
    dims = ("z", "y", "x")
    mask = ds["mask"].values
    realizations = np.full((len(sims),) + mask.shape, -1, dtype=np.int8)
    realizations[:, mask] = sims
    prob = np.full((len(names),) + mask.shape, np.nan)
    for k, name in enumerate(names):
        prob[k][mask] = (sims == k).mean(axis=0)
        ds[f"prob_{name}"] = (dims, prob[k])
        ds[f"prob_{name}"].attrs["long_name"] = f"probability of {name} (facies simulations)"
    codes = np.full(mask.shape, -1, dtype=np.int8)
    codes[mask] = np.argmax(prob[:, mask], axis=0)
    ds["facies_code"] = (dims, codes)
    ds["facies_realizations"] = (("realization",) + dims, realizations)
    return ds.assign_coords(realization=np.arange(len(sims))), prob


def _settings(variogram: Any, kriging: Any) -> tuple[dict[str, Any], dict[str, Any]]:
    """Pick the variogram and kriging options this model uses from the pipeline's mappings."""
    variogram = dict(variogram or {})
    kriging = dict(kriging or {})
    v_opts: dict[str, Any] = {}
    if variogram.get("model") not in (None, "auto"):
        v_opts["model"] = variogram["model"]
    if variogram.get("elevation_tolerance") is not None:
        v_opts["elevation_tolerance"] = float(variogram["elevation_tolerance"])
    k_opts = {
        key: kriging[key]
        for key in ("neighbors", "max_per_group", "chunk_size")
        if kriging.get(key) is not None
    }
    return v_opts, k_opts


def build_facies_first_model(
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
    bootstrap: bool = True,
    neighbors: int = 12,
    data_error: tuple[float, float] = (0.0, 0.0),
    progress: Callable[..., None] | None = None,
) -> ModelResult:
    """Build the voxel model facies first (see the module notes for the steps).

    Parameters are those of :func:`geo3d.model.build_voxel_model` (``intervals`` with
    ``facies_code`` and, where censored, ``k_censored``), plus ``bootstrap`` (each realization
    fits its indicator model to a bootstrap resample of the borings) and ``neighbors``
    (conditioning values per cell of the facies simulation) and ``data_error``, the
    ``(offset, scatter)`` standard deviations of the intervals' log10 K, from which each
    realization redraws the facies of the conditioning intervals (:func:`data_facies_draws`).

    Returns
    -------
    geo3d.model.ModelResult
        The Dataset has the variables of the Gaussian model (``realizations`` of log10 K
        excepted) plus ``facies_realizations`` and ``facies_source``; attribute ``engine`` is
        ``"facies first"``.
    """
    start = time.perf_counter()
    table = intervals.copy()
    table["boring_id"] = table["boring_id"].astype(str)
    facies = FaciesClasses.from_items(facies_classes)
    n_classes = len(facies.names)
    n_realizations = int(n_realizations)
    if n_realizations < 1:
        msg = f"facies-first model: n_realizations must be >= 1, got {n_realizations}"
        raise ModelError(msg)
    ds = _grid(table, boundary, borings, crs, cell_size, dem, base, padding)
    mask = ds["mask"].values
    saturated = _saturated(ds, water_table)
    v_opts, k_opts = _settings(variogram, kriging)
    sims = _facies_realizations(table, ds, facies, n_realizations=n_realizations, seed=seed,
                                bootstrap=bootstrap, neighbors=neighbors,
                                data_error=data_error)  # fmt: skip
    if progress is not None:
        progress(0.6, "facies simulation")
    dims = ("z", "y", "x")
    ds, prob = _facies_variables(ds, sims, facies.names)
    log10_k, log10_k_var = _log10_k(table, ds, prob, saturated, v_opts, k_opts)
    ds["log10_k"] = (dims, log10_k)
    ds["log10_k_var"] = (dims, log10_k_var)
    ds["k"] = 10.0 ** ds["log10_k"]
    ec, ec_var = _ec(table, ds.voxels.centres(), v_opts, k_opts)
    for name, values in (("ec", ec), ("ec_var", ec_var)):
        full = np.full(mask.shape, np.nan)
        full[mask] = values
        ds[name] = (dims, full)
    ds["saturated"] = (dims, saturated)
    source = np.where(saturated, 1, 2).astype(np.int8)
    ds["facies_source"] = (dims, np.where(mask, source, 0).astype(np.int8))
    ds["facies_source"].attrs.update(
        flag_values=[0, 1, 2], flag_meanings="outside from_K_logs from_EC",
        long_name="where the facies of the conditioning data come from",
    )  # fmt: skip
    ds.attrs.update(facies.attrs())
    ds.attrs.update(n_realizations=n_realizations, seed=int(seed), engine="facies first")
    ds.attrs["data_error_log10"] = [float(v) for v in data_error]
    ds.attrs["saturated_source"] = "water table" if water_table is not None else "none given"
    ds.attrs["metadata"] = (
        f"Generated by geo3d.facies_first.build_facies_first_model: sequential indicator "
        f"simulation of {n_classes} facies ({n_realizations} realizations, seed {seed}, "
        f"bootstrap {bootstrap}, interval log10 K error offset {data_error[0]:.2f} scatter "
        f"{data_error[1]:.2f}), log10 K kriged within facies; {len(table)} intervals"
    )
    cv_start = time.perf_counter()
    crossval = _cross_validation(table, ds, facies, neighbors)
    timings = {"facies_crossval": time.perf_counter() - cv_start}
    timings["total"] = time.perf_counter() - start
    logger.info("facies-first model built in %.1f s", timings["total"])
    return ModelResult(ds, {}, {}, timings, facies_crossval=crossval)


def _cross_validation(
    table: pd.DataFrame, ds: xr.Dataset, facies: FaciesClasses, neighbors: int
) -> FaciesCrossValidation | None:
    """Leave-one-boring-out facies cross-validation on the intervals classified from K."""
    dz = ds.voxels.cell_size[2]
    z = ds["z"].values
    z_edges = np.arange(float(z.min()) - dz / 2, float(z.max()) + dz, dz)
    try:
        return facies_cross_validation(table, facies.names, z_edges=z_edges, neighbors=neighbors)
    except ModelError as exc:
        warnings.warn(f"facies cross-validation not run: {exc}", Geo3dWarning, stacklevel=3)
        return None
