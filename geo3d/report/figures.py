"""Figures of the HTML report, drawn with matplotlib's Agg backend.

Every public figure function takes plain data (DataFrames, DataArrays, shapely geometry,
dicts) and keyword-only options, and returns a :class:`matplotlib.figure.Figure` that the
caller turns into an embedded PNG with :func:`figure_to_data_uri`.  Nothing here touches
pyplot's global state, so figures can be drawn from any thread and never pop up a window.

Coordinates are ``(x, y, z)`` in the site CRS with z the elevation, upward.  Depth appears only
in per-boring log panels.

Colours: hydrofacies use the Okabe & Ito (2008) colour-blind-safe palette, continuous
quantities the perceptually uniform viridis and cividis maps (van der Walt & Smith 2015;
Nuñez et al. 2018).
"""

from __future__ import annotations

import base64
import functools
import io
import math
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import matplotlib

matplotlib.use("Agg", force=False)

import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402
import xarray as xr  # noqa: E402
from matplotlib.artist import Artist  # noqa: E402
from matplotlib.backends.backend_agg import FigureCanvasAgg  # noqa: E402
from matplotlib.colors import BoundaryNorm, Colormap, ListedColormap  # noqa: E402
from matplotlib.figure import Figure  # noqa: E402
from matplotlib.lines import Line2D  # noqa: E402
from matplotlib.patches import Patch, Rectangle  # noqa: E402

# One Okabe & Ito (2008) palette for every figure of the report.
from geo3d.report.log_figure import OKABE_ITO, facies_colour  # noqa: E402

__all__ = [
    "OKABE_ITO",
    "SectionLine",
    "azimuth_vector",
    "calibration_figure",
    "crossval_figure",
    "default_section_lines",
    "facies_colors",
    "figure_to_data_uri",
    "figure_to_png",
    "png_to_data_uri",
    "sample_section",
    "section_figure",
    "site_map_figure",
    "variogram_figure",
    "water_table_figure",
]


_DPI = 110
_BORING_COLOR = OKABE_ITO["black"]
_ZONE_COLOR = OKABE_ITO["reddish_purple"]
_SECTION_COLOR = OKABE_ITO["orange"]


def facies_colors(n_classes: int) -> list[str]:
    """Return one Okabe-Ito colour per hydrofacies, lowest K class first.

    The colours are those of the per-boring log figures
    (:func:`geo3d.report.log_figure.facies_colour`), so a class looks the same in every
    figure of the report.

    Parameters
    ----------
    n_classes
        Number of classes.

    Returns
    -------
    list of str
        Hex colours.

    References
    ----------
    Okabe, M., Ito, K. (2008) Color Universal Design (CUD): how to make figures and
    presentations that are friendly to colorblind people.
    """
    return [facies_colour(code) for code in range(n_classes)]


def _facies_cmap(names: Sequence[str]) -> tuple[Colormap, BoundaryNorm]:
    colors = facies_colors(len(names))
    cmap = ListedColormap(colors).with_extremes(bad=(1.0, 1.0, 1.0, 0.0))
    norm = BoundaryNorm(np.arange(-0.5, len(names) + 0.5), cmap.N)
    return cmap, norm


def new_figure(width: float, height: float) -> Figure:
    """Return a figure bound to an Agg canvas (no pyplot state).

    Parameters
    ----------
    width, height
        Size in inches.

    Returns
    -------
    matplotlib.figure.Figure
    """
    fig = Figure(figsize=(width, height), dpi=_DPI, layout="constrained")
    FigureCanvasAgg(fig)
    return fig


def figure_to_png(fig: Figure, *, dpi: float | None = None) -> bytes:
    """Render a figure to PNG bytes.

    Parameters
    ----------
    fig
        The figure.
    dpi
        Resolution; the figure's own when None.

    Returns
    -------
    bytes
        A PNG file.
    """
    buffer = io.BytesIO()
    fig.savefig(buffer, format="png", dpi=dpi or fig.dpi, facecolor="white")
    return buffer.getvalue()


def png_to_data_uri(png: bytes) -> str:
    """Wrap PNG bytes as a ``data:`` URI (RFC 2397) for an ``<img src>``.

    Parameters
    ----------
    png
        A PNG file.

    Returns
    -------
    str
        ``data:image/png;base64,...``.

    Examples
    --------
    >>> png_to_data_uri(bytes([137, 80, 78, 71]))[:26]
    'data:image/png;base64,iVBO'
    """
    return "data:image/png;base64," + base64.b64encode(png).decode("ascii")


def figure_to_data_uri(fig: Figure, *, dpi: float | None = None) -> str:
    """Render a figure to an embeddable PNG ``data:`` URI (see :func:`figure_to_png`)."""
    return png_to_data_uri(figure_to_png(fig, dpi=dpi))


def azimuth_vector(azimuth_deg: float) -> tuple[float, float]:
    """Return the unit (east, north) vector of an azimuth measured clockwise from north.

    Parameters
    ----------
    azimuth_deg
        Azimuth in degrees, clockwise from north.

    Returns
    -------
    tuple of float
        ``(dx, dy)``.

    Examples
    --------
    >>> [round(v, 12) for v in azimuth_vector(90.0)]
    [1.0, 0.0]
    """
    rad = math.radians(azimuth_deg)
    return math.sin(rad), math.cos(rad)


