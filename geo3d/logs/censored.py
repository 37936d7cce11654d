"""Injection ratios over a slug-test screen when some samples are beyond the probe's range.

A slug test measures the arithmetic mean K of its screen (flow through parallel layers), so the
calibration compares it with the mean injection ratio ``Q/P_net`` of the log samples there.
Two kinds of sample do not give that ratio directly:

* near the pressure floor (permeable soil), the net pressure is a few times the sensor noise:
  ``1/P_net`` is then biased upward by the noise (Jensen's inequality) and readings at or below
  zero give no ratio at all; dropping them, or setting them at their bound, leaves the screen
  mean too low;
* at the pressure limit or the flow floor (tight soil), the ratio is only known to be below a
  bound (censored).

Within one screen the log10 ratios ``x`` are taken as normal, ``N(mu, s)``.  ``mu`` and ``s`` are
fitted by maximum likelihood over all samples of the screen: resolved samples by their density,
samples near the floor by the likelihood of their recorded net pressure under the noise model
``P_net = Q / 10**x + e``, ``e ~ N(0, sigma)`` (integrated over ``x`` by Gauss-Hermite
quadrature), and censored samples by the probability of lying beyond their bound (Tobit).  Each
unresolved sample then enters the screen mean with its expected ratio given its reading.

References
----------
.. [1] Tobin, J. (1958) Estimation of relationships for limited dependent variables.
   Econometrica 26(1): 24-36 (censored normal likelihood).
.. [2] Helsel, D.R. (2012) Statistics for Censored Environmental Data Using Minitab and R, 2nd
   ed. Wiley (maximum likelihood for values beyond a reporting limit).
.. [3] Golub, G.H., Welsch, J.H. (1969) Calculation of Gauss quadrature rules. Math. Comp. 23:
   221-230.
"""

from __future__ import annotations

import logging
import warnings
from dataclasses import dataclass

import numpy as np
import pandas as pd
from scipy.optimize import minimize
from scipy.special import log_ndtr, logsumexp
from scipy.stats import norm

from geo3d.errors import Geo3dWarning

__all__ = ["ScreenFit", "fit_screen", "screen_ratios"]

logger = logging.getLogger(__name__)

_LN10 = np.log(10.0)
_NODES, _WEIGHTS = np.polynomial.hermite.hermgauss(48)
_LOG_PRIOR = np.log(_WEIGHTS / np.sqrt(np.pi))


@dataclass(frozen=True)
class ScreenFit:
    """Distribution of log10 Q/P_net over one screen and each sample's expected ratio.

    Attributes
    ----------
    mu, s
        Mean and SD of log10 Q/P_net (m3/s/kPa) over the screen.
    ratio
        Expected Q/P_net of each sample: the reading where resolved, else its expectation
        given the reading (noise model) or the bound (censored).
    unresolved_fraction
        Share of the screen's samples that were not resolved.
    """

    mu: float
    s: float
    ratio: np.ndarray
    unresolved_fraction: float


def _noisy_loglik(x_nodes: np.ndarray, p_net: np.ndarray, flow: np.ndarray, sigma: float):
    # log N(p; Q 10**-x, sigma) at every (sample, node)
    predicted = flow[:, None] * 10.0 ** (-x_nodes[None, :])
    return norm.logpdf(p_net[:, None], loc=predicted, scale=sigma)


def _expected_ratios(p, q, x, c, resolved, tight, noisy, *, mu: float, s: float, sigma: float):
    """Return the expected Q/P_net of each sample given its reading and the screen's law."""
    ratio = np.full(p.size, np.nan)
    ratio[resolved] = 10.0 ** x[resolved]
    if noisy.any():
        nodes = mu + np.sqrt(2.0) * s * _NODES
        ll = _noisy_loglik(nodes, p[noisy], q[noisy], sigma) + _LOG_PRIOR[None, :]
        posterior = np.exp(ll - logsumexp(ll, axis=1)[:, None])
        ratio[noisy] = posterior @ (10.0**nodes)
    if tight.any():
        # E[10**x | x <= c] for x ~ N(mu, s) (mean of a truncated lognormal)
        z = (c[tight] - mu) / s
        log_mean = mu * _LN10 + 0.5 * (s * _LN10) ** 2
        log_share = log_ndtr(z - s * _LN10) - log_ndtr(z)
        ratio[tight] = np.exp(log_mean + log_share)
    return ratio


