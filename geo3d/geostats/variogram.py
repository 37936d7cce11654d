"""Experimental variograms of boring data and anisotropic model fitting.

Coordinates are ``(x, y, z)`` in the site CRS, z the elevation, upward. Direct-push data are
dense along each boring and sparse between borings, so the two directions are estimated apart:

- vertical: pairs of samples *within* one boring, binned by their elevation difference;
- horizontal: pairs of samples in *different* borings whose elevations differ by at most a
  tolerance, binned by horizontal distance (optionally only pairs within an angular tolerance
  of an azimuth).

A 3D model with geometric anisotropy (shared nugget and sill, horizontal and vertical ranges) is
then fitted to both by weighted least squares with the weights ``N_j / h_j**2`` of gstat.
"""

from __future__ import annotations

import logging
import math
import warnings
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from scipy import optimize
from scipy.spatial.distance import pdist

from geo3d.errors import Geo3dWarning, ModelError
from geo3d.geostats.covariance import KINDS, CovarianceModel, correlation

__all__ = [
    "VariogramFit",
    "experimental_horizontal",
    "experimental_isotropic",
    "experimental_vertical",
    "fit_anisotropic",
    "fit_model",
    "linear_trend_z",
]

log = logging.getLogger(__name__)

_COLUMNS = ["lag", "gamma", "n_pairs"]
#: Samples whose horizontal pairs are formed together (bounds memory).
_PAIR_BLOCK = 512


class _PairBins:
    """Running sums of pair counts, distances and squared differences per bin.

    Pairs are added block by block and dropped, so memory does not grow with the number of
    pairs. Bins are right-closed ``(e_j, e_j+1]``; zero distances are skipped.
    """

    def __init__(self, edges: np.ndarray) -> None:
        self.edges = np.asarray(edges, dtype=float)
        nb = len(self.edges) - 1
        self.n = np.zeros(nb, dtype=np.int64)
        self.sum_d = np.zeros(nb)
        self.sum_sq = np.zeros(nb)

    def add(self, dist: np.ndarray, sqdiff: np.ndarray) -> None:
        """Add pairs: their distances and squared value differences."""
        nb = len(self.n)
        j = np.searchsorted(self.edges, dist, side="left") - 1
        keep = (j >= 0) & (j < nb) & (dist > 0)
        j = j[keep]
        self.n += np.bincount(j, minlength=nb)
        self.sum_d += np.bincount(j, weights=dist[keep], minlength=nb)
        self.sum_sq += np.bincount(j, weights=sqdiff[keep], minlength=nb)

    def table(self) -> pd.DataFrame:
        """Return ``lag``, ``gamma`` and ``n_pairs`` of the filled bins.

        ``lag`` is the mean pair distance in the bin, ``gamma`` half the mean squared
        difference (Matheron's estimator).
        """
        filled = self.n > 0
        n = self.n[filled]
        return pd.DataFrame(
            {
                "lag": self.sum_d[filled] / n,
                "gamma": 0.5 * self.sum_sq[filled] / n,
                "n_pairs": n.astype(np.int64),
            }
        )


def _bin_pairs(dist: np.ndarray, sqdiff: np.ndarray, edges: np.ndarray) -> pd.DataFrame:
    """Bin pair distances into right-closed bins ``(e_j, e_j+1]``; drop empty bins."""
    bins = _PairBins(edges)
    bins.add(dist, sqdiff)
    return bins.table()


def _as_arrays(coords, values, groups=None):
    coords = np.asarray(coords, dtype=float)
    values = np.asarray(values, dtype=float)
    if coords.ndim != 2 or len(coords) != len(values):
        msg = (
            f"coordinates must be an (n, d) array with one row per value; got coordinates "
            f"{coords.shape} and values {values.shape}"
        )
        raise ModelError(msg)
    ok = np.isfinite(coords).all(axis=1) & np.isfinite(values)
    if groups is not None:
        groups = np.asarray(groups)
        if len(groups) != len(values):
            msg = f"groups must have one label per value ({len(values)}); got {len(groups)}"
            raise ModelError(msg)
        groups = groups[ok]
    return coords[ok], values[ok], groups