# --------------------------------------------------------------------------- plan views


def _plot_polygon(ax, geom, **kwargs) -> None:
    if geom is None or getattr(geom, "is_empty", True):
        return
    polygons = list(getattr(geom, "geoms", [geom]))
    for poly in polygons:
        exterior = getattr(poly, "exterior", None)
        if exterior is None:
            continue
        xs, ys = exterior.xy
        ax.plot(xs, ys, **kwargs)
        kwargs.pop("label", None)


def _plot_borings(ax, borings: pd.DataFrame | None, *, labels: bool = True) -> None:
    if borings is None or len(borings) == 0:
        return
    ax.plot(
        borings["x"],
        borings["y"],
        linestyle="none",
        marker="o",
        markersize=4,
        color=_BORING_COLOR,
        label="boring",
        zorder=5,
    )
    if labels and len(borings) <= 80:
        for row in borings.itertuples(index=False):
            ax.annotate(
                str(row.boring_id),
                (row.x, row.y),
                xytext=(3, 3),
                textcoords="offset points",
                fontsize=7,
                zorder=6,
            )


def _plan_axes(ax, crs_label: str | None, unit: str = "m") -> None:
    ax.set_aspect("equal", adjustable="box")
    ax.set_xlabel(f"easting ({unit})")
    ax.set_ylabel(f"northing ({unit})")
    if crs_label:
        ax.set_title(crs_label, fontsize=8, loc="right", color="0.35")
    ax.ticklabel_format(useOffset=False, style="plain")
    ax.tick_params(labelsize=7)
    ax.grid(True, color="0.9", linewidth=0.6)
    _north_arrow(ax)


def _north_arrow(ax) -> None:
    ax.annotate(
        "N",
        xy=(0.96, 0.97),
        xytext=(0.96, 0.86),
        xycoords="axes fraction",
        ha="center",
        va="center",
        fontsize=9,
        fontweight="bold",
        arrowprops={"arrowstyle": "-|>", "color": "black", "linewidth": 1.2},
    )


@dataclass(frozen=True)
class SectionLine:
    """A vertical cross-section line in plan view.

    Attributes
    ----------
    name
        Short label, e.g. ``"A"``; the ends are drawn as ``A`` and ``A'``.
    start, end
        ``(x, y)`` of its ends in the site CRS.
    """

    name: str
    start: tuple[float, float]
    end: tuple[float, float]

    @property
    def length(self) -> float:
        """Length of the line (in the unit of its coordinates)."""
        return math.hypot(self.end[0] - self.start[0], self.end[1] - self.start[1])


def _draw_zones(ax: Any, zones: pd.DataFrame) -> None:
    """Fill the treatment zones, hatched, and name each one."""
    for index, zone in enumerate(zones.itertuples(index=False)):
        geom = zone.geometry
        for poly in getattr(geom, "geoms", [geom]):
            xs, ys = poly.exterior.xy
            ax.fill(
                xs,
                ys,
                facecolor=_ZONE_COLOR,
                alpha=0.18,
                edgecolor=_ZONE_COLOR,
                linewidth=1.2,
                hatch="//",
            )
        centre = geom.representative_point()
        name = getattr(zone, "name", None) or f"zone {index + 1}"
        ax.annotate(
            str(name),
            (centre.x, centre.y),
            ha="center",
            va="center",
            fontsize=8,
            fontweight="bold",
            color="#6b2d55",
            bbox={"boxstyle": "round,pad=0.2", "fc": "white", "ec": _ZONE_COLOR, "alpha": 0.9},
            zorder=8,
        )


def _draw_section_line(ax: Any, line: SectionLine) -> None:
    """Draw a section line with its end labels."""
    ax.plot(
        [line.start[0], line.end[0]],
        [line.start[1], line.end[1]],
        color=_SECTION_COLOR,
        linewidth=1.6,
        linestyle="--",
        zorder=3,
    )
    for label, point in ((line.name, line.start), (line.name + "'", line.end)):
        ax.annotate(
            label,
            point,
            fontsize=9,
            fontweight="bold",
            color="#8a5a00",
            ha="center",
            va="center",
            bbox={"boxstyle": "round,pad=0.15", "fc": "white", "ec": _SECTION_COLOR},
            zorder=7,
        )


