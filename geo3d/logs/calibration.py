"""Log-derived hydraulic conductivity and its calibration against slug tests.

Steady injection through a probe screen of Hvorslev shape factor ``F`` gives
``K = Q * gamma_w / (F * P_net)``, that is ``log10 K = a + b * log10(Q/P_net)`` with
``a = log10(gamma_w / F)`` and ``b = 1``.  In practice ``F`` is an effective factor (skin,
anisotropy, partial saturation), so where slug tests exist ``a`` and ``b`` are fitted to them:
each slug test, which measures K over its screen, is compared with the arithmetic mean of the
predicted K of the log samples over that screen (flow through parallel layers), and the misfit
``log10 K_slug - log10 mean(K_pred)`` is minimised by nonlinear least squares.

References
----------
.. [1] Hvorslev, M.J. (1951) Time lag and soil permeability in ground-water observations.
   US Army Corps of Engineers, Waterways Experiment Station, Bulletin 36.
.. [2] Dietrich, P., Butler, J.J., Faiss, K. (2008) A rapid method for hydraulic profiling in
   unconsolidated formations. Ground Water 46(2): 323-328 (injection ratio calibrated to
   slug tests).
"""

from __future__ import annotations

import logging
import warnings
from dataclasses import asdict, dataclass, field

import numpy as np
import pandas as pd
from scipy.optimize import curve_fit
from scipy.special import logsumexp
from scipy.stats import t as student_t

from geo3d.errors import Geo3dWarning
from geo3d.logs.hydraulic import GAMMA_W

__all__ = [
    "Calibration",
    "PHYSICS_ERROR",
    "physics_coefficients",
    "calibrate",
    "screen_samples",
]

logger = logging.getLogger(__name__)

_LN10 = np.log(10.0)


def physics_coefficients(shape_factor_m: float) -> tuple[float, float]:
    """Coefficients ``(a, b)`` of ``log10 K = a + b*log10(Q/P_net)`` from physics alone.

    ``a = log10(gamma_w / F)``, ``b = 1`` (Q in m3/s, P_net in kPa, F in m, K in m/s).

    References
    ----------
    .. [1] Hvorslev (1951), steady injection.

    Examples
    --------
    >>> a, b = physics_coefficients(9.80665)
    >>> round(a, 12), b
    (0.0, 1.0)
    """
    return float(np.log10(GAMMA_W / shape_factor_m)), 1.0


