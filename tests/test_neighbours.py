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


def _boring_points(rng, n_groups, per_group):
    """Vertical borings (scaled space: horizontal in ranges, elevation stretched)."""
    heads = rng.uniform(0, 20, size=(n_groups, 2))
    z = rng.uniform(0, 6, size=(n_groups, per_group))
    points = np.column_stack(
        [np.repeat(heads[:, 0], per_group), np.repeat(heads[:, 1], per_group), z.ravel()]
    )
    return points, np.repeat(np.arange(n_groups), per_group)


def test_capped_search_among_many_borings_equals_brute_force():
    # The capped search visits only the borings near each target (k-d tree of boring
    # centres); the neighbourhood must still be the exact capped one (GSLIB sec. IV.1).
    rng = np.random.default_rng(11)
    points, groups = _boring_points(rng, 150, 12)
    targets = np.column_stack([rng.uniform(-2, 22, (200, 2)), rng.uniform(-1, 7, 200)])
    dist, _ = NeighbourSearch(points, groups).query(targets, 16, max_per_group=3)
    for t, d in zip(targets, dist, strict=True):
        np.testing.assert_allclose(d, _brute_force(points, groups, t, 16, 3))


def test_excluding_a_group_equals_searching_the_others():
    # Leaving a boring out of the search must give the neighbourhood of a search built on the
    # other samples only (same samples, indices mapped back), capped or not.
    rng = np.random.default_rng(5)
    points, groups = _boring_points(rng, 20, 15)
    points[:, 2] = np.round(points[:, 2], 1)  # ties in distance, as on a regular spacing
    targets = points[groups == 4] + 0.01
    keep = np.flatnonzero(groups != 4)
    full = NeighbourSearch(points, groups)
    rest = NeighbourSearch(points[keep], groups[keep])
    mapping = np.append(keep, len(points))
    for cap in (0, 3):
        d1, i1 = full.query(targets, 10, max_per_group=cap, exclude=4)
        d2, i2 = rest.query(targets, 10, max_per_group=cap)
        np.testing.assert_array_equal(d1, d2)
        if cap == 0:
            np.testing.assert_array_equal(i1, mapping[i2])
        else:
            np.testing.assert_array_equal(np.sort(i1, axis=1), np.sort(mapping[i2], axis=1))