def site_map_figure(
    *,
    boundary=None,
    borings: pd.DataFrame | None = None,
    zones=None,
    sections: Sequence[SectionLine] = (),
    injection_points: Sequence[tuple[float, float]] = (),
    crs_label: str | None = None,
    coordinate_unit: str = "m",
) -> Figure:
    """Plan view of the site: boundary, treatment zones, borings, section lines.

    Parameters
    ----------
    boundary
        Site boundary (shapely polygon) or None.
    borings
        Table with ``boring_id``, ``x``, ``y``.
    zones
        GeoDataFrame of treatment zones (``name``, geometry) or None.
    sections
        Cross-section lines to draw.
    injection_points
        ``(x, y)`` of planned injection points.
    crs_label
        Name of the CRS, written in a corner.
    coordinate_unit
        Unit of the CRS axes, for the axis labels.

    Returns
    -------
    matplotlib.figure.Figure
    """
    fig = new_figure(7.0, 6.0)
    ax = fig.add_subplot()
    handles: list[Artist] = []
    _plot_polygon(ax, boundary, color="0.2", linewidth=1.4)
    if boundary is not None and not getattr(boundary, "is_empty", True):
        handles.append(Line2D([], [], color="0.2", linewidth=1.4, label="site boundary"))
    if zones is not None and len(zones) > 0:
        _draw_zones(ax, zones)
        handles.append(
            Patch(facecolor=_ZONE_COLOR, alpha=0.3, edgecolor=_ZONE_COLOR, label="treatment zone")
        )
    if len(injection_points):
        points = np.asarray(injection_points, dtype=float)
        ax.plot(
            points[:, 0],
            points[:, 1],
            linestyle="none",
            marker="+",
            markersize=3.5,
            markeredgewidth=0.7,
            alpha=0.7,
            color=OKABE_ITO["bluish_green"],
            zorder=4,
        )
        handles.append(
            Line2D(
                [],
                [],
                linestyle="none",
                marker="+",
                color=OKABE_ITO["bluish_green"],
                label="injection point",
            )
        )
    for line in sections:
        _draw_section_line(ax, line)
    if sections:
        handles.append(Line2D([], [], color=_SECTION_COLOR, linestyle="--", label="section"))
    _plot_borings(ax, borings)
    if borings is not None and len(borings):
        handles.append(
            Line2D([], [], linestyle="none", marker="o", color=_BORING_COLOR, label="boring")
        )
    _plan_axes(ax, crs_label, coordinate_unit)
    if handles:
        ax.legend(handles=handles, loc="lower left", fontsize=7, framealpha=0.9)
    return fig


def map_panels_figure(
    panels: Sequence[tuple[str, xr.DataArray]],
    *,
    units: str,
    cmap: str = "viridis",
    vmin: float | None = None,
    vmax: float | None = None,
    boundary=None,
    borings: pd.DataFrame | None = None,
    crs_label: str | None = None,
    coordinate_unit: str = "m",
) -> Figure:
    """Plan-view maps side by side on one shared colour scale (e.g. P10, estimate, P90).

    Parameters
    ----------
    panels
        ``(title, map)`` pairs, maps with dims ``("y", "x")``.
    units
        Label of the colour bar.
    cmap
        A perceptually uniform matplotlib colour map name.
    vmin, vmax
        Colour limits; from all panels when None.
    boundary, borings
        Drawn on top when given.
    crs_label
        Name of the CRS.
    coordinate_unit
        Unit of the CRS axes, for the axis labels.

    Returns
    -------
    matplotlib.figure.Figure
    """
    arrays = [np.asarray(g.transpose("y", "x").values, dtype=float) for _, g in panels]
    finite = np.concatenate([a[np.isfinite(a)] for a in arrays]) if arrays else np.array([])
    if vmin is None:
        vmin = float(finite.min()) if finite.size else 0.0
    if vmax is None:
        vmax = float(finite.max()) if finite.size else 1.0
    if vmax <= vmin:
        vmax = vmin + 1.0
    n = len(panels)
    fig = new_figure(5.4 if n == 1 else 3.6 * n + 0.8, 4.6 if n == 1 else 3.3)
    axes = np.atleast_1d(fig.subplots(1, n, sharex=True, sharey=True))
    mesh = None
    for ax, (title, grid), values in zip(axes, panels, arrays, strict=True):
        x = np.asarray(grid["x"].values, dtype=float)
        y = np.asarray(grid["y"].values, dtype=float)
        mesh = ax.pcolormesh(
            _edges(x), _edges(y), np.ma.masked_invalid(values), cmap=cmap, vmin=vmin, vmax=vmax
        )
        _plot_polygon(ax, boundary, color="0.2", linewidth=1.0)
        _plot_borings(ax, borings, labels=False)
        _plan_axes(ax, crs_label if ax is axes[-1] else None, coordinate_unit)
        ax.set_title(title, fontsize=9, loc="left")
    for ax in axes[1:]:
        ax.set_ylabel("")
    if mesh is not None:
        fig.colorbar(mesh, ax=list(axes), label=units, shrink=0.85)
    return fig


def _edges(centres: np.ndarray) -> np.ndarray:
    if centres.size == 1:
        return np.array([centres[0] - 0.5, centres[0] + 0.5])
    mid = 0.5 * (centres[1:] + centres[:-1])
    return np.concatenate(
        [[centres[0] - (mid[0] - centres[0])], mid, [centres[-1] + (centres[-1] - mid[-1])]]
    )


