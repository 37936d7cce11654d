"""Neighbourhood search in anisotropy-scaled space.

Samples and targets are first mapped by :meth:`CovarianceModel.scaled`, so Euclidean distance
there is the anisotropic distance in ranges. The k nearest samples are found with a k-d tree;
an optional cap keeps at most ``max_per_group`` samples from one group (one boring), so that
the dense samples of the nearest boring cannot fill the whole neighbourhood.
"""

from __future__ import annotations

import numpy as np
from scipy.spatial import cKDTree

__all__ = ["NeighbourSearch"]


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

        Returns
        -------
        dist, idx
            Sorted by distance per row; missing entries have ``inf`` and ``n``.
        """
        k = int(min(k, self.n))
        ub = np.inf if max_distance is None else float(max_distance)
        targets = np.ascontiguousarray(targets, dtype=float)
        if max_per_group <= 0 or self.groups is None:
            dist, idx = self.tree.query(targets, k=k, distance_upper_bound=ub, workers=self.workers)
            return _as_2d(dist, idx)
        if max_per_group >= k:
            dist, idx = self.tree.query(targets, k=k, distance_upper_bound=ub, workers=self.workers)
            return _as_2d(dist, idx)
        out_d, out_i, exact = self._query_by_group(targets, k, max_per_group, ub)
        rows = np.flatnonzero(~exact)
        if len(rows):
            rd, ri = self._query_candidates(targets[rows], k, max_per_group, ub)
            out_d[rows] = rd
            out_i[rows] = ri
        return out_d, out_i

    def _group_trees(self) -> list[tuple[cKDTree, np.ndarray, np.ndarray, np.ndarray]]:
        """Per group: its k-d tree, member indices (plus sentinel), bounding box low and high."""
        # Built in a local list and published in one assignment: chunks run on several
        # threads, and another thread must never see a half-built list.
        trees = getattr(self, "_trees", None)
        if trees is None:
            assert self.groups is not None  # only called with groups
            codes = self.groups[:-1]
            trees = []
            for g in range(int(codes.max()) + 1):
                members = np.flatnonzero(codes == g)
                pts = self.points[members]
                trees.append(
                    (cKDTree(pts), np.append(members, self.n), pts.min(axis=0), pts.max(axis=0))
                )
            self._trees = trees
        return trees

    def _query_by_group(
        self, targets: np.ndarray, k: int, cap: int, ub: float
    ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Capped search from the ``cap`` nearest samples of each of the nearest groups.

        The capped neighbourhood is the k nearest among every group's ``cap`` nearest
        samples. Groups are visited in order of the distance to their bounding box; the result
        of a row is exact when its k-th distance does not exceed the box distance of the first
        group left out (flagged in the third output; other rows need the slower search).
        """
        trees = self._group_trees()
        n_groups = len(trees)
        m = len(targets)
        n_near = min(n_groups, -(-k // cap) + 4)
        lo = np.array([t[2] for t in trees])
        hi = np.array([t[3] for t in trees])
        box = np.zeros((m, n_groups))
        for a in range(3):
            gap = np.maximum(lo[None, :, a] - targets[:, a : a + 1], 0.0)
            gap = np.maximum(gap, targets[:, a : a + 1] - hi[None, :, a])
            box += gap * gap
        np.sqrt(box, out=box)
        order = np.argsort(box, axis=1, kind="stable")
        near = order[:, :n_near]
        width = max(k, n_near * cap)
        cand_d = np.full((m, width), np.inf)
        cand_i = np.full((m, width), self.n, dtype=np.int64)
        for g, (tree, members, _, _) in enumerate(trees):
            rows, slot = np.nonzero(near == g)
            if len(rows) == 0:
                continue
            kg = min(cap, tree.n)
            d, i = _as_2d(
                *tree.query(targets[rows], k=kg, distance_upper_bound=ub, workers=self.workers)
            )
            cols = slot[:, None] * cap + np.arange(kg)
            cand_d[rows[:, None], cols] = d
            cand_i[rows[:, None], cols] = members[i]
        pick = np.argsort(cand_d, axis=1, kind="stable")[:, :k]
        out_d = np.take_along_axis(cand_d, pick, axis=1)
        out_i = np.take_along_axis(cand_i, pick, axis=1)
        if n_near < n_groups:
            next_box = np.take_along_axis(box, order[:, n_near : n_near + 1], axis=1)[:, 0]
            exact = (out_d[:, -1] <= next_box) | (next_box > ub)
        else:
            exact = np.ones(m, dtype=bool)
        return out_d, out_i, exact

    def _query_candidates(
        self, targets: np.ndarray, k: int, cap: int, ub: float
    ) -> tuple[np.ndarray, np.ndarray]:
        """Capped search by filtering growing lists of nearest candidates."""
        max_per_group = cap
        kc = min(self.n, 4 * k)
        dist, idx = _as_2d(
            *self.tree.query(targets, k=kc, distance_upper_bound=ub, workers=self.workers)
        )
        out_d, out_i, short = self._cap(dist, idx, k, max_per_group)
        # Rows that did not find k admissible neighbours although their candidate list was full:
        # search again with more candidates.
        redo = short & np.isfinite(dist[:, -1])
        while redo.any() and kc < self.n:
            kc = min(self.n, kc * 4)
            rows = np.flatnonzero(redo)
            d2, i2 = _as_2d(
                *self.tree.query(targets[rows], k=kc, distance_upper_bound=ub, workers=self.workers)
            )
            rd, ri, rshort = self._cap(d2, i2, k, max_per_group)
            out_d[rows] = rd
            out_i[rows] = ri
            redo = np.zeros_like(redo)
            redo[rows] = rshort & np.isfinite(d2[:, -1])
        return out_d, out_i

    def _cap(
        self, dist: np.ndarray, idx: np.ndarray, k: int, cap: int
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
            ok = (col < self.n) & (taken[rows, g] < cap)
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
