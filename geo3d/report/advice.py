"""The boring-advice section: a plan map and the tables of expected narrowing.

The map shows the target's uncertainty (its weighted indicator variance summed down each column)
under the candidates coloured by the criterion of the first boring, the existing borings and the
proposed ones with their rank. The HTML section (``advice.html``, self-contained) holds the map
and two tables: the proposed borings, and the expected P10-P90 width of each zone's target now
and after each proposed boring.
"""

from __future__ import annotations

import html
from typing import Any

import numpy as np
import pandas as pd
import shapely
from matplotlib.figure import Figure
from matplotlib.lines import Line2D

from geo3d.analysis.advise import BoringAdvice
from geo3d.io.advice import proposed_table, zone_table
from geo3d.io.output_frame import OutputFrame
from geo3d.io.tables import to_output_units
from geo3d.report.figures import (
    _draw_zones,
    _plan_axes,
    _plot_polygon,
    figure_to_png,
    new_figure,
    png_to_data_uri,
)

__all__ = ["advice_map_figure", "advice_html"]

_TARGET_LABEL = {
    "storage": "storage-material volume",
    "transmissive": "mean transmissive thickness",
    "injection": "design injection volume",
}


def _edges(centres: np.ndarray) -> np.ndarray:
    step = centres[1] - centres[0] if len(centres) > 1 else 1.0
    return np.r_[centres - step / 2, centres[-1] + step / 2]


def _moved(geom: Any, frame: OutputFrame | None) -> Any:
    if frame is None or geom is None:
        return geom
    return shapely.transform(geom, lambda xy: np.column_stack(frame.xy(xy[:, 0], xy[:, 1])))


def _xy(x: np.ndarray, y: np.ndarray, frame: OutputFrame | None) -> tuple[np.ndarray, np.ndarray]:
    if frame is None:
        return np.asarray(x, float), np.asarray(y, float)
    return frame.xy(np.asarray(x, float), np.asarray(y, float))


def _background(ax: Any, advice: BoringAdvice, frame: OutputFrame | None) -> None:
    """Draw the uncertainty map (grey) in the output frame's coordinates."""
    da = advice.uncertainty
    if da is None:
        return
    values = np.where(da.values > 0, da.values, np.nan)
    xs, ys = _edges(da["x"].values), _edges(da["y"].values)
    gx, gy = np.meshgrid(xs, ys)
    fx, fy = _xy(gx.ravel(), gy.ravel(), frame)
    ax.pcolormesh(fx.reshape(gx.shape), fy.reshape(gy.shape), values, cmap="Greys",
                  alpha=0.55, shading="flat", zorder=1)  # fmt: skip


def advice_map_figure(
    advice: BoringAdvice,
    *,
    boundary: Any = None,
    zones: Any = None,
    frame: OutputFrame | None = None,
) -> Figure:
    """Plan map of the advice: uncertainty, candidates by criterion, existing and new borings.

    Parameters
    ----------
    advice
        The result of :func:`geo3d.analysis.advise.advise_borings` (internal CRS).
    boundary, zones
        Site boundary polygon and treatment zones (GeoDataFrame), internal CRS.
    frame
        Output frame (coordinates drawn in its CRS); None = internal CRS.
    """
    fig = new_figure(7.0, 6.0)
    ax = fig.add_subplot()
    _background(ax, advice, frame)
    _plot_polygon(ax, _moved(boundary, frame), color="0.2", linewidth=1.4)
    if zones is not None and len(zones):
        moved = zones.copy()
        moved["geometry"] = [_moved(g, frame) for g in zones.geometry]
        _draw_zones(ax, moved)
    cx, cy = _xy(advice.candidates["x"], advice.candidates["y"], frame)
    share = advice.candidates["variance_reduction"].to_numpy(float)
    points = ax.scatter(cx, cy, c=share / max(float(share.max()), 1e-300), s=14, marker="s",
                        cmap="viridis", zorder=3, linewidths=0)  # fmt: skip
    fig.colorbar(points, ax=ax, shrink=0.7, label="criterion of the first boring (relative)")
    ex, ey = _xy(advice.existing[:, 0], advice.existing[:, 1], frame)
    ax.plot(ex, ey, "o", color="black", markersize=4, zorder=5)
    px, py = _xy(advice.proposed["x"], advice.proposed["y"], frame)
    ax.plot(px, py, "*", color="#d55e00", markersize=15, markeredgecolor="black", zorder=6)
    for rank, x, y in zip(advice.proposed["rank"], px, py, strict=True):
        ax.annotate(str(int(rank)), (x, y), xytext=(6, 6), textcoords="offset points",
                    fontsize=9, fontweight="bold", zorder=7)  # fmt: skip
    handles = [
        Line2D([], [], linestyle="none", marker="o", color="black", label="existing boring"),
        Line2D([], [], linestyle="none", marker="*", color="#d55e00", markersize=12,
               markeredgecolor="black", label="proposed boring (rank)"),
        Line2D([], [], linestyle="none", marker="s", color="#21918c", label="candidate"),
    ]  # fmt: skip
    _plan_axes(ax, None if frame is None else frame.label,
               "m" if frame is None else frame.coordinate_unit)  # fmt: skip
    ax.legend(handles=handles, loc="lower left", fontsize=7, framealpha=0.9)
    return fig


