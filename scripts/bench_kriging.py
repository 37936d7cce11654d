"""Benchmark geo3d's moving-neighbourhood kriging against pykrige's OrdinaryKriging3D.

The case (seeded): 30 borings with 133 samples each (3,990 samples) in a 400 m x 400 m site,
log10 K-like values from an anisotropic random field. Two sets of target cells, both run by
both engines:

- a regular grid of voxel centres (``--cells``, 120,000 by default);
- a scattered set of points drawn uniformly in the same box (``--scattered``).

Timings:

- pykrige (loop backend, ``n_closest_points = k``) is fed in chunks, because every
  ``execute`` call rebuilds its full samples-by-samples kriging matrix and a
  cells-by-samples distance matrix. The chunk size is searched first (``--pykrige-chunks``)
  and the fastest per-cell setting is used for both target sets. Its constructor is timed
  apart; the constructor's leave-one-out statistics step (cost ~n^3, unrelated to
  prediction) is bypassed and says so.
- geo3d: ``fit`` (neighbour structures, sample covariance) apart from ``predict``.
- Same neighbourhood in both engines: the k nearest samples (no per-boring cap), checked to
  agree to 1e-6 on the scattered set. geo3d's default neighbourhood (per-boring cap,
  larger k) is timed too.

Accuracy: the RMS difference between neighbourhood kriging and GLOBAL kriging (all samples,
the same variogram), in % of the data standard deviation, on the benchmark case and on the demo
site's log10 K and EC (its intervals, its fitted variograms, ``--demo`` to switch off).

The last line is ``speedup_vs_pykrige: <ratio>``: wall-clock per cell on the regular grid,
pykrige at its fastest chunk size, both engines with the same k nearest samples.

Usage::

    python scripts/bench_kriging.py                 # full case (~2-4 minutes on 2 cores)
    python scripts/bench_kriging.py --cells 20000 --scattered 500 --no-demo
"""

from __future__ import annotations

import argparse
import resource
import time
import warnings
from pathlib import Path
from unittest import mock

import numpy as np

from geo3d.geostats import CovarianceModel, OrdinaryKriging, unconditional_fields

ROOT = Path(__file__).resolve().parent.parent
#: ``fit_anisotropic`` keyword -> site model option.
VARIOGRAM_OPTIONS = {
    "model": "variogram_model",
    "range_h": "range_h",
    "range_v": "range_v",
    "azimuth": "azimuth",
    "minor_ratio": "minor_ratio",
    "elevation_tolerance": "elevation_tolerance",
}
MODEL = CovarianceModel(
    "exponential", sill=1.0, nugget=0.1, range_h=120.0, range_v=3.0, azimuth=30.0, minor_ratio=0.6
)


def build_case(n_cells: int, seed: int) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Build samples (coords, values, boring labels) and a regular grid of about ``n_cells``."""
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


def scattered_cells(coords: np.ndarray, n: int, seed: int) -> np.ndarray:
    """``n`` points uniform in the box of the site (400 m x 400 m, the sampled elevations)."""
    rng = np.random.default_rng(seed)
    lo = np.array([0.0, 0.0, coords[:, 2].min()])
    hi = np.array([400.0, 400.0, coords[:, 2].max()])
    return rng.uniform(lo, hi, size=(n, 3))


def pykrige_model(coords: np.ndarray, values: np.ndarray, model: CovarianceModel):
    """Pykrige's OrdinaryKriging3D with the same anisotropic model (statistics step bypassed)."""
    from pykrige.ok3d import OrdinaryKriging3D

    n = len(values)
    stats = (np.zeros(n), np.ones(n), np.zeros(n))
    with mock.patch("pykrige.ok3d._find_statistics", return_value=stats):
        return OrdinaryKriging3D(
            coords[:, 0],
            coords[:, 1],
            coords[:, 2],
            values,
            variogram_model=model.kind,
            variogram_parameters={
                "psill": model.sill,
                "range": model.range_h,
                "nugget": model.nugget,
            },
            anisotropy_scaling_y=1.0 / model.minor_ratio,
            anisotropy_scaling_z=model.range_h / model.range_v,
            anisotropy_angle_z=90.0 - model.azimuth,
        )