def experimental_isotropic(
    coords: np.ndarray, values: np.ndarray, *, n_lags: int = 15, cutoff: float | None = None
) -> pd.DataFrame:
    """Omnidirectional experimental variogram of all pairs (gstat's defaults).

    Parameters
    ----------
    coords
        ``(n, d)`` coordinates.
    values
        ``(n,)`` values.
    n_lags
        Number of equal-width lag bins between 0 and ``cutoff``.
    cutoff
        Largest pair distance used; default one third of the bounding-box diagonal (gstat).

    Returns
    -------
    pandas.DataFrame
        ``lag`` (mean distance of the pairs in the bin), ``gamma``, ``n_pairs``.

    References
    ----------
    Matheron, G. (1962). Traite de geostatistique appliquee. Technip (estimator).
    Pebesma, E.J. (2004). Multivariable geostatistics in S: the gstat package. Computers &
    Geosciences 30, 683-691 (default cutoff and lag width).
    """
    coords, values, _ = _as_arrays(coords, values)
    if cutoff is None:
        cutoff = float(np.linalg.norm(coords.max(axis=0) - coords.min(axis=0))) / 3.0
    dist = pdist(coords)
    sq = pdist(values[:, None], "sqeuclidean")
    return _bin_pairs(dist, sq, np.linspace(0.0, cutoff, n_lags + 1))


def experimental_vertical(
    coords: np.ndarray,
    values: np.ndarray,
    groups: np.ndarray,
    *,
    lag: float,
    max_lag: float,
) -> pd.DataFrame:
    """Vertical experimental variogram from pairs of samples within the same group (boring).

    Parameters
    ----------
    coords, values, groups
        Samples: ``(n, 3)`` x, y, z, ``(n,)`` values and ``(n,)`` boring labels.
    lag
        Bin width (m) of the elevation difference; bins are centred on its multiples
        (``(0, lag/2], (lag/2, 3 lag/2], ...``).
    max_lag
        Largest elevation difference used (m).

    Returns
    -------
    pandas.DataFrame
        ``lag`` (mean |dz| in the bin), ``gamma``, ``n_pairs``.

    References
    ----------
    Matheron, G. (1962). Traite de geostatistique appliquee. Technip.
    """
    if not (lag > 0 and max_lag > 0):
        msg = f"vertical lag and max_lag must be > 0, got {lag} and {max_lag}"
        raise ModelError(msg)
    coords, values, groups = _as_arrays(coords, values, groups)
    # Bins centred on multiples of the lag: composited intervals sit at a regular spacing, so
    # their elevation differences are multiples of it; on bin edges, the last bit of rounding
    # (the same site in feet or in metres) would decide the bin.
    edges = np.concatenate([[0.0], np.arange(0.5 * lag, max_lag, lag)])
    if edges[-1] < max_lag:
        edges = np.append(edges, max_lag)
    bins = _PairBins(edges)
    for g in pd.unique(groups):
        sel = groups == g
        if sel.sum() < 2:
            continue
        bins.add(pdist(coords[sel, 2:3]), pdist(values[sel, None], "sqeuclidean"))
    return bins.table()


