"""Score the volumes of the whole job against synthetic truth.

For each site (:mod:`geo3d.validation.truth`), :func:`run_site` writes the site folder, runs the
job through the library (read the site, the logs stage, the model stage, the volumes) and
compares, per treatment zone and facies and for the saturated part of the whole site per facies:

* the relative error of the expected volume, ``(estimate - truth) / truth``;
* whether the truth lies inside the P10-P90 band of the realizations;
* the width of the band relative to the truth, ``(P90 - P10) / truth``.

:func:`summarize` pools the sites: coverage (share of zone-facies volumes whose truth lies in
P10-P90; a zone-facies volume counts when its class holds at least 1 % of the zone in the
truth or in the estimate) and the median absolute relative error of the zone-facies volumes
whose class holds at least 5 % of the zone in the truth.
"""

from __future__ import annotations

import json
import logging
import time
import warnings
from collections.abc import Callable
from dataclasses import dataclass, field
from os import PathLike
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import xarray as xr

from geo3d.analysis.fields import realization_facies
from geo3d.analysis.volumes import zone_volumes
from geo3d.pipeline import run_logs, run_model
from geo3d.site import read_site
from geo3d.validation.sitefolder import write_site
from geo3d.validation.truth import FACIES, draw_site

__all__ = [
    "SiteScore",
    "part_volumes",
    "score_volumes",
    "run_site",
    "summarize",
]

logger = logging.getLogger(__name__)

#: Share of the zone a class must hold (truth or estimate) for its volume to be scored.
COUNT_SHARE = 0.01
#: Share of the zone a class must hold in the truth for its error to enter the median.
ERROR_SHARE = 0.05


@dataclass
class SiteScore:
    """Scores of one site.

    Attributes
    ----------
    seed
        The site's seed.
    table
        One row per scored volume: ``seed``, ``zone``, ``part``, ``facies``, ``truth_m3``,
        ``estimate_m3``, ``p10_m3``, ``p90_m3``, ``rel_error``, ``inside``, ``width``,
        ``share`` (the class's share of the region in the truth).
    timings
        Stage -> wall-clock seconds, and ``cpu``: processor seconds of the whole site.
    info
        The site's drawn parameters.
    """

    seed: int
    table: pd.DataFrame
    timings: dict[str, float] = field(default_factory=dict)
    info: dict[str, Any] = field(default_factory=dict)


def part_volumes(ds: xr.Dataset) -> pd.DataFrame:
    """Return the expected volume and P10/P90 per facies in the saturated, unsaturated parts.

    Returns
    -------
    pandas.DataFrame
        ``part`` (``saturated``/``unsaturated``/``all``), ``facies``, ``estimate_m3``, ``p10_m3``,
        ``p90_m3``.
    """
    names = [str(n) for n in np.ravel(ds.attrs["facies_names"])]
    mask = ds["mask"].values.astype(bool)
    saturated = ds["saturated"].values.astype(bool) & mask
    cell = float(np.prod(ds.voxels.cell_size))
    sims = realization_facies(ds)
    rows = []
    for part, weight in (
        ("saturated", saturated),
        ("unsaturated", mask & ~saturated),
        ("all", mask),
    ):
        for i, name in enumerate(names):
            prob = np.nan_to_num(ds[f"prob_{name}"].values, nan=0.0)
            per_sim = [float(((s == i) & weight).sum()) * cell for s in sims]
            p10, p90 = np.percentile(per_sim, [10, 90]) if per_sim else (np.nan, np.nan)
            rows.append(
                {
                    "part": part,
                    "facies": name,
                    "estimate_m3": float((prob * weight).sum()) * cell,
                    "p10_m3": float(p10),
                    "p90_m3": float(p90),
                }
            )
    return pd.DataFrame(rows)


def _score_rows(truth: pd.DataFrame, estimate: pd.DataFrame) -> pd.DataFrame:
    table = truth.merge(estimate, on=["zone", "part", "facies"], how="left")
    with np.errstate(divide="ignore", invalid="ignore"):
        table["rel_error"] = (table["estimate_m3"] - table["truth_m3"]) / table["truth_m3"]
        table["width"] = (table["p90_m3"] - table["p10_m3"]) / table["truth_m3"]
    tol = 1e-9 * table["truth_m3"].abs().max()
    table["inside"] = (table["p10_m3"] - tol <= table["truth_m3"]) & (
        table["truth_m3"] <= table["p90_m3"] + tol
    )
    return table


