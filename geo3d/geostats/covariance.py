"""Covariance models with geometric anisotropy.

Coordinates are ``(x, y, z)`` in the site CRS with z the elevation, upward. A model is a nugget
plus one normalised correlation function of the *scaled* distance ``h`` (dimensionless, 1 at the
range): the coordinates are rotated so that the horizontal major axis lies along the azimuth
(degrees clockwise from north), then divided by the major horizontal range, the minor horizontal
range and the vertical range.

Ranges are *practical* ranges: the spherical model reaches the sill at the range, the
exponential and Gaussian models reach 95 % of it there (Journel and Huijbregts, 1978), the
Matern model is scaled so that its correlation is 0.05 at the range.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass

import numpy as np
from scipy import optimize, special

from geo3d.errors import ModelError

__all__ = ["KINDS", "CovarianceModel", "correlation"]

KINDS = ("exponential", "spherical", "gaussian", "matern")

#: Distances (scaled) at or below this count as zero: the nugget applies there.
ZERO_DISTANCE = 1e-12


@functools.lru_cache(maxsize=64)
def _matern_scale(nu: float) -> float:
    """Return ``s`` such that the Matern correlation of smoothness ``nu`` is 0.05 at ``r = 1``."""

    def excess(s: float) -> float:
        return float(_matern_unit(np.array([s]), nu)[0]) - 0.05

    return float(optimize.brentq(excess, 1e-3, 50.0, xtol=1e-14))


def _matern_unit(u: np.ndarray, nu: float) -> np.ndarray:
    """Matern correlation ``2^(1-nu)/Gamma(nu) u^nu K_nu(u)`` (1 at ``u = 0``)."""
    u = np.asarray(u, dtype=float)
    out = np.ones_like(u)
    # Below 1e-12 the correlation is 1 to double precision (and u^nu K_nu(u) under/overflows).
    pos = u > 1e-12
    up = u[pos]
    with np.errstate(over="ignore", invalid="ignore", under="ignore"):
        val = 2.0 ** (1.0 - nu) / special.gamma(nu) * up**nu * special.kv(nu, up)
    out[pos] = np.nan_to_num(val, nan=0.0, posinf=0.0)
    return out


def correlation(kind: str, h: np.ndarray, *, nu: float = 1.5) -> np.ndarray:
    """Normalised correlation of a model at scaled distance ``h`` (range = 1).

    Parameters
    ----------
    kind
        One of ``'exponential'``, ``'spherical'``, ``'gaussian'``, ``'matern'``.
    h
        Scaled distances (>= 0), any shape.
    nu
        Matern smoothness (ignored by the other models).

    Returns
    -------
    numpy.ndarray
        Correlation in [0, 1], same shape as ``h``; 1 at ``h = 0``.

    References
    ----------
    Journel, A.G. and Huijbregts, C.J. (1978). Mining Geostatistics. Academic Press, ch. II
    (spherical, exponential and Gaussian models with practical range).
    Stein, M.L. (1999). Interpolation of Spatial Data. Springer, sec. 2.7 (Matern class).

    Examples
    --------
    >>> float(correlation("spherical", np.array(0.5)))
    0.3125
    """
    h = np.asarray(h, dtype=float)
    if kind == "exponential":
        return np.exp(-3.0 * h)
    if kind == "spherical":
        hc = np.minimum(h, 1.0)
        return 1.0 - 1.5 * hc + 0.5 * hc**3
    if kind == "gaussian":
        return np.exp(-3.0 * h * h)
    if kind == "matern":
        return _matern_unit(_matern_scale(float(nu)) * h, float(nu))
    msg = f"covariance model kind {kind!r} is unknown; expected one of {', '.join(KINDS)}"
    raise ModelError(msg)


@dataclass(frozen=True)
class CovarianceModel:
    """Nugget plus one anisotropic covariance structure.

    Parameters
    ----------
    kind
        ``'exponential'``, ``'spherical'``, ``'gaussian'`` or ``'matern'``.
    sill
        Partial sill (variance of the structured part), in squared data units.
    nugget
        Nugget (variance of the unstructured part).
    range_h
        Practical range along the horizontal major axis, m.
    range_v
        Practical vertical range, m.
    azimuth
        Direction of the horizontal major axis, degrees clockwise from north (+y).
    minor_ratio
        Minor / major horizontal range (0 < ratio <= 1 usually; any positive value works).
    nu
        Matern smoothness.

    References
    ----------
    Journel, A.G. and Huijbregts, C.J. (1978). Mining Geostatistics. Academic Press, sec. II.B
    (geometric anisotropy by a linear transform of the coordinates).
    """

    kind: str
    sill: float = 1.0
    nugget: float = 0.0
    range_h: float = 1.0
    range_v: float = 1.0
    azimuth: float = 0.0
    minor_ratio: float = 1.0
    nu: float = 1.5

    def __post_init__(self) -> None:
        if self.kind not in KINDS:
            msg = f"covariance model kind {self.kind!r} is unknown; expected one of {KINDS}"
            raise ModelError(msg)
        for name in ("sill", "range_h", "range_v", "minor_ratio", "nu"):
            value = getattr(self, name)
            if not (math.isfinite(value) and value > 0):
                msg = f"covariance model {name} must be a positive finite number, got {value!r}"
                raise ModelError(msg)
        if not (math.isfinite(self.nugget) and self.nugget >= 0):
            msg = f"covariance model nugget must be >= 0, got {self.nugget!r}"
            raise ModelError(msg)
        if not math.isfinite(self.azimuth):
            msg = f"covariance model azimuth must be finite, got {self.azimuth!r}"
            raise ModelError(msg)

    @property
    def total_sill(self) -> float:
        """Covariance at zero distance: sill plus nugget."""
        return self.sill + self.nugget

    def correlation(self, h: np.ndarray) -> np.ndarray:
        """Normalised correlation of the structured part at scaled distance ``h``."""
        return correlation(self.kind, h, nu=self.nu)

    def covariance(self, h: np.ndarray) -> np.ndarray:
        """Covariance at scaled distance ``h``; the nugget counts only at ``h == 0``.

        Parameters
        ----------
        h
            Distances in anisotropy-scaled space (see :meth:`scaled`), any shape.
        """
        h = np.asarray(h, dtype=float)
        cov = self.sill * self.correlation(h)
        if self.nugget:
            cov = cov + np.where(h <= ZERO_DISTANCE, self.nugget, 0.0)
        return cov

    def variogram(self, h: np.ndarray) -> np.ndarray:
        """Semivariogram at scaled distance ``h``: ``total_sill - covariance(h)``."""
        return self.total_sill - self.covariance(h)

    def rotation(self) -> np.ndarray:
        """3x3 matrix mapping ``(x, y, z)`` to (major, minor, vertical) axes."""
        a = math.radians(self.azimuth)
        return np.array(
            [
                [math.sin(a), math.cos(a), 0.0],
                [math.cos(a), -math.sin(a), 0.0],
                [0.0, 0.0, 1.0],
            ]
        )

    def transform(self) -> np.ndarray:
        """3x3 matrix ``T`` with ``scaled = coords @ T.T`` (rotation then division by ranges)."""
        ranges = np.array([self.range_h, self.range_h * self.minor_ratio, self.range_v])
        return self.rotation() / ranges[:, None]

    def scaled(self, coords: np.ndarray) -> np.ndarray:
        """Anisotropy-scaled coordinates: Euclidean distance there is distance / range.

        Parameters
        ----------
        coords
            Array ``(n, 3)`` of x, y, z in m.

        Returns
        -------
        numpy.ndarray
            Array ``(n, 3)``, dimensionless.
        """
        coords = np.asarray(coords, dtype=float)
        if coords.ndim != 2 or coords.shape[1] != 3:
            msg = f"coordinates must be an (n, 3) array of x, y, z; got shape {coords.shape}"
            raise ModelError(msg)
        return coords @ self.transform().T