def experimental_horizontal(
    coords: np.ndarray,
    values: np.ndarray,
    groups: np.ndarray,
    *,
    lags: np.ndarray | int,
    elevation_tolerance: float,
    azimuth: float | None = None,
    tolerance_deg: float = 22.5,
    max_lag: float | None = None,
) -> pd.DataFrame:
    """Horizontal experimental variogram from pairs in different groups at similar elevation.

    Parameters
    ----------
    coords, values, groups
        Samples: ``(n, 3)`` x, y, z, ``(n,)`` values and ``(n,)`` boring labels (pairs
        within one boring are not used).
    lags
        Bin edges (m, ascending), or a number of equal bins up to ``max_lag``.
    elevation_tolerance
        Largest elevation difference (m) of a pair.
    azimuth
        If given, only pairs whose direction is within ``tolerance_deg`` of this azimuth
        (degrees clockwise from north, either sense) are used.
    tolerance_deg
        Angular half-tolerance (degrees).
    max_lag
        Cutoff when ``lags`` is a number; default half the largest distance between groups.

    Returns
    -------
    pandas.DataFrame
        ``lag`` (mean horizontal distance in the bin), ``gamma``, ``n_pairs``.

    References
    ----------
    Deutsch, C.V. and Journel, A.G. (1998). GSLIB, 2nd ed., sec. III.1 (directional variograms
    with angular and band tolerances).
    """
    coords, values, groups = _as_arrays(coords, values, groups)
    if elevation_tolerance < 0:
        msg = f"elevation_tolerance must be >= 0, got {elevation_tolerance}"
        raise ModelError(msg)
    _, gcode = np.unique(groups, return_inverse=True)
    edges = _horizontal_edges(coords, gcode, lags, max_lag)
    order = np.argsort(coords[:, 2], kind="stable")
    c, v, g = coords[order], values[order], gcode[order]
    z = c[:, 2]
    cos_tol = math.cos(math.radians(tolerance_deg))
    if azimuth is not None:
        a = math.radians(azimuth)
        unit = np.array([math.sin(a), math.cos(a)])
    bins = _PairBins(edges)
    n = len(z)
    for a0 in range(0, n, _PAIR_BLOCK):
        a1 = min(n, a0 + _PAIR_BLOCK)
        end = int(np.searchsorted(z, z[a1 - 1] + elevation_tolerance, side="right"))
        ii = np.arange(a0, a1)[:, None]
        jj = np.arange(a0, end)[None, :]
        keep = (jj > ii) & (np.abs(z[jj] - z[ii]) <= elevation_tolerance) & (g[jj] != g[ii])
        pi, pj = np.nonzero(keep)
        pi = pi + a0
        pj = pj + a0
        dxy = c[pj, :2] - c[pi, :2]
        d = np.hypot(dxy[:, 0], dxy[:, 1])
        if azimuth is not None:
            with np.errstate(invalid="ignore", divide="ignore"):
                cosang = np.abs(dxy @ unit) / d
            sel = cosang >= cos_tol - 1e-12
            d, pi, pj = d[sel], pi[sel], pj[sel]
        bins.add(d, (v[pj] - v[pi]) ** 2)
    return bins.table()


def _horizontal_edges(
    coords: np.ndarray, gcode: np.ndarray, lags: np.ndarray | int, max_lag: float | None
) -> np.ndarray:
    """Return the bin edges: given, or ``lags`` equal bins up to ``max_lag``.

    ``max_lag`` defaults to half the largest distance between groups.
    """
    if np.ndim(lags) != 0:
        return np.asarray(lags, dtype=float)
    if max_lag is None:
        max_lag = 0.5 * _max_group_distance(coords, gcode)
    return np.linspace(0.0, float(max_lag), int(lags) + 1)


def _max_group_distance(coords: np.ndarray, gcode: np.ndarray) -> float:
    centres = np.array([coords[gcode == g, :2].mean(axis=0) for g in np.unique(gcode)])
    if len(centres) < 2:
        msg = "a horizontal variogram needs samples in at least two borings"
        raise ModelError(msg)
    return float(pdist(centres).max())


def _weights(table: pd.DataFrame) -> np.ndarray:
    """Weights ``N_j / h_j**2`` (gstat fit.method 7)."""
    h = table["lag"].to_numpy(float)
    return table["n_pairs"].to_numpy(float) / np.maximum(h, 1e-12) ** 2


def fit_model(
    lags: np.ndarray,
    gamma: np.ndarray,
    n_pairs: np.ndarray,
    *,
    kind: str = "spherical",
    fit_nugget: bool = True,
    nu: float = 1.5,
) -> tuple[CovarianceModel, float]:
    """Fit an isotropic model to one experimental variogram by weighted least squares.

    Parameters
    ----------
    lags, gamma, n_pairs
        The experimental variogram (mean lag distance, semivariance, pair count per bin).
    kind
        Model kind (see :data:`geo3d.geostats.covariance.KINDS`).
    fit_nugget
        Fit a nugget (else it is 0).
    nu
        Matern smoothness.

    Returns
    -------
    model, rmse
        The isotropic model (``range_h == range_v``) and the weighted RMS misfit
        ``sqrt(sum w (g - g_model)^2 / sum w)``.

    References
    ----------
    Cressie, N. (1985). Fitting variogram models by weighted least squares. Math. Geol. 17,
    563-586. Pebesma, E.J. (2004), Computers & Geosciences 30, 683-691 (weights N_j/h_j^2).
    """
    table = pd.DataFrame({"lag": lags, "gamma": gamma, "n_pairs": n_pairs})
    table = table[(table["n_pairs"] > 0) & (table["lag"] > 0)]
    if len(table) < 3:
        msg = f"a variogram fit needs at least 3 non-empty lag bins, got {len(table)}"
        raise ModelError(msg)
    params, rmse = _fit([(table, 0)], kind=kind, fit_nugget=fit_nugget, nu=nu)
    nugget, sill, rng = params
    model = CovarianceModel(
        kind, sill=float(sill), nugget=float(nugget), range_h=float(rng), range_v=float(rng), nu=nu
    )
    return model, rmse


