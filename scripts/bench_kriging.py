"""Benchmark geo3d's moving-neighbourhood kriging against pykrige's OrdinaryKriging3D.

The case (seeded): 30 borings with 133 samples each (3,990 samples) in a 400 m x 400 m site,
log10 K-like values from an anisotropic random field, and a regular grid of voxel centres
(600,000 by default). pykrige (loop backend, ``n_closest_points = k``, fed in chunks because its
``execute`` builds a full cells-by-samples distance matrix) runs on a random sample of the cells;
geo3d on the whole grid, with the same neighbourhood. The script checks that both agree on the
shared cells and prints per-cell times, memory and, as its last line,
``speedup_vs_pykrige: <ratio>``.

pykrige's constructor runs a leave-one-out statistics step whose cost grows roughly with n^3;
it is bypassed here (and its time reported as skipped) because it has nothing to do with
prediction.

Usage::

    python scripts/bench_kriging.py                       # full case
    python scripts/bench_kriging.py --cells 20000 --pykrige-cells 300
"""

from __future__ import annotations

import argparse
import resource
import time
import tracemalloc
from unittest import mock

import numpy as np

from geo3d.geostats import CovarianceModel, OrdinaryKriging, unconditional_fields

MODEL = CovarianceModel(
    "exponential", sill=1.0, nugget=0.1, range_h=120.0, range_v=3.0, azimuth=30.0, minor_ratio=0.6
)


def build_case(n_cells: int, seed: int) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    rng = np.random.default_rng(seed)
    heads = rng.uniform(0.0, 400.0, size=(30, 2))
    ground = 20.0 + rng.normal(0.0, 0.3, size=30)
    depth = 0.5 + 0.1 * np.arange(133)
    coords = np.array(
        [[x, y, g - d] for (x, y), g in zip(heads, ground, strict=True) for d in depth]
    )
    groups = np.repeat(np.arange(30), len(depth))
    field = unconditional_fields(coords, model=MODEL, n_realizations=1, seed=seed)[0]
    values = -5.0 + field + rng.normal(0.0, np.sqrt(MODEL.nugget), len(coords))
    nz = 60
    nxy = max(1, int(round(np.sqrt(n_cells / nz))))
    xs = np.linspace(0.0, 400.0, nxy)
    zs = np.linspace(float(coords[:, 2].min()), float(coords[:, 2].max()), nz)
    zz, yy, xx = np.meshgrid(zs, xs, xs, indexing="ij")
    grid = np.column_stack([xx.ravel(), yy.ravel(), zz.ravel()])
    return coords, values, groups, grid


def run_pykrige(coords, values, cells, k, chunk=500):
    from pykrige.ok3d import OrdinaryKriging3D

    n = len(values)
    stats = (np.zeros(n), np.ones(n), np.zeros(n))
    t0 = time.perf_counter()
    with mock.patch("pykrige.ok3d._find_statistics", return_value=stats):
        pk = OrdinaryKriging3D(
            coords[:, 0],
            coords[:, 1],
            coords[:, 2],
            values,
            variogram_model=MODEL.kind,
            variogram_parameters={
                "psill": MODEL.sill,
                "range": MODEL.range_h,
                "nugget": MODEL.nugget,
            },
            anisotropy_scaling_y=1.0 / MODEL.minor_ratio,
            anisotropy_scaling_z=MODEL.range_h / MODEL.range_v,
            anisotropy_angle_z=90.0 - MODEL.azimuth,
        )
    t_setup = time.perf_counter() - t0
    est = np.empty(len(cells))
    var = np.empty(len(cells))
    t0 = time.perf_counter()
    c0 = time.process_time()
    for i in range(0, len(cells), chunk):
        c = cells[i : i + chunk]
        e, v = pk.execute("points", c[:, 0], c[:, 1], c[:, 2], backend="loop", n_closest_points=k)
        est[i : i + chunk] = e
        var[i : i + chunk] = v
    t_pred = time.perf_counter() - t0
    cpu = time.process_time() - c0
    return est, var, t_setup, t_pred, cpu