def _draw_gradient(ax: Any, gradient: float, flow_direction_deg: float) -> None:
    """Draw the flow direction as an arrow in the middle of the map, with the gradient."""
    dx, dy = azimuth_vector(float(flow_direction_deg))
    ax.annotate(
        "",
        xy=(0.5 + 0.18 * dx, 0.5 + 0.18 * dy),
        xytext=(0.5 - 0.18 * dx, 0.5 - 0.18 * dy),
        xycoords="axes fraction",
        arrowprops={
            "arrowstyle": "-|>,head_width=0.5,head_length=0.9",
            "lw": 3.0,
            "color": OKABE_ITO["vermillion"],
        },
        zorder=8,
    )
    ax.text(
        0.02,
        0.98,
        f"gradient {gradient:.2e} toward {flow_direction_deg:.0f}\u00b0",
        transform=ax.transAxes,
        va="top",
        fontsize=8,
        bbox={"fc": "white", "ec": "0.6", "alpha": 0.9},
    )


def water_table_figure(
    *,
    surface: xr.DataArray | None,
    water_levels: pd.DataFrame | None,
    gradient: float | None = None,
    flow_direction_deg: float | None = None,
    boundary=None,
    crs_label: str | None = None,
    coordinate_unit: str = "m",
    length_unit: str = "m",
) -> Figure:
    """Water-table elevation map with the measured levels and the gradient arrow.

    Parameters
    ----------
    surface
        Water-table elevation on the map grid (dims ``("y", "x")``), or None.
    water_levels
        Table with ``x``, ``y``, ``wt_elev`` (and ``boring_id``).
    gradient
        Hydraulic gradient magnitude (dimensionless).
    flow_direction_deg
        Down-gradient azimuth, degrees clockwise from north.
    boundary
        Site boundary, drawn when given.
    crs_label, coordinate_unit, length_unit
        Name of the CRS, unit of its axes and unit of the elevations, for the labels.

    Returns
    -------
    matplotlib.figure.Figure
    """
    fig = new_figure(6.0, 5.0)
    ax = fig.add_subplot()
    if surface is not None:
        values = np.asarray(surface.transpose("y", "x").values, dtype=float)
        x = np.asarray(surface["x"].values, dtype=float)
        y = np.asarray(surface["y"].values, dtype=float)
        mesh = ax.pcolormesh(_edges(x), _edges(y), np.ma.masked_invalid(values), cmap="cividis")
        fig.colorbar(mesh, ax=ax, label=f"water-table elevation ({length_unit})", shrink=0.85)
        finite = values[np.isfinite(values)]
        if finite.size and np.ptp(finite) > 0:
            contours = ax.contour(x, y, np.ma.masked_invalid(values), colors="white", levels=6)
            ax.clabel(contours, fontsize=7, fmt="%.2f")
    _plot_polygon(ax, boundary, color="0.2", linewidth=1.0)
    if water_levels is not None and len(water_levels):
        ax.scatter(
            water_levels["x"],
            water_levels["y"],
            c="white",
            edgecolors="black",
            s=28,
            zorder=5,
            label="dissipation test",
        )
        label_at = water_levels
        if "boring_id" in water_levels:
            # one label per boring: the mean of its tests
            label_at = water_levels.groupby("boring_id", as_index=False)[
                ["x", "y", "wt_elev"]
            ].mean()
        for row in label_at.itertuples(index=False):
            ax.annotate(
                f"{row.wt_elev:.2f}",
                (row.x, row.y),
                xytext=(4, -9),
                textcoords="offset points",
                fontsize=7,
            )
        ax.legend(loc="lower left", fontsize=7)
    if (
        gradient is not None
        and flow_direction_deg is not None
        and np.isfinite(gradient)
        and np.isfinite(flow_direction_deg)
        and gradient > 0
    ):
        _draw_gradient(ax, float(gradient), float(flow_direction_deg))
    _plan_axes(ax, crs_label, coordinate_unit)
    return fig


# --------------------------------------------------------------------------- logs


# --------------------------------------------------------------------------- calibration


def calibration_figure(
    predicted_k: Sequence[float],
    slug_k: Sequence[float],
    *,
    a: float | None = None,
    b: float | None = None,
    x_offset: float = 0.0,
    labels: Sequence[str] | None = None,
    xlabel: str = "log10 K from the logs, mean over the screen (m/s)",
) -> Figure:
    """Slug-test K against log-derived K on log axes, with the fitted line and 1:1.

    Parameters
    ----------
    predicted_k
        Log-derived K over each slug-test screen (m/s), on the x axis.
    slug_k
        Slug-test K (m/s), on the y axis.
    a, b
        Calibration ``log10 K = a + b * log10(Q/P_net)``; drawn as
        ``y = a + b * (x - x_offset)`` when both are given.
    x_offset
        ``log10(gamma_w / F)`` when the x axis is physics-only K (then
        ``log10(Q/P_net) = x - x_offset``, Hvorslev 1951).
    labels
        Text beside each point.
    xlabel
        Label of the x axis.

    Returns
    -------
    matplotlib.figure.Figure
    """
    fig = new_figure(5.0, 4.6)
    ax = fig.add_subplot()
    xk = np.asarray(predicted_k, dtype=float)
    yk = np.asarray(slug_k, dtype=float)
    ok = np.isfinite(xk) & np.isfinite(yk) & (xk > 0) & (yk > 0)
    lx, ly = np.log10(xk[ok]), np.log10(yk[ok])
    ax.scatter(
        lx, ly, color=OKABE_ITO["blue"], edgecolors="black", s=36, zorder=4, label="slug test"
    )
    if labels is not None:
        for text, px, py in zip(np.asarray(labels, dtype=object)[ok], lx, ly, strict=True):
            ax.annotate(str(text), (px, py), xytext=(4, 3), textcoords="offset points", fontsize=7)
    both = np.concatenate([lx, ly]) if lx.size else np.array([-7.0, -3.0])
    lo, hi = float(np.min(both)) - 0.5, float(np.max(both)) + 0.5
    ax.plot([lo, hi], [lo, hi], color="0.4", linestyle=":", label="1:1")
    if a is not None and b is not None and np.isfinite(a) and np.isfinite(b):
        grid = np.linspace(lo, hi, 50)
        ax.plot(
            grid,
            a + b * (grid - x_offset),
            color=OKABE_ITO["vermillion"],
            label=f"calibration: b = {b:.2f}",
        )
    ax.set_xlim(lo, hi)
    ax.set_ylim(lo, hi)
    ax.set_aspect("equal")
    ax.set_xlabel(xlabel)
    ax.set_ylabel("log10 K from slug tests (m/s)")
    ax.grid(True, color="0.9")
    ax.legend(fontsize=8, loc="lower right")
    return fig


