"""Tables and GeoPackage layers of the boring advice (:mod:`geo3d.analysis.advise`).

* ``proposed_borings.csv``: rank, x, y, the share of the remaining variance each boring
  removes, the expected P10-P90 width of the target before and after it, and the zone and
  elevation range that drive it;
* ``advice_candidates.csv``: every admissible candidate with its first-boring criterion;
* ``advice_zones.csv``: per zone, the expected target value, its P10-P90 width now and after
  each proposed boring;
* ``advice.gpkg``: layers ``proposed_borings`` and ``advice_candidates`` (points).

Coordinates, lengths and volumes go through the output frame like every other table.
"""

from __future__ import annotations

from pathlib import Path

import geopandas as gpd
import pandas as pd
import pyproj

from geo3d.analysis.advise import BoringAdvice
from geo3d.io.gpkg import in_frame, write_geopackage
from geo3d.io.output_frame import OutputFrame
from geo3d.io.tables import write_csv

__all__ = ["proposed_table", "zone_table", "advice_layers", "write_advice"]


def _unit_token(advice: BoringAdvice) -> str:
    return "m" if advice.unit == "m" else "m3"


def proposed_table(advice: BoringAdvice) -> pd.DataFrame:
    """Return the proposed borings with unit-carrying column names (internal units).

    Returns
    -------
    pandas.DataFrame
        ``rank``, ``x``, ``y``, ``target``, ``zone``, ``criterion``, ``reduction_share``,
        ``p10_p90_before_<unit>``, ``p10_p90_after_<unit>``, ``narrowing`` (fraction),
        ``driver_zone``, ``driver_top_m``, ``driver_bottom_m`` (elevations).
    """
    unit = _unit_token(advice)
    src = advice.proposed
    table = pd.DataFrame(
        {
            "rank": src["rank"].astype(int),
            "x": src["x"],
            "y": src["y"],
            "target": advice.target,
            "zone": advice.rank_zone,
            "criterion": advice.criterion,
            "reduction_share": src["reduction_share"],
            f"p10_p90_before_{unit}": src["p10_p90_before"],
            f"p10_p90_after_{unit}": src["p10_p90_after"],
        }
    )
    before = src["p10_p90_before"].where(src["p10_p90_before"] > 0)
    table["narrowing"] = (1.0 - src["p10_p90_after"] / before).fillna(0.0)
    table["driver_zone"] = src["driver_zone"]
    table["driver_top_m"] = src["driver_top"]
    table["driver_bottom_m"] = src["driver_bottom"]
    return table


def zone_table(advice: BoringAdvice) -> pd.DataFrame:
    """Return the per-zone widths with unit-carrying column names (internal units)."""
    unit = _unit_token(advice)
    renames = {"expected": f"expected_{unit}", "p10_p90_before": f"p10_p90_before_{unit}"}
    for column in advice.zones.columns:
        if str(column).startswith("p10_p90_after_"):
            renames[column] = f"p10_p90_{unit}_after_{str(column).rsplit('_', 1)[-1]}"
    table = advice.zones.rename(columns=renames)
    table.insert(1, "target", advice.target)
    return table


def advice_layers(
    advice: BoringAdvice, *, crs: pyproj.CRS | str | None, frame: OutputFrame | None = None
) -> dict[str, gpd.GeoDataFrame]:
    """GeoPackage layers ``proposed_borings`` and ``advice_candidates`` (in the output frame)."""
    proposed = proposed_table(advice)
    candidates = advice.candidates.rename(columns={"variance_reduction": "criterion_value"})
    layers = {}
    for name, table in (("proposed_borings", proposed), ("advice_candidates", candidates)):
        gdf = gpd.GeoDataFrame(
            table.copy(), geometry=gpd.points_from_xy(table["x"], table["y"]), crs=crs
        )
        layers[name] = in_frame(gdf, frame)
    return layers


def write_advice(
    advice: BoringAdvice,
    out: str | Path,
    *,
    crs: pyproj.CRS | str | None,
    frame: OutputFrame | None = None,
) -> list[Path]:
    """Write the advice tables and GeoPackage into a folder.

    Returns
    -------
    list of Path
        The files written.
    """
    out = Path(out)
    out.mkdir(parents=True, exist_ok=True)
    candidates = advice.candidates.rename(columns={"variance_reduction": "criterion_value"})
    written = [
        write_csv(proposed_table(advice), out / "proposed_borings.csv", frame=frame),
        write_csv(candidates, out / "advice_candidates.csv", frame=frame),
        write_csv(zone_table(advice), out / "advice_zones.csv", frame=frame),
    ]
    descriptions = {
        "proposed_borings": "geo3d proposed borings, in order of choice",
        "advice_candidates": "geo3d candidate boring locations with their criterion",
    }
    if frame is not None:
        descriptions = {
            k: f"{v}; coordinates in {frame.label}, lengths in {frame.length_label}"
            for k, v in descriptions.items()
        }
    layers = advice_layers(advice, crs=crs, frame=frame)
    written.append(write_geopackage(out / "advice.gpkg", layers, descriptions=descriptions))
    return written
