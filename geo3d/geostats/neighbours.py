"""Neighbourhood search in anisotropy-scaled space.

Samples and targets are first mapped by :meth:`CovarianceModel.scaled`, so Euclidean distance
there is the anisotropic distance in ranges. The k nearest samples are found with a k-d tree;
an optional cap keeps at most ``max_per_group`` samples from one group (one boring), so that
the dense samples of the nearest boring cannot fill the whole neighbourhood.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np
from scipy.spatial import cKDTree

__all__ = ["NeighbourSearch"]

#: Below this many targets a per-group k-d tree query runs on one thread (starting threads
#: costs more than the query).
_THREADED_QUERY = 4096


class _GroupTrees(NamedTuple):
    """Per-group search structures of :class:`NeighbourSearch`."""

    per_group: list[tuple[cKDTree, np.ndarray]]
    lo: np.ndarray
    hi: np.ndarray
    centres: cKDTree
    radius: float


class NeighbourSearch:
    """k-nearest search with an optional per-group cap.

    Parameters
    ----------
    points
        Sample coordinates ``(n, 3)``, already anisotropy-scaled.
    groups
        Integer group code per sample (``(n,)``), or None.
    workers
        Threads used by the k-d tree query (-1 = all cores).

    Notes
    -----
    Missing neighbours (fewer than k samples within ``max_distance``, or not enough groups
    under the cap) are returned as index ``n`` and distance ``inf``.
    """

    def __init__(
        self, points: np.ndarray, groups: np.ndarray | None = None, *, workers: int = -1
    ) -> None:
        self.points = np.ascontiguousarray(points, dtype=float)
        self.n = len(self.points)
        self.tree = cKDTree(self.points, leafsize=32)
        self.workers = workers
        self.groups: np.ndarray | None = None
        if groups is not None:
            _, codes = np.unique(np.asarray(groups), return_inverse=True)
            # Sentinel group -1 for the missing index n.
            self.groups = np.append(codes.astype(np.int64), -1)

    def query(
        self,
        targets: np.ndarray,
        k: int,
        *,
        max_per_group: int = 0,
        max_distance: float | None = None,
        exclude: int | None = None,
    ) -> tuple[np.ndarray, np.ndarray]:
        """Return distances and indices ``(m, k)`` of the neighbours of each target.

        Parameters
        ----------
        targets
            Scaled target coordinates ``(m, 3)``.
        k
            Number of neighbours (at most the number of samples).
        max_per_group
            At most this many neighbours from one group; 0 = no cap.
        max_distance
            Neighbours farther than this (scaled distance) are dropped.
        exclude
            Code of a group (its rank among the sorted group labels) whose samples are not
            used: the search then equals a search on the other samples only.

        Returns
        -------
        dist, idx
            Sorted by distance per row; missing entries have ``inf`` and ``n``.
        """
        n_left = self.n if exclude is None else self.n - int(self._members(exclude).size)
        k = int(max(1, min(k, n_left)))
        ub = np.inf if max_distance is None else float(max_distance)
        targets = np.ascontiguousarray(targets, dtype=float)
        if self.groups is None or max_per_group <= 0 or max_per_group >= k:
            return self._query_nearest(targets, k, ub, exclude)
        # Rows whose nearest groups may not hold the capped neighbourhood are searched again
        # among twice as many groups (all groups at the end: then every row is exact).
        n_groups = len(self._group_trees().per_group) - (exclude is not None)
        n_near = max(1, min(n_groups, -(-k // max_per_group) + 4))
        out_d, out_i, exact = self._query_by_group(targets, k, max_per_group, ub, exclude, n_near)
        rows = np.flatnonzero(~exact)
        while len(rows) and n_near < n_groups:
            n_near = min(n_groups, 2 * n_near)
            rd, ri, exact = self._query_by_group(
                targets[rows], k, max_per_group, ub, exclude, n_near
            )
            out_d[rows] = rd
            out_i[rows] = ri
            rows = rows[~exact]
        return out_d, out_i

    def _members(self, code: int) -> np.ndarray:
        if self.groups is None:
            msg = "a group can only be excluded from a search built with groups"
            raise ValueError(msg)
        trees = self._group_trees()
        return trees.per_group[code][1][:-1]

    def _query_nearest(
        self, targets: np.ndarray, k: int, ub: float, exclude: int | None
    ) -> tuple[np.ndarray, np.ndarray]:
        """K nearest samples (outside group ``exclude``), ties broken by sample index.

        Equal distances are common on regular sample spacings; ordering them by index makes
        the neighbourhood a function of the samples alone (not of the tree's layout), so a
        search that leaves a group out equals a search on the other samples.
        """
        n_out = 0 if exclude is None else int(self._members(exclude).size)
        m = len(targets)
        out_d = np.empty((m, k))
        out_i = np.empty((m, k), dtype=np.int64)
        rows = np.arange(m)
        kc = min(self.n, k + n_out + 2)
        while len(rows):
            dist, idx = _as_2d(
                *self.tree.query(targets[rows], k=kc, distance_upper_bound=ub, workers=self.workers)
            )
            if exclude is not None:
                assert self.groups is not None  # checked by _members
                drop = self.groups[idx] == exclude
                dist[drop] = np.inf
                idx[drop] = self.n
            order = np.lexsort((idx, dist), axis=1)[:, :k]
            out_d[rows] = np.take_along_axis(dist, order, axis=1)
            out_i[rows] = np.take_along_axis(idx, order, axis=1)
            # A tie at the k-th distance may continue past the candidates: ask for more.
            last = dist.max(axis=1, where=np.isfinite(dist), initial=-1.0)
            again = (out_d[rows, -1] >= last) & np.isfinite(out_d[rows, -1]) & (last >= 0)
            if kc >= self.n:
                break
            rows = rows[again]
            kc = min(self.n, 2 * kc)
        return out_d, out_i

    def _group_trees(self) -> _GroupTrees:
        """Per group: its k-d tree and members (plus sentinel); boxes; a tree of their centres."""
        # Built locally and published in one assignment: chunks run on several threads, and
        # another thread must never see a half-built structure.
        trees = getattr(self, "_trees", None)
        if trees is None:
            assert self.groups is not None  # only called with groups
            codes = self.groups[:-1]
            order = np.argsort(codes, kind="stable")
            bounds = np.searchsorted(codes[order], np.arange(int(codes.max()) + 2))
            per_group = []
            for g in range(len(bounds) - 1):
                members = order[bounds[g] : bounds[g + 1]]
                pts = self.points[members]
                per_group.append((cKDTree(pts), np.append(members, self.n)))
            lo = np.array([self.points[t[1][:-1]].min(axis=0) for t in per_group])
            hi = np.array([self.points[t[1][:-1]].max(axis=0) for t in per_group])
            centre = 0.5 * (lo[:, :2] + hi[:, :2])
            radius = float(np.max(np.hypot(*(0.5 * (hi[:, :2] - lo[:, :2])).T)))
            trees = _GroupTrees(per_group, lo, hi, cKDTree(centre), radius)
            self._trees = trees
        return trees

    def _nearest_groups(
        self, targets: np.ndarray, n_near: int, exclude: int | None
    ) -> tuple[np.ndarray, np.ndarray]:
        """Find the ``n_near`` groups nearest each target by box distance, and the next distance.

        Candidates come from a k-d tree over the horizontal box centres; a row's candidates
        are complete when the first distance left out cannot beat the horizontal lower bound
        (centre distance minus the largest horizontal box radius) of any group not in the
        list. Incomplete rows are redone with twice as many candidates, so the cost per target
        does not depend on the number of groups.
        """
        trees = self._group_trees()
        n_groups = len(trees.per_group)
        m = len(targets)
        near = np.empty((m, n_near), dtype=np.int64)
        next_box = np.full(m, np.inf)
        rows = np.arange(m)
        n_cand = min(n_groups, 2 * (n_near + 2))
        while len(rows):
            hd, cand = _as_2d(*trees.centres.query(targets[rows, :2], k=n_cand))
            box = _box_distance(targets[rows], trees.lo[cand], trees.hi[cand])
            if exclude is not None:
                box[cand == exclude] = np.inf
            order = np.argsort(box, axis=1, kind="stable")
            near[rows] = np.take_along_axis(cand, order[:, :n_near], axis=1)
            if n_cand > n_near:
                next_box[rows] = np.take_along_axis(box, order[:, n_near : n_near + 1], axis=1)[
                    :, 0
                ]
            if n_cand >= n_groups:
                break
            bound = hd[:, -1] - trees.radius
            done = next_box[rows] <= bound
            rows = rows[~done]
            n_cand = min(n_groups, 2 * n_cand)
        return near, next_box

    def _query_by_group(
        self, targets: np.ndarray, k: int, cap: int, ub: float, exclude: int | None, n_near: int
    ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Capped search from the ``cap`` nearest samples of each of the ``n_near`` nearest groups.

        The capped neighbourhood is the k nearest among every group's ``cap`` nearest
        samples. Groups are visited in order of the distance to their bounding box; the result
        of a row is exact when its k-th distance does not exceed the box distance of the first
        group left out (flagged in the third output; other rows need more groups).
        """
        trees = self._group_trees()
        m = len(targets)
        near, next_box = self._nearest_groups(targets, n_near, exclude)
        width = max(k, n_near * cap)
        cand_d = np.full((m, width), np.inf)
        cand_i = np.full((m, width), self.n, dtype=np.int64)
        flat = near.ravel()
        order = np.argsort(flat, kind="stable")
        cuts = np.flatnonzero(np.diff(flat[order])) + 1
        for part in np.split(order, cuts):
            g = int(flat[part[0]])
            if g == exclude:
                continue
            rows, slot = np.divmod(part, n_near)
            tree, members = trees.per_group[g]
            kg = min(cap, tree.n)
            workers = self.workers if len(rows) >= _THREADED_QUERY else 1
            d, i = _as_2d(
                *tree.query(targets[rows], k=kg, distance_upper_bound=ub, workers=workers)
            )
            # Flat positions: one 1-D scatter is much cheaper than a 2-D fancy index.
            flat_pos = ((rows * width + slot * cap)[:, None] + np.arange(kg)).ravel()
            cand_d.ravel()[flat_pos] = d.ravel()
            cand_i.ravel()[flat_pos] = members[i].ravel()
        pick = np.argsort(cand_d, axis=1, kind="stable")[:, :k]
        out_d = np.take_along_axis(cand_d, pick, axis=1)
        out_i = np.take_along_axis(cand_i, pick, axis=1)
        exact = (out_d[:, -1] <= next_box) | (next_box > ub)
        return out_d, out_i, exact

    def _query_candidates(
        self, targets: np.ndarray, k: int, cap: int, ub: float, exclude: int | None
    ) -> tuple[np.ndarray, np.ndarray]:
        """Capped search by filtering growing lists of nearest candidates."""
        max_per_group = cap
        kc = min(self.n, 4 * k)
        dist, idx = _as_2d(
            *self.tree.query(targets, k=kc, distance_upper_bound=ub, workers=self.workers)
        )
        out_d, out_i, short = self._cap(dist, idx, k, max_per_group, exclude)
        # Rows that did not find k admissible neighbours although their candidate list was full:
        # search again with more candidates.
        redo = short & np.isfinite(dist[:, -1])
        while redo.any() and kc < self.n:
            kc = min(self.n, kc * 4)
            rows = np.flatnonzero(redo)
            d2, i2 = _as_2d(
                *self.tree.query(targets[rows], k=kc, distance_upper_bound=ub, workers=self.workers)
            )
            rd, ri, rshort = self._cap(d2, i2, k, max_per_group, exclude)
            out_d[rows] = rd
            out_i[rows] = ri
            redo = np.zeros_like(redo)
            redo[rows] = rshort & np.isfinite(d2[:, -1])
        return out_d, out_i

    def _cap(
        self, dist: np.ndarray, idx: np.ndarray, k: int, cap: int, exclude: int | None
    ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Keep, per row, the first k candidates with at most ``cap`` from each group.

        One pass over the candidate columns (nearest first) with a per-row count of samples
        taken from each group; stops as soon as every row has k neighbours.
        """
        assert self.groups is not None  # only called with groups
        m, kc = idx.shape
        n_groups = int(self.groups.max()) + 2
        taken = np.zeros((m, n_groups), dtype=np.int32)
        n_out = np.zeros(m, dtype=np.int64)
        out_i = np.full((m, k), self.n, dtype=idx.dtype)
        out_d = np.full((m, k), np.inf)
        rows = np.arange(m)
        for j in range(kc):
            col = idx[rows, j]
            g = self.groups[col]
            ok = (col < self.n) & (taken[rows, g] < cap) & (g != exclude)
            r = rows[ok]
            out_i[r, n_out[r]] = col[ok]
            out_d[r, n_out[r]] = dist[r, j]
            taken[r, g[ok]] += 1
            n_out[r] += 1
            rows = rows[n_out[rows] < k]
            if len(rows) == 0:
                break
        short = n_out < k
        return out_d, out_i, short


def _as_2d(dist: np.ndarray, idx: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Make the 1-D arrays a k-d tree returns for k = 1 into (m, 1) arrays."""
    if dist.ndim == 1:
        dist = dist[:, None]
        idx = idx[:, None]
    return dist, idx


def _box_distance(targets: np.ndarray, lo: np.ndarray, hi: np.ndarray) -> np.ndarray:
    """Distance from each target ``(m, 3)`` to each of its boxes ``(m, c, 3)``."""
    gap = np.maximum(lo - targets[:, None, :], 0.0)
    gap = np.maximum(gap, targets[:, None, :] - hi)
    return np.sqrt((gap * gap).sum(axis=2))