@dataclass
class Calibration:
    """Coefficients of ``log10 K = a + b*log10(Q/P_net)`` and how they were found.

    Attributes
    ----------
    method
        ``"slug_tests"`` (fitted) or ``"physics"`` (Hvorslev shape factor, ``b = 1``).
    a, b
        Coefficients.
    se_a, se_b
        Standard errors from the fit's covariance (NaN for physics).
    n_tests
        Number of slug tests the fit rests on.
    r2
        Coefficient of determination in log10 K over the slug tests (NaN when undefined).
    residuals
        One dict per slug test: ``boring_id, top_depth, bottom_depth, k_slug, k_predicted,
        log10_residual`` (slug minus predicted), ``n_samples``.
    slope_fixed
        True when ``b`` was held at the physical value 1 and only ``a`` was fitted.
    """

    method: str
    a: float
    b: float
    se_a: float = float("nan")
    se_b: float = float("nan")
    n_tests: int = 0
    r2: float = float("nan")
    residuals: list[dict] = field(default_factory=list)
    slope_fixed: bool = False

    def log10_k(self, q_over_p) -> np.ndarray:
        """Log10 K (m/s) from the injection ratio Q/P_net (m3/s/kPa); NaN where it is <= 0."""
        ratio = np.asarray(q_over_p, dtype=float)
        with np.errstate(divide="ignore", invalid="ignore"):
            out = np.where(ratio > 0, self.a + self.b * np.log10(ratio), np.nan)
        return out

    def as_dict(self) -> dict:
        """Plain dict for JSON output."""
        return asdict(self)

    def log10_k_error(self) -> tuple[float, float]:
        """Return the error ``(offset, scatter)`` of the log-derived log10 K (log10 m/s).

        ``offset`` is the error of the site-wide level, shared by every sample: the standard
        error of the mean slug-test residual, ``s / sqrt(n)``.  ``scatter`` is the error of one
        value about that level: the residual standard deviation ``s`` of the slug tests about
        the calibration (``n - p`` degrees of freedom, ``p`` fitted coefficients).  Without a
        fit (physics alone, or fewer than ``p + 1`` tests) both take the values
        :data:`PHYSICS_ERROR` (from memory: injection-logging K estimates from a nominal shape
        factor typically lie within a factor of about 3 of slug-test K, and scatter by about a
        factor of 2 about that level).

        Returns
        -------
        tuple of float
            ``(offset_sd, scatter_sd)`` in log10 units.

        References
        ----------
        .. [1] Dietrich et al. (2008), comparison of injection-logging and slug-test K.
        .. [2] Draper, N.R., Smith, H. (1998) Applied Regression Analysis, 3rd ed. Wiley,
           sec. 1.4 (residual variance, standard error of the mean response).

        Examples
        --------
        >>> Calibration("physics", 0.0, 1.0).log10_k_error() == PHYSICS_ERROR
        True
        """
        residuals = np.array([r["log10_residual"] for r in self.residuals], dtype=float)
        n_fitted = 1 if self.slope_fixed else 2
        if self.method != "slug_tests" or residuals.size <= n_fitted:
            return PHYSICS_ERROR
        scatter = float(np.sqrt(np.sum(residuals**2) / (residuals.size - n_fitted)))
        return scatter / float(np.sqrt(residuals.size)), scatter


#: ``(offset, scatter)`` standard deviations of log10 K estimated from physics alone (from
#: memory; see :meth:`Calibration.log10_k_error`).
PHYSICS_ERROR: tuple[float, float] = (0.5, 0.3)


def screen_samples(
    samples: pd.DataFrame, slug_tests: pd.DataFrame, *, usable: np.ndarray | None = None
) -> list[np.ndarray]:
    """Log10 of the injection ratio of the usable samples inside each slug-test screen.

    Parameters
    ----------
    samples
        Columns ``boring_id, depth, q_over_p``.
    slug_tests
        Columns ``boring_id, top_depth, bottom_depth, k``.
    usable
        Boolean mask of samples fit for K (not flagged); all when None.

    Returns
    -------
    list of ndarray
        One array per slug test (possibly empty).
    """
    ok = np.ones(len(samples), bool) if usable is None else np.asarray(usable, bool)
    ratio = samples["q_over_p"].to_numpy(dtype=float)
    ok = ok & np.isfinite(ratio) & (ratio > 0)
    boring = samples["boring_id"].to_numpy()
    depth = samples["depth"].to_numpy(dtype=float)
    out = []
    for test in slug_tests.itertuples(index=False):
        inside = (
            ok
            & (boring == test.boring_id)
            & (depth >= test.top_depth)
            & (depth <= test.bottom_depth)
        )
        out.append(np.log10(ratio[inside]))
    return out


def _screen_prediction(groups: list[np.ndarray], a: float, b: float) -> np.ndarray:
    # log10 of the arithmetic mean of 10**(a + b*x) over each screen, computed stably
    return np.array(
        [a + (logsumexp(b * x * _LN10) - np.log(x.size)) / _LN10 for x in groups], dtype=float
    )


def _residual_table(slug_tests, groups, predicted, *, physics: tuple[float, float]) -> list[dict]:
    # k_physics: the same screen mean with the physical coefficients (b = 1), for plotting
    physics_predicted = _screen_prediction(groups, *physics) if groups else np.array([])
    rows = []
    for test, x, pred, phys in zip(
        slug_tests.itertuples(index=False), groups, predicted, physics_predicted, strict=True
    ):
        rows.append(
            {
                "boring_id": str(test.boring_id),
                "top_depth": float(test.top_depth),
                "bottom_depth": float(test.bottom_depth),
                "k_slug": float(test.k),
                "k_predicted": float(10.0**pred),
                "k_physics": float(10.0**phys),
                "log10_residual": float(np.log10(test.k) - pred),
                "n_samples": int(x.size),
            }
        )
    return rows


