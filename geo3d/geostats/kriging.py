"""Ordinary kriging in 3D with a moving neighbourhood, batched and chunked.

Coordinates are ``(x, y, z)`` in the site CRS, z the elevation, upward. For each target cell
the k nearest samples in anisotropy-scaled space (optionally at most ``max_per_group`` from one
boring) form a kriging system in covariance form::

    [ C   F ] [ w  ]   [ c0 ]
    [ F'  0 ] [ mu ] = [ f0 ]

with ``F`` the drift functions (a column of ones for ordinary kriging, plus the scaled elevation
for a linear drift in z). Estimate ``w' v``, variance ``C(0) - w' c0 - mu' f0``.

Speed comes from two things: many neighbouring cells share exactly the same neighbour set, so
each distinct set's matrix is built and inverted once (batched with :func:`numpy.linalg.inv`)
and applied to all its cells; and all work is done on whole chunks of cells with numpy, with
memory bounded by the chunk and block sizes. Chunks can run on dask (threads, or a
``dask.distributed`` scheduler); the per-cell arithmetic does not depend on the chunking, so the
results are identical to the serial run.
"""

from __future__ import annotations

import logging
import warnings
from collections.abc import Callable, Sequence
from typing import Any, Protocol

import numpy as np
from scipy import linalg, sparse
from scipy.spatial.distance import cdist

from geo3d.errors import Geo3dWarning, ModelError
from geo3d.geostats.covariance import ZERO_DISTANCE, CovarianceModel
from geo3d.geostats.neighbours import NeighbourSearch

__all__ = ["OrdinaryKriging"]

log = logging.getLogger(__name__)

DRIFTS = ("none", "linear_z")
#: Distinct neighbour sets whose matrices are inverted together.
_SET_BLOCK = 2048
#: Cells whose weights are computed together.
_CELL_BLOCK = 4096
#: Up to this many samples the sample covariance matrix is computed once (n^2 x 8 bytes).
_FULL_COV_MAX = 6000
#: Elements of the data-by-target covariance block in global mode.
_GLOBAL_BLOCK = 4_000_000
_LOCAL_SCHEDULERS = ("threads", "processes", "synchronous", "sync", "single-threaded")


class DaskClient(Protocol):
    """What the kriging uses of a ``dask.distributed.Client``."""

    def compute(self, tasks: list[Any]) -> Any:
        """Submit delayed tasks; return their futures."""

    def gather(self, futures: Any) -> Any:
        """Wait for futures; return their results."""


#: Where the chunks run: None or "" = serially; a local dask scheduler name (``'threads'``);
#: a ``dask.distributed`` address or client.
Scheduler = str | DaskClient | None