# --------------------------------------------------------------------------- geostatistics


def variogram_figure(
    vertical: pd.DataFrame | None,
    horizontal: pd.DataFrame | None,
    *,
    vertical_model: tuple[np.ndarray, np.ndarray] | None = None,
    horizontal_model: Mapping[str, tuple[np.ndarray, np.ndarray]] | None = None,
    variable: str,
    units: str,
    lag_unit: str = "m",
) -> Figure:
    """Experimental variograms (vertical and horizontal) with the fitted model curves.

    Parameters
    ----------
    vertical, horizontal
        Tables with ``lag``, ``gamma``, ``n_pairs``.
    vertical_model
        ``(lag, gamma)`` of the fitted model along the vertical.
    horizontal_model
        Label -> ``(lag, gamma)`` of the fitted model along horizontal directions.
    variable
        Name of the variable (title).
    units
        Units of the semivariance.
    lag_unit
        Unit of the lags (as given: the caller converts), for the axis labels.

    Returns
    -------
    matplotlib.figure.Figure
    """
    fig = new_figure(8.0, 3.6)
    axes = fig.subplots(1, 2)
    panels = (
        (
            axes[0],
            vertical,
            {"vertical": vertical_model} if vertical_model else {},
            f"vertical lag ({lag_unit})",
        ),
        (axes[1], horizontal, horizontal_model or {}, f"horizontal lag ({lag_unit})"),
    )
    line_colors = [OKABE_ITO["vermillion"], OKABE_ITO["bluish_green"], OKABE_ITO["orange"]]
    for ax, table, models, xlabel in panels:
        if table is not None and len(table):
            table = table[np.isfinite(table["gamma"].to_numpy(dtype=float))]
            n_pairs = table["n_pairs"].to_numpy(dtype=float)
            size = 12 + 60 * n_pairs / max(float(n_pairs.max()), 1.0)
            ax.scatter(
                table["lag"],
                table["gamma"],
                s=size,
                color=OKABE_ITO["blue"],
                edgecolors="black",
                linewidths=0.5,
                zorder=4,
                label="experimental",
            )
            for lag, gamma, n in zip(table["lag"], table["gamma"], n_pairs, strict=True):
                ax.annotate(
                    f"{int(n)}",
                    (lag, gamma),
                    xytext=(0, 6),
                    textcoords="offset points",
                    fontsize=6,
                    ha="center",
                    color="0.3",
                )
        else:
            ax.text(0.5, 0.5, "too few pairs", transform=ax.transAxes, ha="center", color="0.4")
        for (label, (lags, gammas)), color in zip(models.items(), line_colors, strict=False):
            ax.plot(lags, gammas, color=color, linewidth=1.6, label=f"model ({label})")
        ax.set_xlabel(xlabel)
        ax.set_ylabel(f"semivariance ({units})")
        ax.set_xlim(left=0)
        ax.set_ylim(bottom=0)
        ax.grid(True, color="0.9")
        ax.legend(fontsize=7, loc="lower right")
    fig.suptitle(f"{variable}: numbers are pair counts", fontsize=10)
    return fig