def _fit(
    series: list[tuple[pd.DataFrame, int]],
    *,
    kind: str,
    fit_nugget: bool,
    nu: float,
    fixed_ranges: dict[int, float] | None = None,
) -> tuple[np.ndarray, float]:
    """Weighted least squares of ``nugget, sill, range_0[, range_1]`` on several series.

    Each series ``(table, r)`` uses range number ``r``. Weights ``N_j/h_j^2`` are normalised
    to sum to 1 within each series so that each direction counts equally.
    """
    fixed_ranges = fixed_ranges or {}
    n_ranges = max(r for _, r in series) + 1
    hs, gs, ws, rs = [], [], [], []
    for table, r in series:
        w = _weights(table)
        hs.append(table["lag"].to_numpy(float))
        gs.append(table["gamma"].to_numpy(float))
        ws.append(w / w.sum())
        rs.append(np.full(len(table), r))
    h, g, w, rr = (np.concatenate(a) for a in (hs, gs, ws, rs))
    sw = np.sqrt(w)
    g_scale = max(float(np.max(g)), 1e-300)
    free = [i for i in range(n_ranges) if i not in fixed_ranges]
    h_max = [float(h[rr == i].max()) for i in range(n_ranges)]

    def unpack(x):
        nug = x[0] if fit_nugget else 0.0
        off = 1 if fit_nugget else 0
        sill = x[off]
        ranges = np.empty(n_ranges)
        for i in range(n_ranges):
            ranges[i] = fixed_ranges[i] if i in fixed_ranges else x[off + 1 + free.index(i)]
        return nug, sill, ranges

    def resid(x):
        nug, sill, ranges = unpack(x)
        model = nug + sill * (1.0 - correlation(kind, h / ranges[rr], nu=nu))
        return sw * (model - g) / g_scale

    best: optimize.OptimizeResult | None = None
    g_hi = float(np.max(g))
    for frac in (0.25, 0.5, 1.0):
        x0 = ([0.1 * g_hi] if fit_nugget else []) + [0.9 * g_hi]
        x0 += [frac * h_max[i] for i in free]
        lower = [0.0] * (2 if fit_nugget else 1) + [1e-6 * h_max[i] for i in free]
        upper = [np.inf] * (2 if fit_nugget else 1) + [1e3 * h_max[i] for i in free]
        lower[1 if fit_nugget else 0] = 1e-12 * g_hi
        res = optimize.least_squares(
            resid, x0, bounds=(lower, upper), x_scale="jac", xtol=1e-12, ftol=1e-12, gtol=1e-12
        )
        if best is None or res.cost < best.cost:
            best = res
    assert best is not None  # three starts ran
    nug, sill, ranges = unpack(best.x)
    rmse = float(np.sqrt(2.0 * best.cost / len(series))) * g_scale
    return np.array([nug, sill, *ranges]), rmse


def linear_trend_z(z: np.ndarray, values: np.ndarray) -> tuple[float, float]:
    """Least-squares line ``values ~ a + b z``; returns ``(a, b)``."""
    design = np.column_stack([np.ones_like(z), z])
    (a, b), *_ = np.linalg.lstsq(design, values, rcond=None)
    return float(a), float(b)