def fit_screen(
    p_net,
    flow,
    *,
    resolved,
    censored_below,
    sensor_noise: float,
) -> ScreenFit:
    """Fit the screen's distribution of log10 Q/P_net and each sample's expected ratio.

    Parameters
    ----------
    p_net
        Net injection pressure of each sample, kPa (any sign).
    flow
        Injection flow, m3/s.
    resolved
        Boolean: the sample's ratio ``Q/P_net`` is taken as read (net pressure well above the
        noise).
    censored_below
        Upper bound of the ratio of samples too tight to resolve (censored: the true ratio is
        at most this), NaN for the others.  Samples neither resolved nor censored are read
        through the noise model.
    sensor_noise
        SD of the pressure noise, kPa.

    Returns
    -------
    ScreenFit

    References
    ----------
    .. [1] Tobin (1958); Helsel (2012); Golub & Welsch (1969).
    """
    p = np.asarray(p_net, dtype=float)
    q = np.asarray(flow, dtype=float)
    resolved = np.asarray(resolved, dtype=bool) & (p > 0) & (q > 0)
    bound = np.asarray(censored_below, dtype=float)
    tight = ~resolved & np.isfinite(bound) & (bound > 0)
    noisy = ~resolved & ~tight & np.isfinite(p) & (q > 0)
    x = np.full(p.size, np.nan)
    with np.errstate(divide="ignore", invalid="ignore"):
        x[resolved] = np.log10(q[resolved] / p[resolved])
        c = np.where(tight, np.log10(bound), np.nan)
    sigma = float(sensor_noise)

    def negative_loglik(theta: np.ndarray) -> float:
        mu, log_s = theta
        s = np.exp(log_s)
        total = np.sum(norm.logpdf(x[resolved], mu, s))
        total += np.sum(log_ndtr((c[tight] - mu) / s))
        if noisy.any():
            nodes = mu + np.sqrt(2.0) * s * _NODES
            ll = _noisy_loglik(nodes, p[noisy], q[noisy], sigma) + _LOG_PRIOR[None, :]
            total += np.sum(logsumexp(ll, axis=1))
        return -float(total)

    # start from a rough guess: the resolved samples, or the noisy samples' mean pressure
    if resolved.any():
        start_mu = float(np.mean(x[resolved]))
    elif noisy.any():
        start_mu = float(np.log10(np.mean(q[noisy]) / max(np.mean(p[noisy]), sigma)))
    else:
        start_mu = float(np.mean(c[tight])) - 0.5
    result = minimize(
        negative_loglik,
        x0=np.array([start_mu, np.log(0.2)]),
        method="L-BFGS-B",
        bounds=[(start_mu - 4.0, start_mu + 4.0), (np.log(0.01), np.log(2.0))],
    )
    mu, s = float(result.x[0]), float(np.exp(result.x[1]))
    ratio = _expected_ratios(p, q, x, c, resolved, tight, noisy, mu=mu, s=s, sigma=sigma)
    used = resolved | tight | noisy
    unresolved = float((used & ~resolved).sum() / max(used.sum(), 1))
    return ScreenFit(mu, s, ratio, unresolved)


def _warn_left_out(test, share: float, limit: float) -> None:
    warnings.warn(
        f"slug test in boring {test.boring_id} ({test.top_depth:g}-{test.bottom_depth:g} m): "
        f"{share:.0%} of the log samples over its screen are beyond the probe's range, more "
        f"than {limit:.0%}; left out of the calibration",
        Geo3dWarning,
        stacklevel=3,
    )


def screen_ratios(
    samples: pd.DataFrame,
    slug_tests: pd.DataFrame | None,
    *,
    resolved,
    censored_below,
    usable,
    beyond,
    sensor_noise: float,
    max_beyond_fraction: float = 0.8,
) -> tuple[np.ndarray, pd.DataFrame | None]:
    """Compute the expected injection ratio of every sample inside a slug-test screen.

    Each screen is fitted with :func:`fit_screen`.  Screens where more than
    ``max_beyond_fraction`` of the samples are ``beyond`` the probe's range are left out of the
    calibration with a :class:`Geo3dWarning`: their mean would rest on the assumed distribution
    more than on readings.

    Parameters
    ----------
    samples
        ``boring_id, depth, p_net, flow`` (kPa, m3/s).
    slug_tests
        ``boring_id, top_depth, bottom_depth, k``; may be None or empty.
    resolved, censored_below
        Per sample, see :func:`fit_screen`.
    usable, beyond
        Samples that may enter a screen (e.g. below the water table); samples flagged beyond
        the probe's range (too permeable or too tight).
    sensor_noise, max_beyond_fraction
        kPa; 0..1.

    Returns
    -------
    ratio : ndarray
        Expected Q/P_net per sample inside a kept screen, NaN elsewhere.
    slug_tests : DataFrame or None
        The slug tests kept.
    """
    ratio = np.full(len(samples), np.nan)
    if slug_tests is None or len(slug_tests) == 0:
        return ratio, slug_tests
    boring = samples["boring_id"].astype(str).to_numpy()
    depth = samples["depth"].to_numpy(dtype=float)
    p_net = samples["p_net"].to_numpy(dtype=float)
    flow = samples["flow"].to_numpy(dtype=float)
    resolved = np.asarray(resolved, dtype=bool)
    bound = np.asarray(censored_below, dtype=float)
    usable = np.asarray(usable, dtype=bool)
    beyond = np.asarray(beyond, dtype=bool)
    keep = []
    for test in slug_tests.itertuples(index=False):
        inside = np.flatnonzero(
            usable
            & (boring == str(test.boring_id))
            & (depth >= test.top_depth)
            & (depth <= test.bottom_depth)
        )
        if inside.size == 0:
            keep.append(True)  # the calibration says there are too few samples
            continue
        fit = fit_screen(
            p_net[inside],
            flow[inside],
            resolved=resolved[inside],
            censored_below=bound[inside],
            sensor_noise=sensor_noise,
        )
        share = float(beyond[inside].mean())
        if share > max_beyond_fraction:
            _warn_left_out(test, share, max_beyond_fraction)
            keep.append(False)
            continue
        keep.append(True)
        ratio[inside] = fit.ratio
    return ratio, slug_tests[np.array(keep, dtype=bool)].reset_index(drop=True)
