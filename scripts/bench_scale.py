"""Time the model stage on synthetic sites of growing size: borings and cells.

Each case (a number of borings, a number of model cells) is a seeded synthetic site: borings
spread uniformly over a 400 m x 400 m square, intervals every 0.1 m over 13.5 m of depth
(136 per boring, like the demo), log10 K and EC from anisotropic Gaussian fields, the demo's
hydrofacies classes and settings. The cell size is chosen so the 15 m deep block holds the
requested number of cells. Every case runs the model stage (variograms, kriging, leave-one-
boring-out cross-validation, simulations) in a fresh process, which reports the time of each
step and its peak resident set size. Growth exponents are least-squares slopes of
log(time) against log(cells) at a fixed boring count, and against log(borings) at a fixed
cell count.

Usage::

    nice -n 10 python scripts/bench_scale.py            # 25/100/400 borings x 1/4/16 M cells
    nice -n 10 python scripts/bench_scale.py --quick    # a few small cases
    python scripts/bench_scale.py --borings 25,100 --cells 250000 --realizations 2
"""

from __future__ import annotations

import argparse
import json
import resource
import subprocess
import sys
import time
import warnings
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent
SIDE, DEPTH, GROUND = 400.0, 15.0, 20.0


def make_intervals(n_borings: int, seed: int):
    """Build the borings table and composited intervals of a synthetic site."""
    import pandas as pd

    from geo3d.geostats import CovarianceModel, unconditional_fields

    rng = np.random.default_rng(seed)
    xy = rng.uniform(0.0, SIDE, size=(n_borings, 2))
    names = [f"B{i:04d}" for i in range(n_borings)]
    depth = 0.5 + 0.1 * np.arange(136)
    x = np.repeat(xy[:, 0], len(depth))
    y = np.repeat(xy[:, 1], len(depth))
    top = np.tile(depth - 0.05, n_borings)
    z = GROUND - np.tile(depth, n_borings)
    coords = np.column_stack([x, y, z])
    model = CovarianceModel("exponential", sill=1.0, nugget=0.05, range_h=150.0, range_v=3.0)
    field = unconditional_fields(coords, model=model, n_realizations=2, seed=seed)
    table = pd.DataFrame(
        {
            "boring_id": np.repeat(names, len(depth)),
            "x": x,
            "y": y,
            "top": top,
            "bottom": top + 0.1,
            "z_mid": z,
            "log10_k": -5.0 + 0.8 * field[0],
            "ec": 40.0 + 15.0 * field[1],
        }
    )
    borings = pd.DataFrame(
        {"boring_id": names, "x": xy[:, 0], "y": xy[:, 1], "ground_elev": GROUND}
    )
    return table, borings


def run_case(n_borings: int, n_cells: int, realizations: int, seed: int) -> dict:
    """Run the model stage of one synthetic site; return its timings and peak RSS."""
    import shapely

    from geo3d.errors import Geo3dWarning
    from geo3d.model import VoxelModel, build_voxel_model
    from geo3d.site import read_site

    warnings.simplefilter("ignore", Geo3dWarning)
    site = read_site(ROOT / "demo_site")
    opt = site.config.model_options()
    table, borings = make_intervals(n_borings, seed)
    dz = 0.25
    dxy = float(np.sqrt(SIDE * SIDE * DEPTH / dz / n_cells))
    shared = ("variogram_model", "azimuth", "minor_ratio", "elevation_tolerance", "neighbors")
    shared += ("max_per_group", "drift", "max_distance", "chunk_size", "scheduler")
    gridder = VoxelModel(
        facies_classes=site.config.facies_classes(),
        range_h=None,
        range_v=None,
        n_realizations=realizations,
        seed=seed,
        **{name: getattr(opt, name) for name in shared},
    )
    t0 = time.perf_counter()
    result = build_voxel_model(
        table,
        gridder,
        boundary=shapely.box(0.0, 0.0, SIDE, SIDE),
        borings=borings,
        crs=site.crs,
        cell_size=(dxy, dxy, dz),
        base=GROUND - DEPTH,
        padding=0.0,
    )
    total = time.perf_counter() - t0
    cells = int(result.dataset["mask"].sum())
    rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    return {
        "borings": n_borings,
        "cells": cells,
        "samples": len(table),
        "total": total,
        "steps": {k: round(v, 2) for k, v in result.timings.items()},
        "rss_mib": rss,
    }


def slope(x: list[float], y: list[float]) -> float:
    """Least-squares slope of log(y) against log(x)."""
    return float(np.polyfit(np.log(x), np.log(y), 1)[0])


def exponents(rows: list[dict]) -> None:
    """Print growth exponents in cells (per boring count) and in borings (per cell target)."""
    for b in sorted({r["borings"] for r in rows}):
        sel = [r for r in rows if r["borings"] == b]
        if len(sel) > 1:
            e = slope([r["cells"] for r in sel], [r["total"] for r in sel])
            print(f"growth exponent in cells at {b} borings: {e:.2f}")
    for c in sorted({r["target"] for r in rows}):
        sel = [r for r in rows if r["target"] == c]
        if len(sel) > 1:
            e = slope([r["borings"] for r in sel], [r["total"] for r in sel])
            print(f"growth exponent in borings at {c / 1e6:g} M cells: {e:.2f}")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--borings", default="25,100,400", help="boring counts")
    parser.add_argument("--cells", default="1000000,4000000,16000000", help="cell counts")
    parser.add_argument("--realizations", type=int, default=20)
    parser.add_argument("--quick", action="store_true", help="25/100 borings, 0.25/1 M cells")
    parser.add_argument("--seed", type=int, default=20261202)
    parser.add_argument("--one", default="", help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.one:
        b, c = (int(v) for v in args.one.split(","))
        print(json.dumps(run_case(b, c, args.realizations, args.seed)))
        return
    if args.quick:
        args.borings, args.cells, args.realizations = "25,100", "250000,1000000", 2
    borings = [int(v) for v in args.borings.split(",")]
    cells = [int(v) for v in args.cells.split(",")]
    cases = [(b, cells[0]) for b in borings] + [(borings[0], c) for c in cells[1:]]
    print(f"{'borings':>8}{'cells':>10}{'samples':>9}{'total s':>9}{'peak MiB':>10}  steps (s)")
    rows = []
    for b, c in cases:
        cmd = [sys.executable, __file__, "--one", f"{b},{c}", "--seed", str(args.seed)]
        cmd += ["--realizations", str(args.realizations)]
        done = subprocess.run(cmd, capture_output=True, text=True, check=False)
        if done.returncode != 0:
            print(f"{b:>8}{c:>10}  FAILED: {done.stderr.strip().splitlines()[-1:]}")
            continue
        row = json.loads(done.stdout.strip().splitlines()[-1])
        row["target"] = c
        rows.append(row)
        print(
            f"{b:>8}{row['cells']:>10}{row['samples']:>9}{row['total']:>9.1f}"
            f"{row['rss_mib']:>10.0f}  {row['steps']}",
            flush=True,
        )
    print(f"realizations: {args.realizations}")
    exponents(rows)


if __name__ == "__main__":
    main()