@dataclass
class VariogramFit:
    """Result of :func:`fit_anisotropic`.

    Attributes
    ----------
    model
        The fitted 3D model.
    kind
        Its kind.
    rmse
        Weighted RMS misfit over both directions (data units squared).
    vertical, horizontal
        The experimental variograms used (``lag``, ``gamma``, ``n_pairs``).
    candidates
        Weighted RMS misfit of every kind tried.
    detrend
        ``'none'`` or ``'linear_z'``.
    trend
        ``(a, b)`` of the removed drift ``a + b z`` (None without detrending).
    """

    model: CovarianceModel
    kind: str
    rmse: float
    vertical: pd.DataFrame
    horizontal: pd.DataFrame
    candidates: dict[str, float] = field(default_factory=dict)
    detrend: str = "none"
    trend: tuple[float, float] | None = None


def fit_anisotropic(
    coords: np.ndarray,
    values: np.ndarray,
    groups: np.ndarray,
    *,
    model: str = "auto",
    detrend: str = "none",
    vertical_lag: float | None = None,
    max_vertical_lag: float | None = None,
    horizontal_lags: np.ndarray | int = 10,
    max_horizontal_lag: float | None = None,
    elevation_tolerance: float = 0.5,
    azimuth: float = 0.0,
    minor_ratio: float = 1.0,
    range_h: float | None = None,
    range_v: float | None = None,
    kinds: tuple[str, ...] = ("exponential", "spherical", "gaussian"),
) -> VariogramFit:
    """Fit a 3D model with geometric anisotropy to boring data.

    The vertical and horizontal experimental variograms are fitted together by weighted least
    squares (weights ``N_j / h_j**2``, normalised per direction) with one nugget and sill and
    separate horizontal and vertical ranges.

    Parameters
    ----------
    coords, values, groups
        Samples: ``(n, 3)`` x, y, z, ``(n,)`` values and ``(n,)`` boring labels.
    model
        A kind from :data:`~geo3d.geostats.covariance.KINDS`, or ``'auto'`` to try each of
        ``kinds`` and keep the lowest weighted misfit.
    detrend
        ``'none'`` or ``'linear_z'`` (fit the variograms to residuals of a line in z).
    vertical_lag, max_vertical_lag
        Vertical bin width and cutoff (m); default the median sample spacing in a boring and
        half the largest boring length.
    horizontal_lags
        Bin edges (m) or a number of equal bins up to ``max_horizontal_lag`` (default half
        the largest distance between borings).
    elevation_tolerance
        Largest elevation difference of a horizontal pair (m).
    azimuth, minor_ratio
        Horizontal anisotropy kept in the model (not fitted).
    range_h, range_v
        Fix a range instead of fitting it.
    kinds
        Kinds tried by ``'auto'``.

    Returns
    -------
    VariogramFit

    References
    ----------
    Cressie, N. (1985). Math. Geol. 17, 563-586 (weighted least squares).
    Pebesma, E.J. (2004). Computers & Geosciences 30, 683-691 (weights N_j/h_j^2).
    """
    coords, values, groups = _as_arrays(coords, values, groups)
    tried = _check_fit(coords, detrend, model, kinds)
    trend = linear_trend_z(coords[:, 2], values) if detrend == "linear_z" else None
    resid = values if trend is None else values - (trend[0] + trend[1] * coords[:, 2])
    vertical, horizontal = _experimental_pair(
        coords,
        resid,
        groups,
        vertical=(vertical_lag, max_vertical_lag),
        horizontal=(horizontal_lags, max_horizontal_lag),
        elevation_tolerance=elevation_tolerance,
    )
    fixed = {"range_h": range_h, "range_v": range_v}
    candidates, kind, (nugget, sill, rh, rv) = _fit_directions(horizontal, vertical, tried, **fixed)
    cov = CovarianceModel(kind, sill, nugget, rh, rv, azimuth=azimuth, minor_ratio=minor_ratio)
    log.info("variogram fit: %r (weighted rmse %.4g; tried %s)", cov, candidates[kind], candidates)
    return VariogramFit(
        cov, kind, candidates[kind], vertical, horizontal, candidates, detrend, trend
    )


