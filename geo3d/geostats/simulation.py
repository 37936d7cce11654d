"""Conditional Gaussian simulation by kriging of unconditional residuals.

Each realization is ``Z_c(x) = Z*_data(x) + [U(x) - U*(x)]``: an unconditional Gaussian random
field ``U`` with the model's covariance (gstools' randomization method, evaluated at the data
and at the targets), minus its kriging ``U*`` from its own values at the data locations, added
to the kriging ``Z*`` of the data. The same kriging weights serve the data and every
realization, so one kriging pass (with all realizations as extra value columns) conditions them
all. Realizations reproduce the data at the data locations, have the model's variance far from
the data, and average to the kriging estimate.

The randomization method evaluates the field at any set of points from the same random modes,
so targets are processed in chunks (bounded memory, dask) with results independent of the
chunking. The nugget is simulated as independent Gaussian noise drawn once per realization.
"""

from __future__ import annotations

import functools
import logging
import math
from collections.abc import Callable

import numpy as np
from scipy.spatial import cKDTree

from geo3d.errors import ModelError
from geo3d.geostats.covariance import CovarianceModel, _matern_scale
from geo3d.geostats.kriging import OrdinaryKriging, Scheduler, _chunks, _run_chunks

__all__ = ["conditional_simulation", "unconditional_fields"]

log = logging.getLogger(__name__)


#: Points whose phases are formed together (bounds memory: block x modes).
_POINT_BLOCK = 4096
#: From this many points on a regular lattice, the factorised lattice evaluation is used.
_LATTICE_MIN = 2000
#: Complex elements of one (y rows x x) block of the lattice evaluation (16 bytes each).
_LATTICE_BLOCK = 2_000_000