def crossval_figure(
    samples: pd.DataFrame,
    *,
    variable: str,
    units: str,
) -> Figure:
    """Leave-one-boring-out cross-validation: estimate against observed, standardized errors.

    Parameters
    ----------
    samples
        Table with ``observed``, ``estimate`` and ``std_error`` (error over kriging standard
        deviation).
    variable
        Name of the variable.
    units
        Its units.

    Returns
    -------
    matplotlib.figure.Figure
    """
    fig = new_figure(8.0, 3.8)
    ax_s, ax_h = fig.subplots(1, 2)
    obs = samples["observed"].to_numpy(dtype=float)
    est = samples["estimate"].to_numpy(dtype=float)
    ok = np.isfinite(obs) & np.isfinite(est)
    ax_s.scatter(obs[ok], est[ok], s=6, alpha=0.5, color=OKABE_ITO["blue"], linewidths=0)
    if ok.any():
        lo = float(min(obs[ok].min(), est[ok].min()))
        hi = float(max(obs[ok].max(), est[ok].max()))
        ax_s.plot([lo, hi], [lo, hi], color="0.3", linestyle=":", label="1:1")
        ax_s.legend(fontsize=7, loc="upper left")
    ax_s.set_xlabel(f"observed {variable} ({units})")
    ax_s.set_ylabel(f"estimate, boring left out ({units})")
    ax_s.set_aspect("equal", adjustable="datalim")
    ax_s.grid(True, color="0.9")
    if "std_error" in samples:
        z = samples["std_error"].to_numpy(dtype=float)
        z = z[np.isfinite(z)]
        if z.size:
            edges = np.linspace(min(-4.0, float(z.min())), max(4.0, float(z.max())), 41)
            ax_h.hist(z, bins=edges, density=True, color=OKABE_ITO["sky_blue"], edgecolor="white")
            grid = np.linspace(-4, 4, 200)
            ax_h.plot(
                grid,
                np.exp(-0.5 * grid**2) / math.sqrt(2 * math.pi),
                color=OKABE_ITO["vermillion"],
                label="N(0, 1)",
            )
            ax_h.legend(fontsize=7)
    ax_h.set_xlabel("standardized error (error / kriging SD)")
    ax_h.set_ylabel("density")
    ax_h.grid(True, color="0.9")
    fig.suptitle(f"Cross-validation of {variable}", fontsize=10)
    return fig


# --------------------------------------------------------------------------- sections


def default_section_lines(boundary, *, fallback_bounds=None) -> list[SectionLine]:
    """Two section lines: the site's longest axis and its perpendicular, through the centre.

    The long axis is the long side direction of the boundary's minimum rotated rectangle;
    both lines are clipped to the boundary.

    Parameters
    ----------
    boundary
        Site boundary (shapely polygon) or None.
    fallback_bounds
        ``(xmin, ymin, xmax, ymax)`` used as a rectangle when there is no boundary.

    Returns
    -------
    list of SectionLine
        ``A`` along the long axis, ``B`` across it; empty when there is no geometry.
    """
    from shapely.geometry import LineString, box

    if boundary is None or getattr(boundary, "is_empty", True):
        if fallback_bounds is None:
            return []
        boundary = box(*fallback_bounds)
    rect = boundary.minimum_rotated_rectangle
    coords = np.asarray(rect.exterior.coords)[:4]
    sides = np.diff(np.vstack([coords, coords[:1]]), axis=0)
    lengths = np.hypot(sides[:, 0], sides[:, 1])
    long_dir = sides[int(np.argmax(lengths))] / max(float(lengths.max()), 1e-12)
    across = np.array([-long_dir[1], long_dir[0]])
    # orient lines west-to-east / south-to-north so that sections read left to right
    if long_dir[0] < -1e-9 or (abs(long_dir[0]) <= 1e-9 and long_dir[1] < 0):
        long_dir = -long_dir
    if across[0] < -1e-9 or (abs(across[0]) <= 1e-9 and across[1] < 0):
        across = -across
    centre = np.asarray(boundary.centroid.coords[0])
    reach = 2.0 * float(lengths.max()) + 1.0
    lines = []
    for name, direction in (("A", long_dir), ("B", across)):
        full = LineString([centre - reach * direction, centre + reach * direction])
        clipped = full.intersection(boundary)
        if clipped.is_empty:
            continue
        if clipped.geom_type != "LineString":
            clipped = max(clipped.geoms, key=lambda g: g.length)
        pts = np.asarray(clipped.coords)
        start, end = pts[0], pts[-1]
        if np.dot(end - start, direction) < 0:
            start, end = end, start
        lines.append(
            SectionLine(name, (float(start[0]), float(start[1])), (float(end[0]), float(end[1])))
        )
    return lines


def sample_section(
    model: xr.Dataset,
    line: SectionLine,
    *,
    variables: Sequence[str] = ("facies_code", "log10_k"),
    n_points: int | None = None,
) -> xr.Dataset:
    """Sample voxel-model variables along a vertical section (nearest cell).

    Parameters
    ----------
    model
        Voxel model with dims ``("z", "y", "x")``.
    line
        The section line.
    variables
        Names of variables to sample (missing ones are skipped).
    n_points
        Number of stations along the line; by default one per half the horizontal cell size.

    Returns
    -------
    xarray.Dataset
        Dims ``("z", "distance")``, with ``x`` and ``y`` of each station as coordinates.
    """
    dx = float(np.abs(np.diff(model["x"].values[:2]))[0]) if model.sizes["x"] > 1 else 1.0
    dy = float(np.abs(np.diff(model["y"].values[:2]))[0]) if model.sizes["y"] > 1 else dx
    if n_points is None:
        n_points = int(np.clip(2 * line.length / min(dx, dy), 20, 600))
    t = np.linspace(0.0, 1.0, n_points)
    xs = line.start[0] + t * (line.end[0] - line.start[0])
    ys = line.start[1] + t * (line.end[1] - line.start[1])
    inside = (
        (xs >= float(model["x"].min()) - dx / 2)
        & (xs <= float(model["x"].max()) + dx / 2)
        & (ys >= float(model["y"].min()) - dy / 2)
        & (ys <= float(model["y"].max()) + dy / 2)
    )
    present = [v for v in variables if v in model]
    picked = model[present].sel(
        x=xr.DataArray(xs, dims="distance"),
        y=xr.DataArray(ys, dims="distance"),
        method="nearest",
    )
    out = xr.Dataset(coords={"z": model["z"].values, "distance": t * line.length})
    for name in present:
        values = picked[name].transpose("z", "distance").values.astype(float)
        if "mask" in model:
            mask = (
                picked["mask"].transpose("z", "distance").values.astype(bool)
                if "mask" in picked
                else model["mask"]
                .sel(
                    x=xr.DataArray(xs, dims="distance"),
                    y=xr.DataArray(ys, dims="distance"),
                    method="nearest",
                )
                .transpose("z", "distance")
                .values.astype(bool)
            )
            values = np.where(mask, values, np.nan)
        if name == "facies_code":
            values = np.where(values < 0, np.nan, values)
        values[:, ~inside] = np.nan
        out[name] = (("z", "distance"), values)
    out = out.assign_coords(x=("distance", xs), y=("distance", ys))
    return out