def _r2(observed: np.ndarray, predicted: np.ndarray) -> float:
    if observed.size < 2:
        return float("nan")
    total = np.sum((observed - observed.mean()) ** 2)
    if total == 0:
        return float("nan")
    return float(1.0 - np.sum((observed - predicted) ** 2) / total)


def calibrate(
    samples: pd.DataFrame,
    slug_tests: pd.DataFrame | None,
    *,
    shape_factor_m: float,
    min_slug_tests: int = 3,
    usable: np.ndarray | None = None,
    min_samples_per_test: int = 3,
    slope: str = "auto",
) -> Calibration:
    """Fit ``log10 K = a + b*log10(Q/P_net)`` to slug tests, or fall back to physics.

    Parameters
    ----------
    samples
        Per-sample table with ``boring_id, depth, q_over_p`` (m3/s/kPa).
    slug_tests
        ``boring_id, top_depth, bottom_depth, k`` (m, m/s); may be None or empty.
    shape_factor_m
        Hvorslev shape factor of the screen, m (start point and physics fallback).
    min_slug_tests
        With fewer usable slug tests than this (and never fewer than 2), physics is used, with
        a :class:`Geo3dWarning`.
    usable
        Boolean mask of samples fit for K (e.g. not above water, not out of range).
    min_samples_per_test
        Slug tests whose screen holds fewer usable samples are left out (with a warning).
    slope
        ``"free"`` fits ``a`` and ``b``; ``"fixed"`` holds ``b = 1`` (physics) and fits ``a``;
        ``"auto"`` keeps a fitted ``b`` only when it differs from 1 significantly (a two-sided
        t-test at 95 % with ``n - 2`` degrees of freedom): a few slug tests rarely determine
        the slope.

    Returns
    -------
    Calibration

    References
    ----------
    .. [1] Hvorslev (1951); Dietrich et al. (2008).
    """
    a0, b0 = physics_coefficients(shape_factor_m)
    if slug_tests is None or len(slug_tests) == 0:
        warnings.warn(
            "no slug tests: log-derived K rests on the probe's shape factor alone (physics)",
            Geo3dWarning,
            stacklevel=2,
        )
        return Calibration("physics", a0, b0)
    tests, groups = _usable_tests(samples, slug_tests, usable, min_samples_per_test)
    observed = np.log10(tests["k"].to_numpy(dtype=float))
    needed = max(int(min_slug_tests), 2)
    if len(groups) < needed:
        reason = (
            f"{len(groups)} usable slug test(s), fewer than {needed}: log-derived K rests on "
            "the probe's shape factor alone (physics)"
        )
        return _physics(tests, groups, observed, (a0, b0), reason=reason)
    a, b, se, fixed = _fit(groups, observed, (a0, b0), slope=slope)
    if not b > 0:
        reason = (
            f"slug-test calibration gave slope b = {b:.3f} <= 0 (K falling as Q/P rises); "
            "using physics instead"
        )
        return _physics(tests, groups, observed, (a0, b0), reason=reason)
    predicted = _screen_prediction(groups, a, b)
    result = Calibration(
        "slug_tests",
        a,
        b,
        float(se[0]),
        float(se[1]),
        len(groups),
        _r2(observed, predicted),
        _residual_table(tests, groups, predicted, physics=(a0, b0)),
        slope_fixed=fixed,
    )
    _log_fit(result)
    return result


def _log_fit(result: Calibration) -> None:
    logger.info(
        "calibration on %d slug tests: a=%.3f+-%.3f b=%.3f+-%.3f r2=%.3f",
        result.n_tests,
        result.a,
        result.se_a,
        result.b,
        result.se_b,
        result.r2,
    )