def run_pykrige(pk, cells: np.ndarray, k: int, chunk: int) -> tuple[np.ndarray, np.ndarray, float]:
    """Estimate, variance and wall time of pykrige on ``cells`` in chunks of ``chunk``."""
    est = np.empty(len(cells))
    var = np.empty(len(cells))
    t0 = time.perf_counter()
    for i in range(0, len(cells), chunk):
        c = cells[i : i + chunk]
        e, v = pk.execute("points", c[:, 0], c[:, 1], c[:, 2], backend="loop", n_closest_points=k)
        est[i : i + chunk] = e
        var[i : i + chunk] = v
    return est, var, time.perf_counter() - t0


def best_pykrige_chunk(pk, cells: np.ndarray, k: int, sizes: list[int]) -> int:
    """Time one chunk of each size on cells spread over the set; return the fastest per cell."""
    best, best_us = sizes[0], np.inf
    for size in sizes:
        step = max(1, len(cells) // size)
        sub = cells[::step][:size]
        _, _, t = run_pykrige(pk, sub, k, size)
        us = t / len(sub) * 1e6
        print(f"  pykrige chunk {size:>6}: {us:7.1f} us/cell ({len(sub)} cells, one call)")
        if us < best_us:
            best, best_us = size, us
    return best


def run_geo3d(
    coords, values, groups, cells, **options
) -> tuple[np.ndarray, np.ndarray, float, float]:
    """Estimate, variance, fit time and predict time of geo3d's kriging."""
    t0 = time.perf_counter()
    ok = OrdinaryKriging(MODEL if "model" not in options else options.pop("model"), **options)
    ok.fit(coords, values, groups)
    t_fit = time.perf_counter() - t0
    t0 = time.perf_counter()
    est, var = ok.predict(cells)
    return est, var, t_fit, time.perf_counter() - t0


def global_difference(coords, values, groups, cells, model, **options) -> tuple[float, float]:
    """RMS difference of neighbourhood from global kriging, estimate and SD, % of data SD."""
    ge, gv = OrdinaryKriging(model, global_mode=True).fit(coords, values, groups).predict(cells)
    le, lv = OrdinaryKriging(model, **options).fit(coords, values, groups).predict(cells)
    sd = float(np.std(values))
    d_est = float(np.sqrt(np.nanmean((le - ge) ** 2))) / sd * 100.0
    d_sd = float(np.sqrt(np.nanmean((np.sqrt(lv) - np.sqrt(gv)) ** 2))) / sd * 100.0
    return d_est, d_sd


def default_neighbourhood() -> dict[str, int]:
    """Return the ``[kriging]`` defaults of a site file."""
    from geo3d.config import KrigingSection

    section = KrigingSection()
    return {"neighbors": int(section.neighbors), "max_per_group": int(section.max_per_boring)}


def demo_samples() -> list[tuple[str, CovarianceModel, np.ndarray, np.ndarray, np.ndarray]]:
    """Read the demo site's log10 K and EC intervals with their fitted variogram models."""
    from geo3d.errors import Geo3dWarning
    from geo3d.geostats.variogram import fit_anisotropic
    from geo3d.pipeline import run_logs
    from geo3d.site import read_site

    warnings.simplefilter("ignore", Geo3dWarning)
    site = read_site(ROOT / "demo_site")
    table = run_logs(site).intervals
    opt = site.config.model_options()
    out = []
    for column in ("log10_k", "ec"):
        rows = table[np.isfinite(table[column].to_numpy(float))]
        c = rows[["x", "y", "z_mid"]].to_numpy(float)
        v = rows[column].to_numpy(float)
        g = rows["boring_id"].to_numpy()
        settings = {key: getattr(opt, name) for key, name in VARIOGRAM_OPTIONS.items()}
        fit = fit_anisotropic(c, v, g, **settings)
        out.append((column, fit.model, c, v, g))
    return out


def accuracy_section(coords, values, groups, grid, args) -> None:
    """Print the RMS difference from global kriging for several neighbourhoods."""
    rng = np.random.default_rng(args.seed + 2)
    sub = grid[rng.choice(len(grid), size=min(args.global_cells, len(grid)), replace=False)]
    default = default_neighbourhood()
    hoods = [
        ("k nearest (as pykrige)", {"neighbors": args.k, "max_per_group": 0}),
        (
            f"default (k = {default['neighbors']}, <= {default['max_per_group']} per boring)",
            default,
        ),
    ]
    cases = [("benchmark", MODEL, coords, values, groups, sub)]
    if args.demo:
        for column, model, c, v, g in demo_samples():
            lo, hi = c.min(axis=0), c.max(axis=0)
            cells = rng.uniform(lo, hi, size=(args.global_cells, 3))
            cases.append((f"demo {column}", model, c, v, g, cells))
    print(
        f"RMS difference from GLOBAL kriging (same variogram), % of the data SD, "
        f"{args.global_cells} cells per case:"
    )
    for name, model, c, v, g, cells in cases:
        for label, hood in hoods:
            d_est, d_sd = global_difference(c, v, g, cells, model, **hood)
            print(f"  {name:<13} {label:<42} estimate {d_est:5.1f} %, kriging SD {d_sd:5.1f} %")


def compare(label: str, cells, geo, pk_time: float, pk_est, pk_var) -> float:
    """Print both engines on the same cells; return the wall-clock ratio."""
    est, var, t_fit, t_pred = geo
    g_us = t_pred / len(cells) * 1e6
    p_us = pk_time / len(cells) * 1e6
    rel_e = np.max(np.abs(est - pk_est) / np.maximum(np.abs(pk_est), 1e-12))
    rel_v = np.max(np.abs(var - pk_var) / np.maximum(np.abs(pk_var), 1e-12))
    print(
        f"{label}: {len(cells)} cells; geo3d fit {t_fit:.2f} s, predict {g_us:.2f} us/cell; "
        f"pykrige predict {p_us:.1f} us/cell; ratio {p_us / g_us:.1f}"
    )
    print(f"  agreement: max relative difference estimate {rel_e:.1e}, variance {rel_v:.1e}")
    return p_us / g_us


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--cells", type=int, default=120_000, help="regular-grid cells")
    parser.add_argument("--scattered", type=int, default=4000, help="scattered cells")
    parser.add_argument("--k", type=int, default=32, help="neighbours (same in both engines)")
    parser.add_argument(
        "--pykrige-chunks", default="1000,4000,16000", help="chunk sizes tried for pykrige"
    )
    parser.add_argument("--global-cells", type=int, default=2000, help="cells per global check")
    parser.add_argument("--no-demo", dest="demo", action="store_false", help="skip the demo")
    parser.add_argument("--seed", type=int, default=20261202)
    args = parser.parse_args()

    coords, values, groups, grid = build_case(args.cells, args.seed)
    scattered = scattered_cells(coords, args.scattered, args.seed + 1)
    print(
        f"case: {len(values)} samples in 30 borings; regular grid {len(grid)} cells, "
        f"scattered {len(scattered)} cells; k = {args.k} nearest in both engines"
    )
    t0 = time.perf_counter()
    pk = pykrige_model(coords, values, MODEL)
    print(
        f"pykrige: constructor {time.perf_counter() - t0:.2f} s (its ~n^3 leave-one-out "
        "statistics step BYPASSED, not timed)"
    )
    sizes = [int(s) for s in args.pykrige_chunks.split(",")]
    chunk = best_pykrige_chunk(pk, grid, args.k, sizes)
    print(f"pykrige: fastest chunk size {chunk}, used below")
    same = {"neighbors": args.k, "max_per_group": 0}
    ratios = {}
    for label, cells in (("scattered", scattered), ("regular grid", grid)):
        pe, pv, pt = run_pykrige(pk, cells, args.k, chunk)
        ratios[label] = compare(
            label, cells, run_geo3d(coords, values, groups, cells, **same), pt, pe, pv
        )
    default = default_neighbourhood()
    for label, cells in (("scattered", scattered), ("regular grid", grid)):
        _, _, t_fit, t_pred = run_geo3d(coords, values, groups, cells, **default)
        print(
            f"geo3d default neighbourhood {default}, {label}: fit {t_fit:.2f} s, "
            f"predict {t_pred / len(cells) * 1e6:.2f} us/cell"
        )
    accuracy_section(coords, values, groups, grid, args)
    rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(f"process max resident set size: {rss:.0f} MiB")
    print(f"scattered_speedup_vs_pykrige: {ratios['scattered']:.1f}")
    print(f"speedup_vs_pykrige: {ratios['regular grid']:.1f}")


if __name__ == "__main__":
    main()