def run_geo3d(coords, values, groups, grid, k, max_per_group, chunk_size):
    tracemalloc.start()
    t0 = time.perf_counter()
    ok = OrdinaryKriging(MODEL, neighbors=k, max_per_group=max_per_group, chunk_size=chunk_size)
    ok.fit(coords, values, groups)
    t_fit = time.perf_counter() - t0
    t0 = time.perf_counter()
    c0 = time.process_time()
    est, var = ok.predict(grid)
    t_pred = time.perf_counter() - t0
    cpu = time.process_time() - c0
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    return est, var, t_fit, t_pred, peak, cpu


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--cells", type=int, default=600_000, help="grid cells (geo3d)")
    parser.add_argument("--k", type=int, default=32, help="neighbours per cell")
    parser.add_argument("--pykrige-cells", type=int, default=2000, help="cells run by pykrige")
    parser.add_argument("--chunk-size", type=int, default=20_000, help="geo3d cells per chunk")
    parser.add_argument("--max-per-boring", type=int, default=8, help="cap for the extra run")
    parser.add_argument("--seed", type=int, default=20261202)
    args = parser.parse_args()

    coords, values, groups, grid = build_case(args.cells, args.seed)
    print(f"case: {len(values)} samples in 30 borings, {len(grid)} cells, k = {args.k}")
    rng = np.random.default_rng(args.seed + 1)
    shared = rng.choice(len(grid), size=min(args.pykrige_cells, len(grid)), replace=False)

    est, var, t_fit, t_pred, peak, cpu = run_geo3d(
        coords, values, groups, grid, args.k, 0, args.chunk_size
    )
    per_cell = t_pred / len(grid) * 1e6
    cpu_cell = cpu / len(grid) * 1e6
    print(
        f"geo3d: fit {t_fit:.2f} s, predict {t_pred:.2f} s wall = {per_cell:.2f} us/cell "
        f"(CPU {cpu_cell:.2f} us/cell, all threads)"
    )
    print(f"geo3d: traced peak memory during fit+predict {peak / 2**20:.0f} MiB")
    print(
        f"geo3d: {per_cell / 2.0:.1f}x to {per_cell / 1.0:.1f}x the 1-2 us/cell arithmetic "
        "floor of one 33x33 system per cell (wall)"
    )
    n_nan = int(np.isnan(est).sum())
    print(f"geo3d: {n_nan} cells NaN (no max_distance set, expected 0)")

    pe, pv, t_setup, t_pk, pk_cpu = run_pykrige(coords, values, grid[shared], args.k)
    pk_cell = t_pk / len(shared) * 1e6
    pk_cpu_cell = pk_cpu / len(shared) * 1e6
    print(
        f"pykrige: constructor {t_setup:.2f} s (its n^3 leave-one-out statistics step "
        "BYPASSED, not timed)"
    )
    print(
        f"pykrige: loop backend, n_closest_points={args.k}, {len(shared)} cells in chunks: "
        f"{t_pk:.2f} s wall = {pk_cell:.1f} us/cell (CPU {pk_cpu_cell:.1f} us/cell)"
    )
    rel_e = np.max(np.abs(est[shared] - pe) / np.maximum(np.abs(pe), 1e-12))
    rel_v = np.max(np.abs(var[shared] - pv) / np.maximum(np.abs(pv), 1e-12))
    agree = max(rel_e, rel_v) <= 1e-6
    print(
        f"agreement on {len(shared)} shared cells: max relative difference estimate "
        f"{rel_e:.2e}, variance {rel_v:.2e} -> {'OK' if agree else 'FAIL'} (1e-6)"
    )

    if args.max_per_boring > 0:
        _, _, _, t_cap, peak_cap, _ = run_geo3d(
            coords, values, groups, grid, args.k, args.max_per_boring, args.chunk_size
        )
        print(
            f"geo3d with at most {args.max_per_boring} samples per boring: predict "
            f"{t_cap:.2f} s = {t_cap / len(grid) * 1e6:.2f} us/cell, traced peak "
            f"{peak_cap / 2**20:.0f} MiB"
        )
    rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(f"process max resident set size (all runs, incl. pykrige): {rss:.0f} MiB")
    print(f"speedup in CPU time per cell: {pk_cpu_cell / cpu_cell:.1f} (wall-clock below)")
    print(f"speedup_vs_pykrige: {pk_cell / per_cell:.1f}")


if __name__ == "__main__":
    main()