def score_volumes(
    truth: pd.DataFrame, zone_table: pd.DataFrame, parts: pd.DataFrame
) -> pd.DataFrame:
    """Compare estimated volumes with the truth.

    Parameters
    ----------
    truth
        :func:`geo3d.validation.truth.truth_volumes` (``zone``, ``part``, ``facies``,
        ``volume_m3``).
    zone_table
        :func:`geo3d.analysis.volumes.zone_volumes` of the model.
    parts
        :func:`part_volumes` of the model.

    Returns
    -------
    pandas.DataFrame
        See :class:`SiteScore`; zone rows have ``part='all'``, site rows ``zone='site'``.
    """
    t = truth[truth["facies"].isin(FACIES)].copy()
    totals = truth[truth["facies"] == "all"].set_index(["zone", "part"])["volume_m3"]
    region_total = totals.reindex(pd.MultiIndex.from_frame(t[["zone", "part"]])).to_numpy()
    with np.errstate(divide="ignore", invalid="ignore"):
        t["share"] = np.where(region_total > 0, t["volume_m3"].to_numpy() / region_total, 0.0)
    t = t.rename(columns={"volume_m3": "truth_m3"})
    zones = zone_table[(zone_table["zone"] != "site") & zone_table["facies"].isin(FACIES)]
    if "band" in zones.columns:
        zones = zones[zones["band"].astype(str) == "all"]
    est_zone = pd.DataFrame(
        {
            "zone": zones["zone"].astype(str),
            "part": "all",
            "facies": zones["facies"],
            "estimate_m3": zones["bulk_volume_m3"],
            "p10_m3": zones["bulk_volume_m3_p10"],
            "p90_m3": zones["bulk_volume_m3_p90"],
        }
    )
    est_site = parts.assign(zone="site")
    zone_rows = _score_rows(t[(t["zone"] != "site") & (t["part"] == "all")], est_zone)
    site_rows = _score_rows(t[t["zone"] == "site"], est_site)
    return pd.concat([zone_rows, site_rows], ignore_index=True)


def run_site(
    seed: int,
    folder: str | PathLike,
    *,
    engine: str = "gaussian",
    model: Callable[[Any, Any], Any] | None = None,
    n_borings: int | None = None,
    n_realizations: int | None = None,
) -> SiteScore:
    """Draw a site, write it, run the job on it and score the volumes.

    Parameters
    ----------
    seed
        Seed of the site.
    folder
        Where the site folder is written (``<folder>/site_<seed>``).
    engine
        Model engine of :func:`geo3d.pipeline.run_model` (``"gaussian"`` or ``"facies"``).
    model
        ``model(site, logs) -> ModelResult`` to use instead of the pipeline's model stage.
    n_borings
        Number of borings of the site (default drawn).
    n_realizations
        Overrides the site's realization count (20).

    Returns
    -------
    SiteScore
    """
    timings: dict[str, float] = {}
    clock = time.perf_counter()
    cpu = time.process_time()

    def lap(name: str) -> None:
        nonlocal clock
        now = time.perf_counter()
        timings[name] = now - clock
        clock = now

    truth_site = draw_site(seed, n_borings=n_borings)
    path = write_site(truth_site, Path(folder) / f"site_{seed}")
    truth = pd.DataFrame(json.loads((path / "truth" / "truth.json").read_text())["volumes"])
    lap("truth")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        site = read_site(path)
        logs = run_logs(site)
        lap("logs")
        if model is not None:
            result = model(site, logs)
        else:
            result = run_model(site, logs, engine=engine, n_realizations=n_realizations)
        lap("model")
        zones = site.zones if len(site.zones) else None
        zone_table = zone_volumes(result.dataset, zones)
        parts = part_volumes(result.dataset)
    lap("volumes")
    timings["cpu"] = time.process_time() - cpu
    table = score_volumes(truth, zone_table, parts)
    table.insert(0, "seed", seed)
    return SiteScore(seed, table, timings, dict(truth_site.info))


def summarize(scores: list[SiteScore]) -> dict[str, Any]:
    """Pool site scores: coverage, median absolute error, band widths, site errors per facies.

    Returns
    -------
    dict
        ``coverage`` (zone-facies volumes holding >= 1 % of their zone in truth or estimate),
        ``median_abs_error`` (zone-facies volumes holding >= 5 % in truth), ``median_width``
        (same volumes), ``n_counted``, ``n_scored``, ``saturated_site_error`` (facies -> median
        absolute relative error of the saturated site volume), ``saturated_site_coverage``.
    """
    table = pd.concat([s.table for s in scores], ignore_index=True)
    zones = table[table["zone"] != "site"]
    est_share = zones["estimate_m3"] / zones.groupby(["seed", "zone"])["truth_m3"].transform("sum")
    counted = zones[(zones["share"] >= COUNT_SHARE) | (est_share >= COUNT_SHARE)]
    scored = zones[zones["share"] >= ERROR_SHARE]
    site = table[(table["zone"] == "site") & (table["part"] == "saturated")]
    site = site[site["share"] >= ERROR_SHARE]
    return {
        "coverage": float(counted["inside"].mean()) if len(counted) else float("nan"),
        "median_abs_error": float(scored["rel_error"].abs().median()),
        "median_width": float(scored["width"].median()),
        "n_counted": len(counted),
        "n_scored": len(scored),
        "saturated_site_error": {
            f: float(part["rel_error"].abs().median()) for f, part in site.groupby("facies")
        },
        "saturated_site_coverage": float(site["inside"].mean()) if len(site) else float("nan"),
    }