def project_intervals(
    intervals: pd.DataFrame, line: SectionLine, *, max_offset: float
) -> pd.DataFrame:
    """Project boring intervals within ``max_offset`` of a section line onto it.

    Parameters
    ----------
    intervals
        Intervals with ``boring_id``, ``x``, ``y``, ``top``, ``bottom``, ``z_mid`` (and
        ``facies_code``, ``log10_k``).
    line
        The section line.
    max_offset
        Largest perpendicular distance (m) of a boring drawn on the section.

    Returns
    -------
    pandas.DataFrame
        The selected intervals with ``distance``, ``offset``, ``z_top`` and ``z_bottom``.
    """
    start = np.asarray(line.start)
    direction = (np.asarray(line.end) - start) / max(line.length, 1e-12)
    rel = intervals[["x", "y"]].to_numpy(dtype=float) - start
    along = rel @ direction
    offset = np.abs(rel[:, 0] * direction[1] - rel[:, 1] * direction[0])
    keep = (offset <= max_offset) & (along >= -max_offset) & (along <= line.length + max_offset)
    out = intervals.loc[keep].copy()
    out["distance"] = along[keep]
    out["offset"] = offset[keep]
    half = 0.5 * (out["bottom"] - out["top"])
    out["z_top"] = out["z_mid"] + half
    out["z_bottom"] = out["z_mid"] - half
    return out


def _facies_colour_of(row: Any, *, colours: Sequence[str]) -> Any:
    code = getattr(row, "facies_code", np.nan)
    return colours[int(code)] if pd.notna(code) and 0 <= int(code) < len(colours) else "0.5"


def _k_colour_of(row: Any, *, mesh: Any) -> Any:
    return mesh.cmap(mesh.norm(getattr(row, "log10_k", np.nan)))


def _draw_projected(
    ax: Any, projected: pd.DataFrame, *, width: float, colour: Callable[[Any], Any]
) -> None:
    """Draw the projected intervals as narrow columns, outline each boring and name it."""
    for row in projected.itertuples(index=False):
        ax.bar(
            row.distance,
            row.z_top - row.z_bottom,
            bottom=row.z_bottom,
            width=width,
            color=colour(row),
            edgecolor="none",
            linewidth=0,
        )
    tops = projected.groupby("boring_id").agg(
        distance=("distance", "mean"),
        z_top=("z_top", "max"),
        z_bottom=("z_bottom", "min"),
    )
    for row in tops.itertuples():
        ax.add_patch(
            Rectangle(
                (row.distance - width / 2, row.z_bottom),
                width,
                row.z_top - row.z_bottom,
                fill=False,
                edgecolor="black",
                linewidth=0.7,
                zorder=5,
            )
        )
    for boring_id, top in tops.iterrows():
        ax.annotate(
            str(boring_id),
            (top.distance, top.z_top),
            xytext=(0, 2),
            textcoords="offset points",
            ha="center",
            fontsize=6,
            rotation=90,
            va="bottom",
        )


def _frame_section(ax: Any, name: str, d_edges: np.ndarray, z_edges: np.ndarray) -> None:
    """Name the section's ends above the panel and fit the axes to the section."""
    for x, text, align in ((0.0, name, "left"), (1.0, name + "'", "right")):
        ax.text(
            x,
            1.01,
            text,
            transform=ax.transAxes,
            fontsize=10,
            fontweight="bold",
            va="bottom",
            ha=align,
        )
    ax.set_ylim(z_edges[0], z_edges[-1] + 0.04 * (z_edges[-1] - z_edges[0]))
    ax.set_xlim(d_edges[0], d_edges[-1])