def _usable_tests(
    samples: pd.DataFrame,
    slug_tests: pd.DataFrame,
    usable: np.ndarray | None,
    min_samples_per_test: int,
) -> tuple[pd.DataFrame, list[np.ndarray]]:
    """Return the slug tests with enough usable samples over their screen, and the samples."""
    tests = slug_tests.reset_index(drop=True)
    groups = screen_samples(samples, tests, usable=usable)
    keep = np.array([g.size >= min_samples_per_test for g in groups], dtype=bool)
    for test, kept in zip(tests.itertuples(index=False), keep, strict=True):
        if not kept:
            warnings.warn(
                f"slug test in boring {test.boring_id} "
                f"({test.top_depth:g}-{test.bottom_depth:g} m): "
                f"fewer than {min_samples_per_test} usable log samples over its screen; left out",
                Geo3dWarning,
                stacklevel=3,
            )
    tests = tests[keep].reset_index(drop=True)
    return tests, [g for g, kept in zip(groups, keep, strict=True) if kept]


def _physics(
    tests: pd.DataFrame,
    groups: list[np.ndarray],
    observed: np.ndarray,
    physics: tuple[float, float],
    *,
    reason: str,
) -> Calibration:
    """Warn why, and return the physics-only calibration with its misfit to the slug tests."""
    warnings.warn(reason, Geo3dWarning, stacklevel=3)
    a0, b0 = physics
    predicted = _screen_prediction(groups, a0, b0) if groups else np.array([])
    return Calibration(
        "physics",
        a0,
        b0,
        n_tests=len(groups),
        r2=_r2(observed, predicted),
        residuals=_residual_table(tests, groups, predicted, physics=physics),
    )


def _slope_test(n_tests: int) -> float:
    """Two-sided 95 % Student t quantile for a slope fitted to ``n_tests`` tests (n - 2 dof).

    With few tests the slope's standard error is itself uncertain; the normal quantile (about
    2) would keep a slope that only noise bent (Draper & Smith 1998, sec. 3.1).
    """
    return float(student_t.ppf(0.975, max(n_tests - 2, 1)))


def _fit(
    groups: list[np.ndarray],
    observed: np.ndarray,
    start: tuple[float, float],
    *,
    slope: str,
) -> tuple[float, float, np.ndarray, bool]:
    """Fit ``a`` (and ``b`` unless held at 1): ``(a, b, standard errors, slope held)``."""
    if slope not in ("auto", "free", "fixed"):
        msg = f"slope: expected 'auto', 'free' or 'fixed', got {slope!r}"
        raise ValueError(msg)
    index = np.arange(len(groups), dtype=float)

    def model(idx: np.ndarray, a: float, b: float) -> np.ndarray:
        return _screen_prediction([groups[int(i)] for i in idx], a, b)

    a, b = start
    se = np.array([np.nan, np.nan])
    if slope != "fixed" and len(groups) >= 3:
        params, cov = curve_fit(model, index, observed, p0=start, maxfev=10000)
        a, b = (float(v) for v in params)
        with np.errstate(invalid="ignore"):
            if np.all(np.isfinite(cov)):
                se = np.sqrt(np.diag(cov))
    fixed = slope == "fixed" or len(groups) < 3 or not np.isfinite(se[1])
    if slope == "auto" and not fixed and abs(b - 1.0) <= _slope_test(len(groups)) * se[1]:
        fixed = True
    if fixed:
        offsets = observed - _screen_prediction(groups, 0.0, 1.0)
        a, b = float(offsets.mean()), 1.0
        se_a = float(offsets.std(ddof=1) / np.sqrt(offsets.size)) if offsets.size > 1 else np.nan
        se = np.array([se_a, np.nan])
        logger.info("slope held at b = 1 (not determined by %d slug tests)", len(groups))
    return a, b, se, fixed