def _number(value: float) -> str:
    """Format coordinates and large figures to 0.1, small ones to 3 significant digits."""
    return f"{value:,.1f}" if abs(value) >= 1000 else f"{value:.3g}"


def _table_html(table: pd.DataFrame) -> str:
    return table.to_html(index=False, float_format=_number, border=0, classes="advice",
                         na_rep="-")  # fmt: skip


def advice_html(
    advice: BoringAdvice,
    map_png: bytes,
    *,
    site_name: str,
    frame: OutputFrame | None = None,
    seconds: float | None = None,
) -> str:
    """Return a self-contained HTML page: the map and the tables of the advice."""
    label = _TARGET_LABEL.get(advice.target, advice.target)
    proposed = to_output_units(proposed_table(advice), frame=frame).drop(
        columns=["target", "zone", "criterion"]
    )
    zones = to_output_units(zone_table(advice), frame=frame)
    crit = (
        "kriging variance summed over the target's cells"
        if advice.criterion == "summed"
        else "variance of the target (block variance)"
    )
    timing = "" if seconds is None else f" Computed in {seconds:.1f} s."
    return f"""<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8"><title>Next borings: {html.escape(site_name)}</title>
<style>body{{font-family:sans-serif;max-width:70em;margin:1em auto;color:#222}}
table.advice{{border-collapse:collapse;font-size:0.85em;margin:0.5em 0 1.5em}}
table.advice td,table.advice th{{padding:0.2em 0.6em;border-bottom:1px solid #ddd;
text-align:right}}img{{max-width:100%}}</style></head><body>
<h1>Where to push next</h1>
<p>Site <b>{html.escape(site_name)}</b>. Target: {html.escape(label)} of
<b>{html.escape(advice.rank_zone)}</b>. Candidates are ranked by the expected reduction of the
{crit} when one full-depth boring is added (Christakos 1992; van Groenigen 1999), and chosen
one by one, each given the ones before.{timing}</p>
<p>The expected widths scale the model's P10-P90 band by the square root of the ratio of the
target's kriging (block) variance after and before the new borings. They describe the spread
for the fitted covariance model only: the measured bands of this tool are narrower than the
truth's error, so read them as a ranking of where data help most, not as a promise.</p>
<img src="{png_to_data_uri(map_png)}" alt="plan map of the candidates and proposed borings">
<h2>Proposed borings</h2>{_table_html(proposed)}
<h2>Expected P10-P90 width per zone, now and after each proposed boring</h2>
{_table_html(zones)}
<h2>References</h2><ul>
<li>Christakos, G. (1992) Random Field Models in Earth Sciences. Academic Press, ch. 10.</li>
<li>van Groenigen, J.W. (1999) Constrained optimisation of spatial sampling: a geostatistical
approach. PhD thesis, Wageningen University.</li></ul>
</body></html>
"""


def advice_map_png(advice: BoringAdvice, **kwargs: Any) -> bytes:
    """Render :func:`advice_map_figure` to PNG bytes."""
    return figure_to_png(advice_map_figure(advice, **kwargs))
