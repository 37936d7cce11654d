"""Score the advised boring against a random and a largest-variance one on synthetic sites.

Usage::

    python scripts/validate_advise.py --trials N --seed S [--holdout 0.3] [--realizations 20]
        [--criterion summed|block] [--csv FILE]

Each trial draws a synthetic-truth site (:mod:`geo3d.validation`), writes and reads it, and
holds out a random share of its borings: their records are the places where the truth can be
"drilled". The model is built from the other borings; geo3d is asked for the next boring among
the held-out locations (:func:`geo3d.analysis.advise.advise_borings` with given candidates);
then the model is rebuilt with, in turn, the advised boring, a random held-out boring and the
held-out boring where the model is most uncertain (the largest target-weighted indicator
variance p(1 - p) summed down the column). The target is the storage-material volume of all
treatment zones. Per trial the script prints the P10-P90 width before and after each choice
and the absolute error of the expected volume against the truth.

The last line is ``advised_beats_random: <x> advised_beats_maxvar: <y> trials: <n>``: the share
of trials in which the advised boring narrowed the band more than the random one (ties count
half), and more than the largest-variance one.
"""

from __future__ import annotations

import argparse
import dataclasses
import json
import tempfile
import time
import warnings
from pathlib import Path

import numpy as np
import pandas as pd

from geo3d.analysis.advise import advise_borings, target_cells
from geo3d.pipeline import run_logs, run_model
from geo3d.site import Site, read_site
from geo3d.validation.sitefolder import write_site
from geo3d.validation.truth import draw_site

TABLES = ("borings", "samples", "dissipation", "slug_tests", "sensor_checks")


def subset(site: Site, keep: set[str]) -> Site:
    """Return the site with only the borings ``keep`` (every per-boring table filtered)."""
    changes = {}
    for name in TABLES:
        table = getattr(site, name)
        if table is not None and "boring_id" in table.columns:
            changes[name] = table[table["boring_id"].astype(str).isin(keep)].reset_index(drop=True)
    return dataclasses.replace(site, **changes)


def band(site: Site, n_realizations: int) -> dict:
    """Build the model of a site; return its storage target: P10, P90, expected value."""
    logs = run_logs(site)
    model = run_model(site, logs, n_realizations=n_realizations)
    zones = site.zones if len(site.zones) else None
    cells = target_cells(model.dataset, zones, "storage")
    values = cells.realization_values(model.dataset)[cells.total]
    p10, p90 = np.percentile(values, (10, 90))
    expected = cells.expected_values(model.dataset)[cells.total]
    return {"p10": p10, "p90": p90, "width": p90 - p10, "expected": expected,
            "logs": logs, "model": model}  # fmt: skip


def truth_storage(folder: Path, zone_names: list[str]) -> float:
    """Return the true storage volume of the zones (the saturated site without zones)."""
    volumes = pd.DataFrame(json.loads((folder / "truth" / "truth.json").read_text())["volumes"])
    storage = volumes[volumes["facies"] == "storage"]
    if zone_names:
        return float(storage[(storage["zone"].isin(zone_names)) & (storage["part"] == "all")]
                     ["volume_m3"].sum())  # fmt: skip
    return float(storage[(storage["zone"] == "site") & (storage["part"] == "saturated")]
                 ["volume_m3"].sum())  # fmt: skip


def _choices(site: Site, base: dict, held: list[str], rng, criterion: str) -> dict[str, str]:
    """Return the advised, a random and the largest-variance held-out boring."""
    ds = base["model"].dataset
    borings = site.borings.set_index("boring_id")
    xy = borings.loc[held, ["x", "y"]].to_numpy(float)
    intervals = base["logs"].intervals
    finite = np.isfinite(intervals["log10_k"].to_numpy(float))
    advice = advise_borings(
        ds, intervals.loc[finite, ["x", "y", "z_mid"]].to_numpy(float),
        borings.drop(index=held)[["x", "y"]].to_numpy(float), site.boundary, n_borings=1,
        covariance=base["model"].variograms.get("log10_k_normal_score",
                                                base["model"].variograms["log10_k"]).model,
        zones=site.zones if len(site.zones) else None, candidates=xy, criterion=criterion,
    )  # fmt: skip
    best = advice.proposed[["x", "y"]].to_numpy(float)[0]
    advised = held[int(np.argmin(np.hypot(*(xy - best).T)))]
    unc = advice.uncertainty
    ix = np.abs(unc["x"].values[None] - xy[:, :1]).argmin(axis=1)
    iy = np.abs(unc["y"].values[None] - xy[:, 1:]).argmin(axis=1)
    maxvar = held[int(np.argmax(unc.values[iy, ix]))]
    return {"advised": advised, "random": held[int(rng.integers(len(held)))], "maxvar": maxvar}