def section_figure(
    section: xr.Dataset,
    *,
    line: SectionLine,
    facies_names: Sequence[str],
    projected: pd.DataFrame | None = None,
    water_table: np.ndarray | None = None,
    distance_unit: str = "m",
    elevation_unit: str = "m",
) -> Figure:
    """Two stacked panels of a vertical section: hydrofacies and log10 K, borings projected.

    Parameters
    ----------
    section
        Output of :func:`sample_section`.
    line
        The section line (labels of its ends).
    facies_names
        Class names, lowest K first.
    projected
        Output of :func:`project_intervals`, drawn as narrow columns.
    water_table
        Water-table elevation at each station of the section.
    distance_unit, elevation_unit
        Units of the distances along the line and of the elevations, for the axis labels.

    Returns
    -------
    matplotlib.figure.Figure
    """
    fig = new_figure(9.0, 6.4)
    axes = fig.subplots(2, 1, sharex=True)
    distance = section["distance"].values
    z = section["z"].values
    d_edges, z_edges = _edges(distance), _edges(z)
    cmap, norm = _facies_cmap(facies_names) if len(facies_names) else (None, None)
    width = max(float(np.ptp(distance)) / 120.0, 1e-6)
    panels = []
    if "facies_code" in section and cmap is not None:
        panels.append(("facies_code", axes[0]))
    if "log10_k" in section:
        panels.append(("log10_k", axes[1]))
    for name, ax in panels:
        values = np.ma.masked_invalid(section[name].values)
        if name == "facies_code":
            ax.pcolormesh(d_edges, z_edges, values, cmap=cmap, norm=norm)
            handles = [
                Patch(color=c, label=n)
                for c, n in zip(facies_colors(len(facies_names)), facies_names, strict=True)
            ]
            ax.legend(handles=handles, fontsize=7, loc="lower right", ncols=len(handles))
            ax.set_title(f"hydrofacies, section {line.name}-{line.name}'", fontsize=9)
        else:
            mesh = ax.pcolormesh(d_edges, z_edges, values, cmap="viridis")
            fig.colorbar(mesh, ax=ax, label="log10 K (m/s)", shrink=0.9)
            ax.set_title(f"log10 K, section {line.name}-{line.name}'", fontsize=9)
        if projected is not None and len(projected):
            colour = (
                functools.partial(_facies_colour_of, colours=facies_colors(len(facies_names)))
                if name == "facies_code"
                else functools.partial(_k_colour_of, mesh=mesh)
            )
            _draw_projected(ax, projected, width=width, colour=colour)
        if water_table is not None:
            ax.plot(
                distance,
                water_table,
                color=OKABE_ITO["sky_blue"],
                linewidth=1.4,
                linestyle="--",
                label="water table",
            )
        ax.set_ylabel(f"elevation ({elevation_unit})")
        ax.tick_params(labelsize=7)
    for ax in axes:
        _frame_section(ax, line.name, d_edges, z_edges)
    axes[1].set_xlabel(f"distance along the section ({distance_unit})")
    return fig


def probability_section_figure(
    section: xr.Dataset,
    *,
    line: SectionLine,
    facies_names: Sequence[str],
    water_table: np.ndarray | None = None,
    distance_unit: str = "m",
    elevation_unit: str = "m",
) -> Figure | None:
    """One panel per facies: its probability (share of the realizations) along a section.

    Parameters
    ----------
    section
        Output of :func:`sample_section` with ``prob_<facies>`` variables.
    line, facies_names, water_table, distance_unit, elevation_unit
        As in :func:`section_figure`.

    Returns
    -------
    matplotlib.figure.Figure or None
        None when the section holds no probability.
    """
    names = [n for n in facies_names if f"prob_{n}" in section]
    if not names:
        return None
    fig = new_figure(9.0, 2.4 * len(names) + 0.6)
    axes = np.atleast_1d(fig.subplots(len(names), 1, sharex=True))
    distance = section["distance"].values
    d_edges, z_edges = _edges(distance), _edges(section["z"].values)
    for name, ax in zip(names, axes, strict=True):
        values = np.ma.masked_invalid(section[f"prob_{name}"].values)
        mesh = ax.pcolormesh(d_edges, z_edges, values, cmap="cividis", vmin=0.0, vmax=1.0)
        fig.colorbar(mesh, ax=ax, label="probability", shrink=0.9)
        ax.set_title(f"probability of {name}, section {line.name}-{line.name}'", fontsize=9)
        if water_table is not None:
            ax.plot(distance, water_table, color=OKABE_ITO["sky_blue"], linewidth=1.4,
                    linestyle="--")  # fmt: skip
        ax.set_ylabel(f"elevation ({elevation_unit})")
        ax.tick_params(labelsize=7)
        _frame_section(ax, line.name, d_edges, z_edges)
    axes[-1].set_xlabel(f"distance along the section ({distance_unit})")
    return fig


def vertical_exaggeration(fig: Figure, ax, *, horizontal: float, vertical: float) -> float:
    """Ratio of vertical to horizontal scale of an axes as drawn.

    Parameters
    ----------
    fig
        The figure (to read the axes size in inches).
    ax
        The axes.
    horizontal, vertical
        Data ranges shown along x and y (m).

    Returns
    -------
    float
        Vertical exaggeration (1 = true scale).
    """
    box = ax.get_position()
    width_in = box.width * fig.get_figwidth()
    height_in = box.height * fig.get_figheight()
    if horizontal <= 0 or vertical <= 0:
        return float("nan")
    return (height_in / vertical) / (width_in / horizontal)
