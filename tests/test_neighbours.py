from concurrent.futures import ThreadPoolExecutor

import numpy as np

from geo3d.geostats.neighbours import NeighbourSearch


def _brute_force(points, groups, target, k, cap):
    """Reference: sort all samples by distance, keep at most ``cap`` per group, take k."""
    d = np.linalg.norm(points - target, axis=1)
    taken, per_group = [], {}
    for i in np.argsort(d, kind="stable"):
        g = groups[i]
        if per_group.get(g, 0) < cap:
            taken.append(i)
            per_group[g] = per_group.get(g, 0) + 1
        if len(taken) == k:
            break
    return np.sort(d[taken])


def test_capped_search_is_thread_safe_on_first_use():
    # Chunks of one kriging run are searched on several threads at once; the per-group trees
    # are built lazily on first use, and no thread may see them half built.
    rng = np.random.default_rng(3)
    points = rng.uniform(0, 10, size=(600, 3))
    groups = np.repeat(np.arange(30), 20)
    targets = rng.uniform(0, 10, size=(64, 3))
    for _ in range(5):
        search = NeighbourSearch(points, groups, workers=1)

        def nearest(t, search=search):
            return search.query(t[None, :], 12, max_per_group=3)[0][0]

        with ThreadPoolExecutor(max_workers=8) as pool:
            results = list(pool.map(nearest, targets))
        for target, dist in zip(targets, results, strict=True):
            np.testing.assert_allclose(dist, _brute_force(points, groups, target, 12, 3))