def trial(seed: int, folder: Path, args: argparse.Namespace) -> dict:
    """One trial: base model, then one model per distinct chosen boring."""
    rng = np.random.default_rng(seed + 7919)
    path = write_site(draw_site(seed), folder / f"site_{seed}")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        full = read_site(path)
        ids = [str(b) for b in full.borings["boring_id"]]
        n_held = max(3, round(args.holdout * len(ids)))
        held = sorted(rng.choice(ids, n_held, replace=False).tolist())
        kept = set(ids) - set(held)
        base = band(subset(full, kept), args.realizations)
        start = time.perf_counter()
        chosen = _choices(full, base, held, rng, args.criterion)
        advise_s = time.perf_counter() - start
        after = {b: band(subset(full, kept | {b}), args.realizations)
                 for b in sorted(set(chosen.values()))}  # fmt: skip
    truth = truth_storage(path, [str(n) for n in full.zones["name"]] if len(full.zones) else [])
    row = {"seed": seed, "n_borings": len(ids), "n_held": n_held, "truth_m3": truth,
           "width_before": base["width"], "error_before": abs(base["expected"] - truth),
           "advise_s": advise_s}  # fmt: skip
    for name, boring in chosen.items():
        row[f"{name}_boring"] = boring
        row[f"width_{name}"] = after[boring]["width"]
        row[f"error_{name}"] = abs(after[boring]["expected"] - truth)
    return row


def _beats(table: pd.DataFrame, other: str) -> float:
    a, b = table["width_advised"], table[f"width_{other}"]
    return float(((a < b - 1e-9) + 0.5 * (np.abs(a - b) <= 1e-9)).mean())


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--trials", type=int, default=20, help="number of trials (sites)")
    parser.add_argument("--seed", type=int, default=1, help="seed of the first site")
    parser.add_argument("--holdout", type=float, default=0.3, help="share of borings held out")
    parser.add_argument("--realizations", type=int, default=20, help="realizations per model")
    parser.add_argument("--criterion", default="summed", choices=["summed", "block"])
    parser.add_argument("--csv", type=Path, default=None, help="write the trial rows here")
    args = parser.parse_args()
    rows = []
    with tempfile.TemporaryDirectory() as scratch:
        for seed in range(args.seed, args.seed + args.trials):
            start = time.perf_counter()
            row = trial(seed, Path(scratch), args)
            rows.append(row)
            if args.csv is not None:  # after every trial, so that a stopped run keeps its rows
                pd.DataFrame(rows).to_csv(args.csv, index=False)
            print(f"seed {seed}: {row['n_borings']} borings, {row['n_held']} held out; width "
                  f"{row['width_before']:.1f} m3 -> advised {row['width_advised']:.1f} "
                  f"({row['advised_boring']}), random {row['width_random']:.1f}, largest "
                  f"variance {row['width_maxvar']:.1f}; |error| {row['error_before']:.1f} -> "
                  f"{row['error_advised']:.1f} / {row['error_random']:.1f} / "
                  f"{row['error_maxvar']:.1f} m3; advise {row['advise_s']:.1f} s, trial "
                  f"{time.perf_counter() - start:.0f} s", flush=True)  # fmt: skip
    table = pd.DataFrame(rows)
    banded = table[table["width_before"] > 0]  # a zero band cannot narrow
    print(f"{len(banded)} of {len(table)} trials have a non-zero band before the new boring")
    for name in ("advised", "random", "maxvar"):
        narrowing = 1 - banded[f"width_{name}"] / banded["width_before"]
        print(f"{name}: median narrowing {narrowing.median():.3f}, mean {narrowing.mean():.3f}; "
              f"median |error| {table[f'error_{name}'].median():.1f} m3")  # fmt: skip
    print(f"advised_beats_random: {_beats(table, 'random'):.3f} advised_beats_maxvar: "
          f"{_beats(table, 'maxvar'):.3f} trials: {len(table)}")  # fmt: skip


if __name__ == "__main__":
    main()