def _experimental_pair(
    coords: np.ndarray,
    values: np.ndarray,
    groups: np.ndarray,
    *,
    vertical: tuple[float | None, float | None],
    horizontal: tuple[np.ndarray | int, float | None],
    elevation_tolerance: float,
) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Compute the vertical and horizontal experimental variograms.

    The lag settings are those of :func:`fit_anisotropic`.
    """
    vertical_lag, max_vertical_lag = vertical
    if vertical_lag is None or max_vertical_lag is None:
        spacing, length = _boring_spacing(coords[:, 2], groups)
        vertical_lag = vertical_lag or spacing
        max_vertical_lag = max_vertical_lag or 0.5 * length
    lags, max_lag = horizontal
    return (
        experimental_vertical(coords, values, groups, lag=vertical_lag, max_lag=max_vertical_lag),
        experimental_horizontal(
            coords,
            values,
            groups,
            lags=lags,
            elevation_tolerance=elevation_tolerance,
            max_lag=max_lag,
        ),
    )


def _check_fit(
    coords: np.ndarray, detrend: str, model: str, kinds: tuple[str, ...]
) -> tuple[str, ...]:
    """Check the inputs of :func:`fit_anisotropic`; return the kinds to try."""
    if coords.shape[1] != 3:
        msg = f"coordinates must be (n, 3) x, y, z; got {coords.shape}"
        raise ModelError(msg)
    if detrend not in ("none", "linear_z"):
        msg = f"detrend {detrend!r} is unknown; expected 'none' or 'linear_z'"
        raise ModelError(msg)
    tried = tuple(kinds) if model == "auto" else (model,)
    for k in tried:
        if k not in KINDS:
            msg = f"variogram model {k!r} is unknown; expected 'auto' or one of {KINDS}"
            raise ModelError(msg)
    return tried


def _fit_directions(
    horizontal: pd.DataFrame,
    vertical: pd.DataFrame,
    tried: tuple[str, ...],
    *,
    range_h: float | None,
    range_v: float | None,
) -> tuple[dict[str, float], str, tuple[float, float, float, float]]:
    """Fit each kind to both directions at once and keep the best.

    Returns the misfit of each kind, the best kind and its ``(nugget, sill, range_h,
    range_v)``.
    """
    if len(horizontal) + len(vertical) < 4:
        msg = (
            f"too few lag bins to fit a variogram ({len(vertical)} vertical, "
            f"{len(horizontal)} horizontal); need more borings or samples"
        )
        raise ModelError(msg)
    if len(horizontal) and len(vertical):
        series = [(horizontal, 0), (vertical, 1)]
        fixed = {i: float(r) for i, r in ((0, range_h), (1, range_v)) if r is not None}
    else:
        only = "vertical" if len(vertical) else "horizontal"
        given = range_v if len(vertical) else range_h
        warnings.warn(
            f"only {only} pairs: the other range cannot be fitted and is set equal to this one "
            "unless given",
            Geo3dWarning,
            stacklevel=3,
        )
        series = [(vertical if len(vertical) else horizontal, 0)]
        fixed = {0: float(given)} if given is not None else {}
    candidates: dict[str, float] = {}
    results = {}
    for k in tried:
        params, rmse = _fit(series, kind=k, fit_nugget=True, nu=1.5, fixed_ranges=fixed)
        candidates[k] = rmse
        results[k] = params
    best = min(candidates, key=candidates.__getitem__)
    p = results[best]
    if len(series) == 2:
        rh, rv = p[2], p[3]
    elif len(vertical):
        rh, rv = (range_h if range_h is not None else p[2]), p[2]
    else:
        rh, rv = p[2], (range_v if range_v is not None else p[2])
    return candidates, best, (float(p[0]), float(p[1]), float(rh), float(rv))


def _boring_spacing(z: np.ndarray, groups: np.ndarray) -> tuple[float, float]:
    """Median vertical sample spacing and largest boring length."""
    steps, lengths = [], []
    for g in pd.unique(groups):
        zz = np.sort(z[groups == g])
        if len(zz) > 1:
            d = np.diff(zz)
            steps.append(d[d > 0])
            lengths.append(zz[-1] - zz[0])
    if not lengths or not np.concatenate(steps).size:
        msg = "a vertical variogram needs at least one boring with two samples at different z"
        raise ModelError(msg)
    spacing = float(np.median(np.concatenate(steps)))
    length = float(max(lengths))
    # At most 50 vertical bins.
    return max(spacing, 0.5 * length / 50.0), length
