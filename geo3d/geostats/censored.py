"""Normal laws fitted to censored data, and censored values replaced by their expectations.

Log-derived K below (or above) the probe's resolution is known only as an inequality: at or
beyond a bound.  :func:`fit_censored_normal` fits the mean and standard deviation of a normal
law to exact and censored values together by maximum likelihood (the Tobit model), and
:func:`censored_expectation` gives each censored value its conditional expectation beyond its
bound, ``E[X | X <= b] = mu - sigma phi(z) / Phi(z)`` (``z = (b - mu) / sigma``) for a value
known to be at most ``b``, and ``E[X | X >= b] = mu + sigma phi(z) / (1 - Phi(z))`` for one known
to be at least ``b``.

References
----------
.. [1] Tobin, J. (1958) Estimation of relationships for limited dependent variables.
   Econometrica 26(1): 24-36.
.. [2] Johnson, N.L., Kotz, S., Balakrishnan, N. (1994) Continuous Univariate Distributions,
   vol. 1, 2nd ed. Wiley, sec. 10.1 (moments of the truncated normal law).
"""

from __future__ import annotations

import numpy as np
from scipy.optimize import minimize
from scipy.stats import norm

__all__ = ["fit_censored_normal", "censored_expectation"]


def fit_censored_normal(
    values: np.ndarray, censored: np.ndarray | None = None
) -> tuple[float, float]:
    """Fit ``(mu, sigma)`` to values some of which are bounds.

    Parameters
    ----------
    values
        Exact values, and the bound of each censored one.
    censored
        Per value ``""`` (exact), ``"upper"`` (the true value is at most the bound) or
        ``"lower"`` (at least the bound); None = all exact.

    Returns
    -------
    tuple of float
        Mean and standard deviation (at least 1e-3).  With fewer than two exact values the
        spread cannot be estimated: the mean of the values and a standard deviation of 1e-3
        are returned, so that censored values stay at their bounds.
    """
    x = np.asarray(values, float)
    kind = np.full(x.size, "", dtype=object) if censored is None else np.asarray(censored)
    upper, lower = kind == "upper", kind == "lower"
    exact = ~(upper | lower)
    start_sd = float(np.std(x)) if x.size > 1 and np.std(x) > 0 else 0.3
    if exact.all() or x.size < 3:
        return float(np.mean(x)), max(start_sd, 1e-3)
    if exact.sum() < 2:
        return float(np.mean(x)), 1e-3

    def nll(theta: np.ndarray) -> float:
        mu, log_sd = theta
        sd = np.exp(log_sd)
        total = -norm.logpdf(x[exact], mu, sd).sum()
        total -= norm.logcdf(x[upper], mu, sd).sum()
        total -= norm.logsf(x[lower], mu, sd).sum()
        return float(total)

    result = minimize(
        nll, np.array([np.mean(x), np.log(max(start_sd, 1e-2))]), method="Nelder-Mead"
    )
    mu, log_sd = result.x
    return float(mu), float(max(np.exp(log_sd), 1e-3))


def censored_expectation(
    values: np.ndarray, censored: np.ndarray, mu: float, sigma: float
) -> np.ndarray:
    """Replace each censored value by its conditional expectation beyond its bound.

    Examples
    --------
    >>> round(float(censored_expectation(np.array([0.0]), np.array(["upper"]), 0.0, 1.0)[0]), 4)
    -0.7979
    """
    x = np.asarray(values, float).copy()
    kind = np.asarray(censored)
    z = (x - mu) / sigma
    upper, lower = kind == "upper", kind == "lower"
    x[upper] = mu - sigma * norm.pdf(z[upper]) / np.maximum(norm.cdf(z[upper]), 1e-300)
    x[lower] = mu + sigma * norm.pdf(z[lower]) / np.maximum(norm.sf(z[lower]), 1e-300)
    return x