class OrdinaryKriging:
    """Ordinary kriging (optionally with a linear drift in z) of 3D point data.

    Parameters
    ----------
    model
        Covariance model (with its anisotropy).
    neighbors
        Number of samples per estimate (moving neighbourhood).
    max_per_group
        At most this many samples from one group (boring); 0 = no limit.
    drift
        ``'none'`` (ordinary kriging) or ``'linear_z'`` (drift linear in elevation).
    max_distance
        Samples farther than this anisotropy-scaled distance (in ranges: 1 = one range) are not
        used; a cell with no sample within it is NaN. None = no limit.
    chunk_size
        Cells per chunk (bounds memory; the unit of work given to dask).
    global_mode
        Use all samples for every cell (one system, factorised once). For small data sets.

    Attributes
    ----------
    n_ : int
        Number of samples.
    scaled_ : numpy.ndarray
        Samples in anisotropy-scaled space.

    References
    ----------
    Journel, A.G. and Huijbregts, C.J. (1978). Mining Geostatistics. Academic Press, ch. V
    (ordinary kriging and kriging with a drift, covariance form, kriging variance).
    Deutsch, C.V. and Journel, A.G. (1998). GSLIB, 2nd ed. Oxford University Press, sec. IV.1
    (search neighbourhoods, octant and per-drillhole limits).
    """

    def __init__(
        self,
        model: CovarianceModel,
        *,
        neighbors: int = 32,
        max_per_group: int = 0,
        drift: str = "none",
        max_distance: float | None = None,
        chunk_size: int = 20000,
        global_mode: bool = False,
    ) -> None:
        self.model = model
        self.neighbors = neighbors
        self.max_per_group = max_per_group
        self.drift = drift
        self.max_distance = max_distance
        self.chunk_size = chunk_size
        self.global_mode = global_mode

    def __repr__(self) -> str:
        return (
            f"OrdinaryKriging({self.model!r}, neighbors={self.neighbors}, "
            f"max_per_group={self.max_per_group}, drift={self.drift!r}, "
            f"max_distance={self.max_distance}, global_mode={self.global_mode})"
        )

    # ------------------------------------------------------------------ fit
    def fit(
        self,
        coords: np.ndarray,
        values: np.ndarray,
        groups: Sequence | np.ndarray | None = None,
    ) -> OrdinaryKriging:
        """Learn the samples.

        Parameters
        ----------
        coords
            ``(n, 3)`` sample coordinates x, y, z (m).
        values
            ``(n,)`` values, or ``(n, p)`` for p value sets kriged with the same weights.
        groups
            ``(n,)`` group (boring) labels, needed for ``max_per_group``.

        Returns
        -------
        OrdinaryKriging
            self.
        """
        self._check_settings()
        coords = np.asarray(coords, dtype=float)
        if coords.ndim != 2 or coords.shape[1] != 3:
            msg = f"sample coordinates must be an (n, 3) array of x, y, z; got {coords.shape}"
            raise ModelError(msg)
        vals = np.asarray(values, dtype=float)
        self._vector_ = vals.ndim == 1
        vals2 = vals[:, None] if vals.ndim == 1 else vals
        if vals2.ndim != 2 or len(vals2) != len(coords):
            msg = f"values must have one row per sample ({len(coords)}); got shape {vals.shape}"
            raise ModelError(msg)
        bad = ~np.isfinite(coords).all(axis=1) | ~np.isfinite(vals2).all(axis=1)
        if bad.any():
            msg = (
                f"sample row {int(np.flatnonzero(bad)[0])} has a missing or infinite coordinate "
                f"or value ({int(bad.sum())} such rows); expected finite x, y, z and value"
            )
            raise ModelError(msg)
        n = len(coords)
        n_drift = 1 if self.drift == "none" else 2
        if n < n_drift:
            msg = f"kriging needs at least {n_drift} samples, got {n}"
            raise ModelError(msg)
        if groups is not None:
            groups = np.asarray(groups)
            if len(groups) != n:
                msg = f"groups must have one label per sample ({n}); got {len(groups)}"
                raise ModelError(msg)
        scaled = self.model.scaled(coords)
        if self.model.nugget == 0:
            _check_duplicates(scaled)
        self.n_ = n
        self.coords_ = coords
        self.scaled_ = scaled
        self.values_ = vals2
        # Padded copies: index n is the "missing neighbour" sentinel.
        self._scaled_ext = np.vstack([scaled, np.zeros((1, 3))])
        self._values_ext = np.vstack([vals2, np.zeros((1, vals2.shape[1]))])
        self.z_mean_ = float(coords[:, 2].mean())
        self._drift_ext = np.append((coords[:, 2] - self.z_mean_) / self.model.range_v, 0.0)
        self._labels = None if groups is None else np.unique(groups)
        self.search_ = NeighbourSearch(scaled, groups)
        self._cov_full = None
        if not self.global_mode and n <= _FULL_COV_MAX:
            self._cov_full = self._full_covariance()
        self._lu = None
        if self.global_mode:
            lhs = self._lhs(np.arange(n)[None, :])[0]
            try:
                self._lu = linalg.lu_factor(lhs, check_finite=False)
            except (linalg.LinAlgError, ValueError) as exc:
                msg = f"the global kriging system is singular ({exc}); check duplicate samples"
                raise ModelError(msg) from exc
        return self

    def _full_covariance(self) -> np.ndarray:
        """Covariance between all samples, padded with the missing-neighbour sentinel."""
        n = self.n_
        full = np.zeros((n + 1, n + 1))
        step = max(1, _GLOBAL_BLOCK // n)
        for i in range(0, n, step):
            j = min(n, i + step)
            d = cdist(self.scaled_[i:j], self.scaled_)
            full[i:j, :n] = self.model.covariance(d)
        full[n, n] = 1.0
        return full

    def _check_settings(self) -> None:
        if self.drift not in DRIFTS:
            msg = f"kriging drift {self.drift!r} is unknown; expected one of {DRIFTS}"
            raise ModelError(msg)
        if int(self.neighbors) < 1:
            msg = f"kriging neighbors must be >= 1, got {self.neighbors}"
            raise ModelError(msg)
        if int(self.max_per_group) < 0:
            msg = f"kriging max_per_group must be >= 0, got {self.max_per_group}"
            raise ModelError(msg)
        if int(self.chunk_size) < 1:
            msg = f"kriging chunk_size must be >= 1, got {self.chunk_size}"
            raise ModelError(msg)
        if self.max_distance is not None and not self.max_distance > 0:
            msg = f"kriging max_distance must be > 0 or None, got {self.max_distance}"
            raise ModelError(msg)

    # ------------------------------------------------------------- predict
    def predict(
        self, targets: np.ndarray, *, scheduler: Scheduler = None
    ) -> tuple[np.ndarray, np.ndarray]:
        """Krige at target points.

        Parameters
        ----------
        targets
            ``(m, 3)`` target coordinates x, y, z (m).
        scheduler
            None = serial; ``'threads'`` (or another local dask scheduler name) = dask local
            scheduler; a ``dask.distributed`` address (``'tcp://host:8786'``) or ``Client``.

        Returns
        -------
        estimate, variance
            ``(m,)`` (or ``(m, p)`` for p value sets) and ``(m,)``; NaN where no sample lies
            within ``max_distance``.
        """
        if not hasattr(self, "n_"):
            msg = "OrdinaryKriging.predict called before fit"
            raise ModelError(msg)
        targets = np.asarray(targets, dtype=float)
        if targets.ndim != 2 or targets.shape[1] != 3:
            msg = f"target coordinates must be an (m, 3) array of x, y, z; got {targets.shape}"
            raise ModelError(msg)
        m = len(targets)
        chunks = _chunks(targets, int(self.chunk_size)) or [targets[:0]]
        results = _run_chunks(self._predict_chunk, chunks, scheduler)
        est = np.concatenate([r[0] for r in results], axis=0)
        var = np.concatenate([r[1] for r in results], axis=0)
        n_nan = int(np.isnan(var).sum())
        if n_nan:
            log.info("%d of %d cells have no sample within max_distance", n_nan, m)
        if self._vector_:
            est = est[:, 0]
        return est, var

    def _predict_chunk(self, targets: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        if len(targets) == 0:
            return np.empty((0, self.values_.shape[1])), np.empty(0)
        ts = self.model.scaled(targets)
        if self.global_mode:
            return self._predict_global(targets, ts)
        return self._predict_local(targets, ts)

    def predict_without_group(
        self, targets: np.ndarray, group: object
    ) -> tuple[np.ndarray, np.ndarray]:
        """Krige at targets from all samples except those of one group (boring).

        Equals fitting a new estimator to the other samples and predicting, but reuses this
        fit's neighbour structures and sample covariances, so a leave-one-group-out loop costs
        one fit. Moving neighbourhood only (not ``global_mode``).

        Parameters
        ----------
        targets
            ``(m, 3)`` target coordinates x, y, z (m).
        group
            The label of the left-out group, as given to :meth:`fit`.

        Returns
        -------
        estimate, variance
            As :meth:`predict`.
        """
        labels = getattr(self, "_labels", None)
        if labels is None or self.global_mode:
            msg = "predict_without_group needs a moving-neighbourhood fit with group labels"
            raise ModelError(msg)
        code = int(np.searchsorted(labels, np.asarray(group)))
        if code >= len(labels) or labels[code] != group:
            msg = f"group {group!r} is not among the fitted samples' groups"
            raise ModelError(msg)
        targets = np.asarray(targets, dtype=float)
        ts = self.model.scaled(targets)
        est, var = self._predict_local(targets, ts, exclude=code)
        return (est[:, 0] if self._vector_ else est), var

    def _predict_local(
        self, targets: np.ndarray, ts: np.ndarray, exclude: int | None = None
    ) -> tuple[np.ndarray, np.ndarray]:
        n, model = self.n_, self.model
        m = len(ts)
        dist, idx = self.search_.query(
            ts,
            int(self.neighbors),
            max_per_group=int(self.max_per_group),
            max_distance=self.max_distance,
            exclude=exclude,
        )
        k = idx.shape[1]
        # Sort indices so that identical neighbour sets compare equal.
        order = np.argsort(idx, axis=1)
        idx = np.take_along_axis(idx, order, axis=1)
        dist = np.take_along_axis(dist, order, axis=1)
        valid = idx < n
        sets, inverse = _unique_rows(idx)
        nd = 1 if self.drift == "none" else 2
        kk = k + nd
        # Right-hand sides.
        rhs = np.zeros((m, kk))
        rhs[:, :k] = np.where(valid, model.covariance(np.where(valid, dist, 0.0)), 0.0)
        rhs[:, k] = 1.0
        if nd == 2:
            rhs[:, k + 1] = (targets[:, 2] - self.z_mean_) / model.range_v
        sol = np.empty((m, kk))
        ok_set = np.ones(len(sets), dtype=bool)
        # Cells grouped by neighbour set; sets with the same number of cells are solved together,
        # one factorisation per set for all its cells' right-hand sides.
        cell_order = np.argsort(inverse, kind="stable")
        counts = np.bincount(inverse, minlength=len(sets))
        starts = np.concatenate([[0], np.cumsum(counts)[:-1]])
        for c in np.unique(counts):
            sel = np.flatnonzero(counts == c)
            step = max(1, min(_SET_BLOCK, _CELL_BLOCK // int(c)))
            for b0 in range(0, len(sel), step):
                ss = sel[b0 : b0 + step]
                cells = cell_order[starts[ss][:, None] + np.arange(c)]
                x, ok = self._solve(self._lhs(sets[ss]), rhs[cells].transpose(0, 2, 1))
                sol[cells.ravel()] = x.transpose(0, 2, 1).reshape(-1, kk)
                ok_set[ss] = ok
        w = sol[:, :k]
        mu = sol[:, k:]
        if self._values_ext.shape[1] == 1:
            est = np.einsum("mk,mk->m", w, self._values_ext[idx, 0])[:, None]
        else:
            # Many value sets (simulation): a sparse weight matrix avoids an (m, k, p) gather.
            weights = sparse.csr_matrix(
                (w.ravel(), idx.ravel(), np.arange(0, m * k + 1, k)), shape=(m, n + 1)
            )
            est = np.asarray(weights @ self._values_ext)
        var = model.total_sill - np.einsum("mk,mk->m", w, rhs[:, :k])
        var -= np.einsum("md,md->m", mu, rhs[:, k:])
        n_valid = valid.sum(axis=1)
        bad = (n_valid < nd) | ~ok_set[inverse]
        est[bad] = np.nan
        var[bad] = np.nan
        np.maximum(var, 0.0, out=var)
        return est, var

    def _lhs(self, sets: np.ndarray) -> np.ndarray:
        """Kriging matrices for neighbour sets ``(u, k)`` (index n = missing)."""
        n, model = self.n_, self.model
        u, k = sets.shape
        nd = 1 if self.drift == "none" else 2
        valid = sets < n
        a_mat = np.zeros((u, k + nd, k + nd))
        if self._cov_full is not None:
            # Padded full covariance (sentinel row and column 0, diagonal 1).
            a_mat[:, :k, :k] = self._cov_full[sets[:, :, None], sets[:, None, :]]
            if not valid.all():
                # Several missing neighbours: decouple them from each other too.
                a_mat[:, :k, :k] *= valid[:, :, None] & valid[:, None, :]
                diag = np.arange(k)
                a_mat[:, diag, diag] = np.where(valid, model.total_sill, 1.0)
        else:
            pts = self._scaled_ext[sets]
            d2 = np.zeros((u, k, k))
            for a in range(3):
                diff = pts[:, :, None, a] - pts[:, None, :, a]
                d2 += diff * diff
            cov = model.covariance(np.sqrt(d2))
            pair = valid[:, :, None] & valid[:, None, :]
            a_mat[:, :k, :k] = np.where(pair, cov, 0.0)
            # A missing neighbour gets the decoupled equation w_i = 0.
            diag = np.arange(k)
            a_mat[:, diag, diag] = np.where(valid, model.total_sill, 1.0)
        drift_cols = [valid.astype(float)]
        if nd == 2:
            drift_cols.append(np.where(valid, self._drift_ext[sets], 0.0))
        for j, col in enumerate(drift_cols):
            a_mat[:, :k, k + j] = col
            a_mat[:, k + j, :k] = col
        # A set with too few samples for its drift: keep the matrix invertible, result is NaN.
        few = valid.sum(axis=1) < nd
        if few.any():
            for j in range(nd):
                a_mat[few, k + j, k + j] = 1.0
        return a_mat

    def _solve(self, a_mat: np.ndarray, b_mat: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Solve stacked systems; flag (and zero) the singular ones."""
        ok = np.ones(len(a_mat), dtype=bool)
        try:
            return np.linalg.solve(a_mat, b_mat), ok
        except np.linalg.LinAlgError:
            out = np.zeros_like(b_mat)
            for i, (a, b) in enumerate(zip(a_mat, b_mat, strict=True)):
                try:
                    out[i] = np.linalg.solve(a, b)
                except np.linalg.LinAlgError:
                    ok[i] = False
            msg = (
                f"{int((~ok).sum())} kriging neighbourhoods give a singular system (duplicate "
                "samples, or all at one elevation with drift='linear_z'); their cells are NaN"
            )
            warnings.warn(msg, Geo3dWarning, stacklevel=4)
            return out, ok

    def _predict_global(self, targets: np.ndarray, ts: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        n, model = self.n_, self.model
        m = len(ts)
        nd = 1 if self.drift == "none" else 2
        est = np.empty((m, self.values_.shape[1]))
        var = np.empty(m)
        step = max(1, _GLOBAL_BLOCK // (n + nd))
        for b0 in range(0, m, step):
            b1 = min(m, b0 + step)
            d = np.sqrt(
                np.maximum(
                    (ts[b0:b1] ** 2).sum(1)[None, :]
                    + (self.scaled_**2).sum(1)[:, None]
                    - 2.0 * self.scaled_ @ ts[b0:b1].T,
                    0.0,
                )
            )
            # Exact distances where the expansion above loses precision (near-coincident points).
            close = d < 1e-6
            if close.any():
                ii, jj = np.nonzero(close)
                d[ii, jj] = np.linalg.norm(self.scaled_[ii] - ts[b0 + jj], axis=1)
            rhs = np.empty((n + nd, b1 - b0))
            rhs[:n] = model.covariance(d)
            rhs[n] = 1.0
            if nd == 2:
                rhs[n + 1] = (targets[b0:b1, 2] - self.z_mean_) / model.range_v
            sol = linalg.lu_solve(self._lu, rhs, check_finite=False)
            est[b0:b1] = sol[:n].T @ self.values_
            var[b0:b1] = model.total_sill - np.einsum("nm,nm->m", sol[:n], rhs[:n])
            var[b0:b1] -= np.einsum("dm,dm->m", sol[n:], rhs[n:])
        np.maximum(var, 0.0, out=var)
        if self.max_distance is not None:
            near, _ = self.search_.tree.query(ts, k=1, distance_upper_bound=self.max_distance)
            far = ~np.isfinite(near)
            est[far] = np.nan
            var[far] = np.nan
        return est, var


#: Fixed odd 64-bit multipliers hashing a sorted neighbour list (wrapping arithmetic).
_HASH = np.random.default_rng(20261202).integers(1, 2**62, 4096, dtype=np.int64) | 1


def _unique_rows(idx: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Distinct rows of ``idx`` and the row number of each, via a 64-bit hash (verified)."""
    k = idx.shape[1]
    if k <= len(_HASH):
        with np.errstate(over="ignore"):
            h = (idx.astype(np.int64) * _HASH[:k]).sum(axis=1)
        _, first, inverse = np.unique(h, return_index=True, return_inverse=True)
        sets = idx[first]
        if np.array_equal(sets[inverse], idx):
            return sets, inverse.reshape(-1)
    sets, inverse = np.unique(idx, axis=0, return_inverse=True)
    return sets, inverse.reshape(-1)


def _check_duplicates(scaled: np.ndarray) -> None:
    """Coincident samples make a zero-nugget system singular: say which rows."""
    from scipy.spatial import cKDTree

    pairs = cKDTree(scaled).query_pairs(ZERO_DISTANCE, output_type="ndarray")
    if len(pairs):
        i, j = (int(v) for v in pairs[0])
        msg = (
            f"samples {i} and {j} are at the same place ({len(pairs)} such pairs); with a zero "
            "nugget the kriging system is singular: average them or give the model a nugget"
        )
        raise ModelError(msg)


def _chunks(targets: np.ndarray, size: int) -> list[np.ndarray]:
    """Consecutive chunks of at most ``size`` target rows (none for no targets)."""
    m = len(targets)
    return [targets[i : min(m, i + size)] for i in range(0, m, size)]


def _run_chunks(
    func: Callable[[np.ndarray], tuple[np.ndarray, np.ndarray]],
    chunks: list[np.ndarray],
    scheduler: Scheduler,
) -> list[tuple[np.ndarray, np.ndarray]]:
    """Apply ``func`` to every chunk, serially or on dask."""
    if scheduler is None or scheduler == "":
        return [func(c) for c in chunks]
    import dask

    tasks = [dask.delayed(func, pure=False)(c) for c in chunks]
    if isinstance(scheduler, str) and scheduler in _LOCAL_SCHEDULERS:
        return list(dask.compute(*tasks, scheduler=scheduler))
    from dask.distributed import Client

    if isinstance(scheduler, str):
        # probe first: a Client that fails half-way prints a traceback when it is collected
        problem = scheduler_problem(scheduler)
        try:
            if problem is not None:
                raise OSError(problem)
            client = Client(scheduler, set_as_default=False, timeout=10)
        except (OSError, ValueError, TimeoutError) as exc:
            msg = (
                f"site.toml, [kriging] scheduler: {exc}; expected the address of a running "
                'dask.distributed scheduler (such as "tcp://host:8786"), or "" for local threads'
            )
            raise ModelError(msg) from None
        try:
            return list(client.gather(client.compute(tasks)))
        finally:
            client.close()
    return list(scheduler.gather(scheduler.compute(tasks)))  # a dask.distributed Client


def scheduler_problem(address: str, *, timeout: float = 3.0) -> str | None:
    """Return why a ``dask.distributed`` scheduler address cannot be used, or None.

    Parameters
    ----------
    address
        Such as ``"tcp://10.0.0.5:8786"``; ``""`` means local threads and is always fine.
    timeout
        Seconds to wait for a TCP connection.
    """
    if not address.strip():
        return None
    import socket

    try:
        from distributed.comm import parse_address, parse_host_port

        scheme, location = parse_address(address)
        if scheme not in ("tcp", "tls"):
            return None  # other transports are checked when the client connects
        host, port = parse_host_port(location)
    except (ImportError, ValueError, TypeError) as exc:
        return f"{address!r} is not a scheduler address ({exc})"
    try:
        socket.create_connection((host, int(port)), timeout=timeout).close()
    except OSError as exc:
        return f"cannot reach the scheduler at {address!r} ({exc})"
    return None