class _Field:
    """One unconditional realization (structured part, no nugget) by the randomization method.

    ``U(x) = sqrt(sill / N) sum_j R_j cos(k_j . s(x) - phi_j)`` with ``s`` the anisotropy-scaled
    coordinates, wave vectors ``k_j`` drawn from the model's spectral density, Rayleigh
    amplitudes ``R_j`` and uniform phases ``phi_j`` (the same law as ``Z1 cos + Z2 sin``).
    Spectral densities in 3D: Gaussian ``exp(-3 h^2)`` -> normal with variance 6; exponential
    ``exp(-3 h)`` -> multivariate Student t with 1 degree of freedom, scale 3; Matern -> Student t
    with ``2 nu`` degrees of freedom; spherical (the overlap of two balls of diameter = range) ->
    radial density ``(sin u - u cos u)^2 / u^4`` with ``u = |k| / 2``, sampled by inverse CDF.
    Evaluation is a pure function of the points (thread-safe): chunks give the same field.

    References
    ----------
    Heße, F. et al. (2014). Environmental Modelling & Software 55, 32-48.
    Kotz, S. and Nadarajah, S. (2004). Multivariate t distributions and their applications.
    Cambridge University Press (characteristic function of the t distribution, a Matern function).
    """

    def __init__(self, model: CovarianceModel, seed: int, mode_no: int) -> None:
        self.model = model
        rng = np.random.default_rng(int(seed))
        n = int(mode_no)
        z = rng.standard_normal((n, 3))
        if model.kind == "gaussian":
            k = math.sqrt(6.0) * z
        elif model.kind == "exponential":
            k = 3.0 * z / np.abs(rng.standard_normal(n))[:, None]
        elif model.kind == "matern":
            dof = 2.0 * model.nu
            scale = _matern_scale(float(model.nu)) / math.sqrt(dof)
            k = scale * z / np.sqrt(rng.chisquare(dof, n) / dof)[:, None]
        else:
            k = self._spherical_modes(rng, n)
        # Fold the anisotropy transform into the wave vectors: k . (T x) = (T' k) . x.
        self.k = k @ model.transform()
        self.amp = math.sqrt(model.sill / n) * np.sqrt(-2.0 * np.log1p(-rng.random(n)))
        self.phase = rng.uniform(0.0, 2.0 * math.pi, n)

    @staticmethod
    def _spherical_modes(rng: np.random.Generator, n: int) -> np.ndarray:
        """Wave vectors of the spherical model (range 1) by inverse-CDF sampling."""
        u_grid, cdf = _spherical_radial_cdf()
        u = np.interp(rng.random(n) * cdf[-1], cdf, u_grid)
        direction = rng.standard_normal((n, 3))
        direction /= np.linalg.norm(direction, axis=1)[:, None]
        # Ball of diameter 1 (the range): radius 1/2, so |k| = u / (1/2).
        return 2.0 * u[:, None] * direction

    def __call__(self, points: np.ndarray) -> np.ndarray:
        pts = np.asarray(points, dtype=float)
        axes = [np.unique(pts[:, a], return_inverse=True) for a in range(3)]
        n_lattice = int(np.prod([len(u) for u, _ in axes]))
        if len(pts) >= _LATTICE_MIN and n_lattice <= 16 * len(pts):
            return self._on_lattice(axes)
        return self._on_points(pts)

    def _on_points(self, pts: np.ndarray) -> np.ndarray:
        out = np.empty(len(pts))
        for b0 in range(0, len(pts), _POINT_BLOCK):
            b1 = min(len(pts), b0 + _POINT_BLOCK)
            blk = pts[b0:b1]
            # Explicit sum over the 3 axes (no BLAS: tiny inner dimension, and identical
            # results whatever the block size).
            arg = blk[:, 0:1] * self.k[:, 0] - self.phase
            arg += blk[:, 1:2] * self.k[:, 1]
            arg += blk[:, 2:3] * self.k[:, 2]
            np.cos(arg, out=arg)
            arg *= self.amp
            out[b0:b1] = arg.sum(axis=1)
        return out

    def _on_lattice(self, axes: list[tuple[np.ndarray, np.ndarray]]) -> np.ndarray:
        """Points on a regular lattice (voxel centres): ``exp(i k.x)`` factorises by axis.

        ``U[z, y, x] = Re sum_j c_j e^{i kz_j z} e^{i ky_j y} e^{i kx_j x}`` with
        ``c_j = R_j e^{-i phi_j}``: one complex matrix product per block of y rows instead of
        one cosine per point and mode.
        """
        (ux, ix), (uy, iy), (uz, iz) = axes
        ex = np.exp(1j * np.outer(ux, self.k[:, 0]))
        ey = np.exp(1j * np.outer(uy, self.k[:, 1]))
        ez = np.exp(1j * np.outer(uz, self.k[:, 2])) * (self.amp * np.exp(-1j * self.phase))
        nx, n_modes = ex.shape
        lattice = np.empty((len(uz), len(uy), nx))
        step = max(1, _LATTICE_BLOCK // (nx * n_modes))
        for y0 in range(0, len(uy), step):
            y1 = min(len(uy), y0 + step)
            eyx = (ey[y0:y1, None, :] * ex[None, :, :]).reshape(-1, n_modes)
            lattice[:, y0:y1, :] = (ez @ eyx.T).real.reshape(len(uz), y1 - y0, nx)
        return lattice[iz, iy, ix]


@functools.lru_cache(maxsize=1)
def _spherical_radial_cdf() -> tuple[np.ndarray, np.ndarray]:
    """Tabulated CDF of ``(sin u - u cos u)^2 / u^4`` on (0, 1e4] (tail mass ~ 1e-4)."""
    u = np.geomspace(1e-4, 1e4, 400_001)
    dens = (np.sin(u) - u * np.cos(u)) ** 2 / u**4
    cdf = np.concatenate([[0.0], np.cumsum(0.5 * (dens[1:] + dens[:-1]) * np.diff(u))])
    return u, cdf


def _structured_srfs(model: CovarianceModel, seeds: np.ndarray, mode_no: int) -> list[_Field]:
    return [_Field(model, int(s), mode_no) for s in seeds]


def unconditional_fields(
    points: np.ndarray,
    *,
    model: CovarianceModel,
    n_realizations: int,
    seed: int,
    mode_no: int = 1000,
) -> np.ndarray:
    """Unconditional realizations (structured part only) at points ``(m, 3)``.

    Returns
    -------
    numpy.ndarray
        ``(n_realizations, m)``.

    References
    ----------
    Hesse, F., Prykhodko, V., Schlueter, S. and Attinger, S. (2014). Generating random fields
    with a truncated power-law variogram: a comparison of several numerical methods.
    Environmental Modelling & Software 55, 32-48 (randomization method).
    """
    seeds = np.random.SeedSequence(seed).generate_state(n_realizations)
    srfs = _structured_srfs(model, seeds, mode_no)
    return np.array([srf(points) for srf in srfs]).reshape(n_realizations, -1)


def _check_simulation(values: np.ndarray, targets: np.ndarray, n_realizations: int) -> None:
    if n_realizations < 1:
        msg = f"n_realizations must be >= 1, got {n_realizations}"
        raise ModelError(msg)
    if values.ndim != 1:
        msg = f"values must be a 1-D array, got shape {values.shape}"
        raise ModelError(msg)
    if targets.ndim != 2 or targets.shape[1] != 3:
        msg = f"targets must be an (m, 3) array of x, y, z; got {targets.shape}"
        raise ModelError(msg)


def _nugget_noise(
    model: CovarianceModel,
    coords: np.ndarray,
    targets: np.ndarray,
    rng: np.random.Generator,
    n_realizations: int,
) -> tuple[np.ndarray, np.ndarray]:
    """Independent nugget draws at the data and the targets, ``(r, n)`` and ``(r, m)``.

    A target on a datum shares that datum's draw, so the datum is reproduced.
    """
    sd = np.sqrt(model.nugget)
    noise_d = rng.normal(0.0, sd, size=(n_realizations, len(coords)))
    noise_t = rng.normal(0.0, sd, size=(n_realizations, len(targets)))
    dist, near = cKDTree(model.scaled(coords)).query(model.scaled(targets), k=1)
    on = dist <= 1e-12
    noise_t[:, on] = noise_d[:, near[on]]
    return noise_d, noise_t


def _by_columns(
    chunk: Callable[[np.ndarray], tuple[np.ndarray, np.ndarray]],
    targets: np.ndarray,
    n_realizations: int,
    chunk_size: int,
    scheduler: Scheduler,
) -> np.ndarray:
    """Run ``chunk`` on chunks of whole columns; return ``(r, m)`` in the targets' order.

    Targets are sorted by x, y, then z: on a lattice each chunk's unconditional fields are one
    factorised evaluation over few (x, y) columns and all their levels, and every column's x-y
    factor is formed once for the whole lattice.
    """
    perm = np.lexsort((targets[:, 2], targets[:, 1], targets[:, 0]))
    parts = _run_chunks(chunk, _chunks(targets[perm], chunk_size), scheduler)
    out = np.empty((n_realizations, len(targets)))
    if parts:
        out[:, perm] = np.concatenate([p[0] for p in parts], axis=1)
    return out


def conditional_simulation(
    coords: np.ndarray,
    values: np.ndarray,
    targets: np.ndarray,
    *,
    model: CovarianceModel,
    n_realizations: int,
    seed: int,
    groups: np.ndarray | None = None,
    scheduler: Scheduler = None,
    mode_no: int = 1000,
    **kriging_options,
) -> np.ndarray:
    """Gaussian realizations conditioned to the data, at target points.

    Parameters
    ----------
    coords
        ``(n, 3)`` data x, y, z.
    values
        ``(n,)`` data values.
    targets
        ``(m, 3)`` target x, y, z (e.g. voxel centres).
    model
        Covariance model (with anisotropy).
    n_realizations
        Number of realizations.
    seed
        Seed; the same seed gives the same realizations.
    groups
        Group (boring) labels of the data, for ``max_per_group``.
    scheduler
        As in :meth:`OrdinaryKriging.predict`: None (serial), ``'threads'``, or a
        ``dask.distributed`` address or client.
    mode_no
        Number of Fourier modes of the randomization method (gstools' default 1000).
    **kriging_options
        Passed to :class:`~geo3d.geostats.kriging.OrdinaryKriging` (``neighbors``,
        ``max_per_group``, ``drift``, ``max_distance``, ``chunk_size``, ``global_mode``).

    Returns
    -------
    numpy.ndarray
        ``(n_realizations, m)``; NaN where kriging is NaN (beyond ``max_distance``).

    References
    ----------
    Journel, A.G. and Huijbregts, C.J. (1978). Mining Geostatistics. Academic Press, ch. VII
    (conditioning by kriging).
    Chiles, J.-P. and Delfiner, P. (2012). Geostatistics, 2nd ed. Wiley, sec. 7.3.1.
    """
    coords = np.asarray(coords, dtype=float)
    values = np.asarray(values, dtype=float)
    targets = np.asarray(targets, dtype=float)
    _check_simulation(values, targets, n_realizations)
    r = int(n_realizations)
    seq = np.random.SeedSequence(seed)
    field_seeds = seq.generate_state(r)
    noise_rng = np.random.default_rng(seq.spawn(1)[0])
    srfs = _structured_srfs(model, field_seeds, mode_no)
    u_data = np.array([srf(coords) for srf in srfs]).reshape(r, -1)
    m = len(targets)
    noise_t = None
    if model.nugget > 0:
        noise_d, noise_t = _nugget_noise(model, coords, targets, noise_rng, r)
        u_data = u_data + noise_d
    ok = OrdinaryKriging(model, **kriging_options)
    ok.fit(coords, np.column_stack([values, u_data.T]), groups)

    def chunk(t: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        est, _ = ok._predict_chunk(t)
        u_t = np.array([srf(t) for srf in srfs]).reshape(r, -1)
        return est[:, 0][None, :] + u_t - est[:, 1:].T, np.empty(0)

    out = _by_columns(chunk, targets, r, int(ok.chunk_size), scheduler)
    if noise_t is not None:
        out += noise_t
    log.info("%d conditional realizations at %d targets", r, m)
    return out
