"""Score the job's volumes and P10-P90 bands on random synthetic-truth sites.

Usage::

    python scripts/validate.py --sites N --seed S [--engine gaussian|facies] [--keep FOLDER]
        [--csv FILE]

Draws N sites (seeds S, S+1, ...) with :mod:`geo3d.validation.truth`, runs the whole job on
each through the library and prints, per site, every zone-facies volume and the saturated site
volumes per facies against the truth, then a summary.  The last line is
``coverage: <x> median_abs_error: <y>``: the share of zone-facies volumes whose truth lies in
P10-P90, and the median absolute relative error of the zone-facies volumes whose class holds at
least 5 % of the zone.
"""

from __future__ import annotations

import argparse
import tempfile
from pathlib import Path

import pandas as pd

COLUMNS = ["zone", "part", "facies", "truth_m3", "estimate_m3", "p10_m3", "p90_m3", "rel_error",
           "width", "inside"]  # fmt: skip


def _print_site(score) -> None:
    info = score.info
    print(
        f"\nsite {score.seed}: {info['n_borings']} borings ({info['layout']}, ~"
        f"{info['spacing_m']:.0f} m), styles {'+'.join(info['styles'])}, depth "
        f"{info['depth_m']:.1f} m, water at ~{info['depth_to_water_m']:.1f} m; "
        f"{score.timings['cpu']:.0f} s CPU, "
        f"{sum(v for k, v in score.timings.items() if k != 'cpu'):.0f} s wall"
    )
    table = score.table
    shown = table[(table["zone"] != "site") | (table["part"] == "saturated")]
    with pd.option_context("display.width", 160, "display.max_columns", 20):
        print(shown[COLUMNS].round(3).to_string(index=False))


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sites", type=int, default=10, help="number of sites")
    parser.add_argument("--seed", type=int, default=1, help="seed of the first site")
    parser.add_argument(
        "--engine", default="gaussian", choices=["gaussian", "facies"], help="model engine"
    )
    parser.add_argument("--keep", type=Path, default=None, help="keep the site folders here")
    parser.add_argument("--csv", type=Path, default=None, help="write every score row here")
    args = parser.parse_args()

    from geo3d.validation.score import run_site, summarize

    scores = []
    with tempfile.TemporaryDirectory() as scratch:
        folder = args.keep or Path(scratch)
        for seed in range(args.seed, args.seed + args.sites):
            score = run_site(seed, folder, engine=args.engine)
            _print_site(score)
            scores.append(score)
    if args.csv is not None:
        pd.concat([s.table for s in scores]).to_csv(args.csv, index=False)
    summary = summarize(scores)
    cpu = [s.timings["cpu"] for s in scores]
    print(f"\n{len(scores)} sites, {summary['n_counted']} zone-facies volumes counted, "
          f"{summary['n_scored']} scored (class >= 5 % of its zone)")  # fmt: skip
    print(f"median P10-P90 width / truth: {summary['median_width']:.3f}")
    for facies, error in summary["saturated_site_error"].items():
        print(f"saturated site volume, {facies}: median |error| {error:.3f}")
    print(f"saturated site volumes inside P10-P90: {summary['saturated_site_coverage']:.3f}")
    print(f"CPU per site: median {pd.Series(cpu).median():.1f} s, max {max(cpu):.1f} s")
    coverage, error = summary["coverage"], summary["median_abs_error"]
    print(f"coverage: {coverage:.3f} median_abs_error: {error:.3f}")


if __name__ == "__main__":
    main()
