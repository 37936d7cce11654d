"""The self-contained HTML report of a geo3d run.

:func:`write_report` turns the results of a run into one ``report.html``: every figure is an
embedded PNG (``data:`` URI), the styles are inline, and the file references nothing outside
itself, so it reads offline and can be mailed as one attachment.

Each section is built from the results by its own function.  A section whose data are absent
says so in a note (e.g. no slug tests: physics-only K); a section that fails to draw is replaced
by a note and a :class:`~geo3d.errors.Geo3dWarning`, so one bad figure never costs the whole
report.
"""

from __future__ import annotations

import datetime as _dt
import html
import logging
import math
import os
import string
import time
import warnings
from collections.abc import Callable, Iterable, Mapping
from dataclasses import dataclass, field
from importlib import resources
from pathlib import Path
from typing import Any

import geopandas as gpd
import numpy as np
import pandas as pd
import xarray as xr

import geo3d
from geo3d.errors import Geo3dWarning
from geo3d.geostats.covariance import CovarianceModel
from geo3d.io.atomic import atomic_file
from geo3d.io.output_frame import OutputFrame
from geo3d.io.tables import mapping_to_output_units, to_output_units
from geo3d.logs.flags import FLAGS
from geo3d.logs.process import LogResults
from geo3d.logs.sensor_checks import in_declared_units
from geo3d.logs.water_level import LEVEL_COLUMNS
from geo3d.model import ModelResult
from geo3d.report import figures as fg
from geo3d.report.log_figure import log_figure_pngs
from geo3d.results import RunResults
from geo3d.site import Site
from geo3d.units import factor, from_internal

__all__ = ["SECTION_TITLES", "build_report", "write_report"]

logger = logging.getLogger(__name__)

#: Section anchors and headings, in report order.
SECTION_TITLES: dict[str, str] = {
    "read-first": "Read this first",
    "site": "Site and borings",
    "water": "Water levels and water table",
    "logs": "Boring logs",
    "calibration": "Calibration of log-derived K",
    "variograms": "Variograms",
    "crossval": "Cross-validation",
    "maps": "Thickness and probability maps",
    "sections": "Cross-sections",
    "view3d": "3D view",
    "volumes": "Volumes",
    "injection": "Injection plans",
    "methods": "Methods and sources",
    "cautions": "Cautions",
}

_CAUTIONS = (
    "These results support, and never replace, the judgement of a licensed professional "
    "(professional geologist or engineer) who knows the site.",
    "Injection design must follow local regulations and permits, for example the underground "
    "injection control programme that applies where the site lies; volumes and point layouts "
    "here are a starting point for that design, not an approved plan.",
    "Underground utilities must be located and cleared before any push or injection.",
    "The voxel model is an interpolation between borings. Away from borings it is uncertain: "
    "the kriging variance, the cross-validation statistics and the P10/P50/P90 spread of the "
    "simulated volumes state how uncertain. Log-derived K is an estimate that slug tests or "
    "cores should confirm.",
)

_REFERENCES = (
    (
        "Archie1942",
        "Archie, G.E. (1942) The electrical resistivity log as an aid in determining "
        "some reservoir characteristics. Transactions of the AIME 146: 54-62.",
    ),
    (
        "ASTMD8037",
        "ASTM D8037/D8037M, Standard practice for direct push hydraulic logging for "
        "profiling variations of permeability in soils. ASTM International.",
    ),
    (
        "Deutsch1998",
        "Deutsch, C.V., Journel, A.G. (1998) GSLIB: Geostatistical Software Library "
        "and User's Guide, 2nd ed. Oxford University Press.",
    ),
    (
        "Dietrich2008",
        "Dietrich, P., Butler, J.J., Faiss, K. (2008) A rapid method for hydraulic "
        "profiling in unconsolidated formations. Ground Water 46(2): 323-328.",
    ),
    ("Freeze1979", "Freeze, R.A., Cherry, J.A. (1979) Groundwater. Prentice-Hall."),
    (
        "Goovaerts1997",
        "Goovaerts, P. (1997) Geostatistics for Natural Resources Evaluation. "
        "Oxford University Press.",
    ),
    (
        "Hampel1974",
        "Hampel, F.R. (1974) The influence curve and its role in robust estimation. "
        "Journal of the American Statistical Association 69(346): 383-393.",
    ),
    (
        "Hvorslev1951",
        "Hvorslev, M.J. (1951) Time lag and soil permeability in ground-water "
        "observations. US Army Corps of Engineers, Waterways Experiment Station, Bulletin 36.",
    ),
    (
        "Johnson1967",
        "Johnson, A.I. (1967) Specific yield: compilation of specific yields for "
        "various materials. USGS Water-Supply Paper 1662-D.",
    ),
    ("Journel1978", "Journel, A.G., Huijbregts, C.J. (1978) Mining Geostatistics. Academic Press."),
    (
        "Okabe2008",
        "Okabe, M., Ito, K. (2008) Color Universal Design (CUD): how to make figures "
        "and presentations that are friendly to colorblind people.",
    ),
    (
        "Pebesma2004",
        "Pebesma, E.J. (2004) Multivariable geostatistics in S: the gstat package. "
        "Computers & Geosciences 30: 683-691.",
    ),
    (
        "Schwarz1978",
        "Schwarz, G. (1978) Estimating the dimension of a model. Annals of "
        "Statistics 6(2): 461-464.",
    ),
)

_METHODS = (
    (
        "Net injection pressure",
        "Atmospheric pressure and the hydrostatic pressure below the "
        "water table are removed from the recorded pressure; the water table comes from the "
        "static pressure of dissipation tests (tail of the record, or an exponential fit "
        "(Hvorslev 1951) when the record stops before equilibrium).",
    ),
    (
        "Log-derived K",
        "K = Q &gamma;<sub>w</sub> / (F P<sub>net</sub>) with F the Hvorslev "
        "(1951) shape factor of the injection screen; with enough slug tests, log10 K is "
        "calibrated against them by least squares (Dietrich et al. 2008; ASTM D8037).",
    ),
    (
        "Flags",
        "EC spikes by a Hampel (1974) filter (rolling median &plusmn; k scaled MAD); "
        "EC above trend (ec_above_trend) where EC sits well above the site's EC-log10 K trend "
        "(Archie 1942); readings "
        "outside the resolution of the method are flagged, never silently used.",
    ),
    (
        "Hydrofacies",
        "Thresholds on log10 K (porosities after Freeze &amp; Cherry 1979 and "
        "Johnson 1967), or a Gaussian mixture whose class count is chosen by the Bayesian "
        "information criterion (Schwarz 1978); a minimum layer thickness.",
    ),
    (
        "Variograms",
        "Experimental vertical variogram from pairs within borings, horizontal from "
        "pairs between borings at similar elevation; a nugget plus one anisotropic structure "
        "fitted by weighted least squares (Journel &amp; Huijbregts 1978; Pebesma 2004).",
    ),
    (
        "Kriging",
        "Ordinary kriging of log10 K and EC with a moving neighbourhood in "
        "anisotropy-scaled space, with its kriging variance; leave-one-boring-out "
        "cross-validation (Deutsch &amp; Journel 1998; Goovaerts 1997).",
    ),
    (
        "Uncertainty",
        "Conditional Gaussian simulations of log10 K give the probability of each "
        "hydrofacies in each cell and the P10/P50/P90 of every volume (Deutsch &amp; Journel "
        "1998).",
    ),
    (
        "Volumes and injection",
        "Pore volume = cell volume &times; fraction inside the zone "
        "&times; porosity; design volume = A b n<sub>e</sub> f; points on a triangular grid with "
        "spacing &le; &radic;3 r cover the zone; volume per depth interval shared by K &times; "
        "thickness (Freeze &amp; Cherry 1979).",
    ),
)


# --------------------------------------------------------------------------- helpers


def _esc(value: Any) -> str:
    return html.escape(str(value), quote=True)


def _note(text: str) -> str:
    return f'<p class="note">{text}</p>'


def _fmt(value: Any) -> str:
    """Format a number for a table: thousands separators, about three significant digits."""
    if value is None:
        return "\u2013"
    if isinstance(value, bool | np.bool_):
        return "yes" if value else "no"
    if isinstance(value, int | np.integer):
        return f"{int(value):,}"
    try:
        number = float(value)
    except (TypeError, ValueError):
        return str(value)
    if not math.isfinite(number):
        return "\u2013"
    magnitude = abs(number)
    if magnitude == 0:
        return "0"
    if magnitude >= 1000:
        return f"{number:,.0f}"
    if magnitude >= 1:
        return f"{number:.2f}"
    if magnitude >= 0.001:
        return f"{number:.3g}"
    return f"{number:.3e}"


def _table(frame: pd.DataFrame, *, caption: str | None = None, max_rows: int = 80) -> str:
    if frame is None or len(frame) == 0:
        return _note("No rows.")
    shown = frame.head(max_rows).copy()
    for column in shown.columns:
        if column in ("x", "y") and pd.api.types.is_float_dtype(shown[column]):
            # coordinates: plain digits, no separators, so they can be copied into a GIS
            shown[column] = [f"{v:.2f}" if math.isfinite(v) else "\u2013" for v in shown[column]]
        elif pd.api.types.is_numeric_dtype(shown[column]) or shown[column].dtype == object:
            shown[column] = [
                _fmt(v)
                if isinstance(v, int | float | np.number | bool | np.bool_)
                else ("\u2013" if v is None or (isinstance(v, float) and math.isnan(v)) else str(v))
                for v in shown[column]
            ]
    body = shown.to_html(index=False, border=0, classes="data", escape=True, na_rep="\u2013")
    more = ""
    if len(frame) > max_rows:
        more = _note(
            f"First {max_rows} of {len(frame)} rows; the full table is in the run's CSV files."
        )
    cap = f"<p><strong>{_esc(caption)}</strong></p>" if caption else ""
    return f'{cap}<div class="table-wrap">{body}</div>{more}'


def _mapping_table(values: Mapping[str, Any], *, caption: str | None = None) -> str:
    rows = [
        {"quantity": str(k).replace("_", " "), "value": v}
        for k, v in values.items()
        if not isinstance(v, list | dict | tuple | pd.DataFrame)
    ]
    return _table(pd.DataFrame(rows), caption=caption)


def _figure(fig, *, name: str, alt: str, caption: str) -> str:
    uri = fg.figure_to_data_uri(fig)
    return _img(uri, name=name, alt=alt, caption=caption)


def _img(uri: str, *, name: str, alt: str, caption: str) -> str:
    return (
        f'<figure><img src="{uri}" alt="{_esc(alt)}" data-figure="{_esc(name)}">'
        f"<figcaption>{caption}</figcaption></figure>"
    )


# --------------------------------------------------------------------------- context


@dataclass
class _Context:
    """Everything the sections share, gathered once from the run results."""

    results: RunResults
    site: Site
    logs: LogResults | None
    model: ModelResult | None
    dataset: xr.Dataset | None
    facies_names: list[str]
    borings: pd.DataFrame | None
    boundary: Any
    zones: gpd.GeoDataFrame | None
    crs_label: str
    frame: OutputFrame
    maps: dict[str, xr.DataArray] = field(default_factory=dict)
    facies_maps: dict[str, xr.DataArray] = field(default_factory=dict)
    sections: list = field(default_factory=list)
    log_figures: Mapping[str, bytes] = field(default_factory=dict)

    @classmethod
    def from_results(cls, results: RunResults) -> _Context:
        site, logs, model = results.site, results.logs, results.model
        dataset = None if model is None else model.dataset
        borings = site.borings
        intervals = None if logs is None else logs.intervals
        if (borings is None or not len(borings)) and intervals is not None and len(intervals):
            borings = intervals.groupby("boring_id", as_index=False)[["x", "y"]].first()
        # everything drawn or tabled is shown in the output CRS and units
        frame = OutputFrame.from_site(site)
        zones = site.zones
        maps, facies_maps = (
            {
                str(k): frame.grid(v)
                for k, v in given.items()
                if isinstance(v, xr.DataArray) and {"y", "x"} <= set(v.dims)
            }
            for given in (results.maps, results.facies_maps)
        )
        ctx = cls(
            results=results,
            site=site,
            logs=logs,
            model=model,
            dataset=None if dataset is None else frame.grid(dataset),
            facies_names=list(results.facies_classes.names),
            borings=None if borings is None else frame.points(borings, ("ground_elev",)),
            boundary=frame.geometry(site.boundary),
            zones=frame.layer(zones) if zones is not None and len(zones) else zones,
            crs_label=frame.label,
            frame=frame,
            maps=maps,
            facies_maps=facies_maps,
        )
        dataset, borings = ctx.dataset, ctx.borings
        bounds = None
        if dataset is not None:
            bounds = (
                float(dataset["x"].min()),
                float(dataset["y"].min()),
                float(dataset["x"].max()),
                float(dataset["y"].max()),
            )
        elif borings is not None and len(borings) >= 2:
            bounds = (borings.x.min(), borings.y.min(), borings.x.max(), borings.y.max())
        try:
            ctx.sections = fg.default_section_lines(ctx.boundary, fallback_bounds=bounds)
        except Exception as exc:  # degenerate geometry: no sections, said in that section
            logger.warning("no section lines: %s", exc)
        return ctx

    @property
    def intervals(self) -> pd.DataFrame | None:
        return None if self.logs is None else self.logs.intervals

    @property
    def samples(self) -> pd.DataFrame | None:
        return None if self.logs is None else self.logs.samples

    @property
    def intervals_shown(self) -> pd.DataFrame | None:
        """Intervals with coordinates, depths and elevations in the output frame."""
        intervals = self.intervals
        if intervals is None:
            return None
        return self.frame.points(intervals, ("top", "bottom", "z_mid", "thickness"))

    @property
    def units(self) -> Any:
        """``[units]`` of the site file."""
        return self.site.config.units

    @property
    def coord_unit(self) -> str:
        return self.frame.coordinate_label

    @property
    def length_unit(self) -> str:
        return self.frame.length_label

    def length(self, values: Any) -> Any:
        """Lengths (m) in the output length unit."""
        return self.frame.length(values)

    def table(self, frame: pd.DataFrame) -> pd.DataFrame:
        """Return a table in the output CRS and units, each converted column named with its unit."""
        return to_output_units(frame, frame=self.frame)


# --------------------------------------------------------------------------- sections


def _section_read_first(ctx: _Context) -> str:
    items = "".join(f"<li>{_esc(text)}</li>" for text in _CAUTIONS)
    return f"<ul>{items}</ul>"


def _injection_points(ctx: _Context) -> list[tuple[float, float]]:
    points: list[tuple[float, float]] = []
    for plan in ctx.results.injection.values():
        frame = plan.points
        if frame is None or not len(frame):
            continue
        if "geometry" in getattr(frame, "columns", []):
            points.extend((g.x, g.y) for g in frame.geometry if g is not None)
        elif {"x", "y"} <= set(frame.columns):
            points.extend(zip(frame["x"], frame["y"], strict=True))
    if points:
        x, y = ctx.frame.xy(*np.asarray(points, dtype=float).T)
        points = list(zip(x.tolist(), y.tolist(), strict=True))
    return points


def _section_site(ctx: _Context) -> str:
    parts = []
    n_borings = 0 if ctx.borings is None else len(ctx.borings)
    n_zones = 0 if ctx.zones is None else len(ctx.zones)
    fig = fg.site_map_figure(
        boundary=ctx.boundary,
        borings=ctx.borings,
        zones=ctx.zones,
        sections=ctx.sections,
        injection_points=_injection_points(ctx),
        crs_label=ctx.crs_label,
        coordinate_unit=ctx.coord_unit,
    )
    parts.append(
        _figure(
            fig,
            name="site-map",
            alt="Plan view of the site with borings, treatment zones and section lines",
            caption=f"Site plan: {n_borings} borings, {n_zones} treatment zone(s), the section "
            f"lines of the cross-sections and any planned injection points. Coordinates in "
            f"{_esc(ctx.crs_label)}.",
        )
    )
    if ctx.borings is not None and n_borings:
        columns = [c for c in ("boring_id", "x", "y", "ground_elev", "date") if c in ctx.borings]
        table = ctx.borings[columns].copy()
        intervals = ctx.intervals
        if intervals is not None and len(intervals):
            depth = intervals.groupby("boring_id")["bottom"].max()
            depth = pd.Series(ctx.length(depth.to_numpy(float)), index=depth.index)
            table = table.merge(
                depth.rename("logged_depth"), left_on="boring_id", right_index=True, how="left"
            )
        caption = (
            f"Borings (x, y in {ctx.coord_unit}; ground elevation and logged depth in "
            f"{ctx.length_unit})"
        )
        parts.append(_table(table, caption=caption, max_rows=200))
    if not n_zones:
        parts.append(_note("No treatment zones were given: no zone volumes or injection plans."))
    return "".join(parts)


def _water_surface(ctx: _Context) -> xr.DataArray | None:
    for key, grid in ctx.maps.items():
        if _is_water_map(key) and "depth" not in key:
            return grid
    if ctx.logs is None or ctx.dataset is None:
        return None
    surface = ctx.logs.water_table
    x = ctx.dataset["x"].values
    y = ctx.dataset["y"].values
    xx, yy = np.meshgrid(x, y)
    qx, qy = ctx.frame.xy_internal(xx.ravel(), yy.ravel())
    values = np.asarray(ctx.length(surface.elevation(qx, qy)), dtype=float).reshape(xx.shape)
    if "mask" in ctx.dataset:
        values = np.where(ctx.dataset["mask"].any("z").values, values, np.nan)
    return xr.DataArray(values, dims=("y", "x"), coords={"y": y, "x": x})


def _section_water(ctx: _Context) -> str:
    parts = []
    levels = None if ctx.logs is None else ctx.logs.water_levels
    surface = None if ctx.logs is None else ctx.logs.water_table
    if levels is None or not len(levels):
        parts.append(_note("No water levels from dissipation tests are available."))
    else:
        hidden = ("x", "y", "aitken", "p_static_se")
        # where each boring's atmospheric pressure came from, its vertical head gradient and
        # whether the test sets the water table (the tests nearest it)
        extra = ("p_atm_source", "vertical_gradient", "water_table_test")
        columns = [c for c in (*LEVEL_COLUMNS, *extra) if c in levels and c not in hidden]
        pressure = str(ctx.units.pressure)
        shown = levels[columns].copy()
        for column in ("p_static", "fit_rmse"):  # pressures, in the declared unit
            if column in shown:
                values = shown[column].to_numpy(float)
                shown[column] = from_internal(values, pressure, "pressure")
                shown = shown.rename(columns={column: f"{column} ({pressure})"})
        parts.append(
            _table(
                ctx.table(shown),
                caption="Static water levels from dissipation tests "
                f"(depths and elevations in {ctx.length_unit}, pressures in {pressure})",
                max_rows=200,
            )
        )
    gradient = None if surface is None else surface.gradient
    direction = None if surface is None else surface.flow_direction_deg
    method = None if surface is None else surface.method
    grid = _water_surface(ctx)
    if grid is None and (levels is None or not len(levels)):
        return "".join(parts)
    if levels is not None:
        levels = ctx.frame.points(levels, ("wt_elev",))
    fig = fg.water_table_figure(
        surface=grid,
        water_levels=levels
        if levels is not None and {"x", "y", "wt_elev"} <= set(levels)
        else None,
        gradient=None if gradient is None else float(gradient),
        flow_direction_deg=None if direction is None else float(direction),
        boundary=ctx.boundary,
        crs_label=ctx.crs_label,
        coordinate_unit=ctx.coord_unit,
        length_unit=ctx.length_unit,
    )
    text = f"Water-table elevation ({ctx.length_unit})"
    if method:
        text += f" from a {_esc(method)} fit of the dissipation-test levels"
    if gradient is not None and direction is not None and np.isfinite(float(direction)):
        text += (
            f"; hydraulic gradient {float(gradient):.2e}, down-gradient toward "
            f"{float(direction):.0f}\u00b0 (clockwise from north), shown by the arrow"
        )
    parts.append(_figure(fig, name="water-table", alt="Water-table map", caption=text + "."))
    return "".join(parts)


def _section_logs(ctx: _Context) -> str:
    samples, intervals = ctx.samples, ctx.intervals
    if ctx.logs is None or samples is None or intervals is None or not len(samples):
        return _note("No processed logs are available.")
    checks = ctx.logs.sensor_checks
    parts = [_flag_summary(samples), _sensor_summary(checks, ctx.units)]
    pngs = ctx.log_figures or log_figure_pngs(samples, intervals, units=ctx.units, checks=checks)
    cells = [
        _img(
            fg.png_to_data_uri(png),
            name=f"log-{boring_id}",
            alt=f"Log of boring {boring_id}",
            caption=f"Boring {_esc(boring_id)}",
        )
        for boring_id, png in pngs.items()
    ]
    legend = ", ".join(f"{_esc(name)}" for name in ctx.facies_names)
    parts.append(
        _note(
            f"Each figure: the hydrofacies strip (lowest K first: {legend}), log-derived K, net "
            "injection pressure, recorded pressure with its atmospheric and hydrostatic parts, "
            "injection flow and bulk EC, in the units the site file declares; flagged samples "
            "carry their own symbols, a failed sensor check is a red line across its sensor's "
            "track (top: check before the log, bottom: after), and a run of missing EC is "
            "shaded grey."
        )
    )
    parts.append(f'<div class="log-grid">{"".join(cells)}</div>')
    return "".join(parts)


def _flag_summary(samples: pd.DataFrame | None) -> str:
    if samples is None or not len(samples):
        return ""
    flags = [c for c in FLAGS if c in samples]
    if not flags:
        return ""
    table = samples.groupby("boring_id")[flags].agg(
        lambda s: 100.0 * s.fillna(False).astype(bool).mean()
    )
    table.insert(0, "samples", samples.groupby("boring_id").size())
    table = table.reset_index()
    table.columns = ["boring_id", "samples"] + [f"{c} (%)" for c in flags]
    return _table(table, caption="Flagged samples per boring (% of samples)", max_rows=200)


def _sensor_summary(checks: pd.DataFrame | None, units: Any = None) -> str:
    if checks is None or not len(checks):
        return _note("No sensor checks were given.")
    if "sensor" in checks and {"measured", "expected", "tolerance"} <= set(checks):
        checks = in_declared_units(checks, units)
    status = next((c for c in ("passed", "pass", "ok") if c in checks), None)
    if status is None:
        return _table(checks, caption="Sensor checks (in the units the site file declares)")
    failed = checks[~checks[status].fillna(False).astype(bool)]
    if not len(failed):
        return _note(f"All {len(checks)} sensor checks passed.")
    return _table(
        failed,
        caption=f"Failed sensor checks ({len(failed)} of {len(checks)}), in the units the site "
        "file declares",
    )


def _section_calibration(ctx: _Context) -> str:
    if ctx.logs is None:
        return _note("No calibration: the logs were not processed.")
    calibration = ctx.logs.calibration
    residuals = pd.DataFrame(calibration.residuals)
    parts = []
    if calibration.method != "slug_tests":
        text = "Physics-only K, no calibration: log-derived K comes from the Hvorslev shape factor"
        text += (
            f" alone ({calibration.n_tests} slug test(s), fewer than a calibration needs)."
            if calibration.n_tests
            else " alone (no slug tests were given)."
        )
        parts.append(_note(text))
    summary = {
        k: getattr(calibration, k) for k in ("method", "a", "b", "se_a", "se_b", "n_tests", "r2")
    }
    parts.append(_mapping_table(summary, caption="Calibration log10 K = a + b log10(Q/P_net)"))
    if len(residuals) and "k_slug" in residuals:
        parts.append(_calibration_figure(ctx.logs, residuals))
        caption = f"Slug tests and residuals (K in m/s, depths in {ctx.length_unit})"
        parts.append(_table(ctx.table(residuals), caption=caption))
    elif calibration.method == "slug_tests":
        parts.append(_note("The calibration carries no per-test residuals to plot."))
    return "".join(parts)


def _calibration_figure(logs: LogResults, residuals: pd.DataFrame) -> str:
    """Slug-test K against the physics-only screen means the logs stage computed."""
    calibration = logs.calibration
    fitted = calibration.method == "slug_tests"
    caption = (
        "Slug-test K against physics-only log-derived K (Hvorslev shape factor) "
        "averaged over each test screen; dotted: 1:1"
        + ("; red: the fitted calibration." if fitted else " (no calibration fitted).")
    )
    fig = fg.calibration_figure(
        residuals["k_physics"].to_numpy(dtype=float),
        residuals["k_slug"].to_numpy(dtype=float),
        a=calibration.a if fitted else None,
        b=calibration.b if fitted else None,
        x_offset=logs.physics_a,
        labels=residuals["boring_id"],
        xlabel="log10 K from physics alone, mean over the screen (m/s)",
    )
    return _figure(fig, name="calibration", alt="Calibration plot", caption=caption)


def _model_curves(model: CovarianceModel, max_v: float, max_h: float) -> tuple[Any, Any]:
    """Model semivariance along the vertical and the horizontal major/minor axes."""
    lags_v = np.linspace(0.0, max_v, 120)
    lags_h = np.linspace(0.0, max_h, 120)
    azimuth = float(model.azimuth)
    ex, ey = fg.azimuth_vector(azimuth)
    directions = {"major": (ex, ey, 0.0)}
    if float(model.minor_ratio) != 1.0:
        directions["minor"] = (ey, -ex, 0.0)

    def along(vector: tuple[float, float, float], lags: np.ndarray) -> np.ndarray:
        coords = np.outer(lags, vector)
        scaled = np.asarray(model.scaled(coords))
        return np.asarray(model.variogram(np.linalg.norm(scaled - scaled[0], axis=1)))

    vertical = (lags_v, along((0.0, 0.0, 1.0), lags_v))
    horizontal = {name: (lags_h, along(v, lags_h)) for name, v in directions.items()}
    return vertical, horizontal


#: Units of the kriged variables, as the report labels them.
_VARIABLE_UNITS = {"log10_k": "log10 m/s", "ec": "mS/m"}


def _variance_unit(variable: str) -> str:
    """Return the unit of the semivariance of a kriged variable."""
    if variable in _VARIABLE_UNITS:
        return f"({_VARIABLE_UNITS[variable]})\u00b2"
    return "normal score\u00b2" if "normal_score" in variable else "units\u00b2"


def _section_variograms(ctx: _Context) -> str:
    fits = {} if ctx.model is None else ctx.model.variograms
    if not fits:
        return _note("No variograms are available (no 3D model was built).")
    parts, rows = [], []
    lag = ctx.length_unit
    for variable, fit in fits.items():
        vertical, horizontal, model = fit.vertical, fit.horizontal, fit.model
        max_v = float(vertical["lag"].max()) if len(vertical) else 5.0
        max_h = float(horizontal["lag"].max()) if len(horizontal) else 50.0
        v_curve, h_curves = _model_curves(model, max_v * 1.05, max_h * 1.05)
        rows.append(
            {
                "variable": variable,
                "model": model.kind,
                "nugget": model.nugget,
                "partial sill": model.sill,
                f"horizontal range ({lag})": float(ctx.length(float(model.range_h))),
                f"vertical range ({lag})": float(ctx.length(float(model.range_v))),
                "azimuth (\u00b0)": model.azimuth,
                "minor/major": model.minor_ratio,
                "fit RMSE": fit.rmse,
            }
        )
        fig = fg.variogram_figure(
            _lags_shown(ctx, vertical),
            _lags_shown(ctx, horizontal),
            vertical_model=_curve_shown(ctx, v_curve),
            horizontal_model={k: _curve_shown(ctx, c) for k, c in h_curves.items()},
            variable=variable,
            units=_variance_unit(variable),
            lag_unit=lag,
        )
        parts.append(
            _figure(
                fig,
                name=f"variogram-{variable}",
                alt=f"Variograms of {variable}",
                caption=f"Experimental variograms of {_esc(variable)} (points, sized and "
                "labelled by pair count) and the fitted model (lines): vertical from pairs "
                "within borings, horizontal from pairs between borings.",
            )
        )
    if rows:
        parts.insert(0, _table(pd.DataFrame(rows), caption="Fitted variogram models"))
    return "".join(parts)


def _lags_shown(ctx: _Context, table: pd.DataFrame) -> pd.DataFrame:
    if "lag" not in table:
        return table
    return table.assign(lag=ctx.length(table["lag"].to_numpy(dtype=float)))


def _curve_shown(ctx: _Context, curve: tuple[np.ndarray, np.ndarray]) -> tuple[Any, Any]:
    lags, gamma = curve
    return ctx.length(np.asarray(lags, dtype=float)), gamma


def _facies_crossval(ctx: _Context) -> str:
    """Confusion matrix and Brier scores of the leave-one-boring-out facies predictions."""
    cv = None if ctx.model is None else ctx.model.facies_crossval
    if cv is None or not len(cv.predictions):
        return ""
    confusion = cv.confusion().rename_axis(columns=None).reset_index()
    confusion = confusion.rename(columns={"observed": "observed \u2193 predicted \u2192"})
    scores = pd.DataFrame(
        {
            "intervals": [len(cv.predictions)],
            "accuracy (most probable facies)": [cv.accuracy()],
            "Brier score": [cv.brier()],
            "Brier score of the proportions alone": [cv.brier_reference()],
            "Brier skill score": [cv.brier_skill()],
        }
    )
    return (
        "<h3>Facies, one boring left out at a time</h3>"
        + _table(scores, caption="Facies predicted for each boring from the other borings")
        + _table(
            confusion,
            caption="Intervals by observed facies (rows) and most probable predicted facies "
            "(columns). The Brier score is the mean squared error of the predicted "
            "probabilities (0 is perfect); the skill score compares it with predicting the "
            "site proportions everywhere (1 is perfect, 0 no better than the proportions).",
        )
    )


def _section_crossval(ctx: _Context) -> str:
    results = {} if ctx.model is None else ctx.model.crossval
    facies = _facies_crossval(ctx)
    if not results:
        return facies or _note("No cross-validation is available.")
    parts, rows = [], []
    for variable, cv in results.items():
        summary = cv.summary
        rows.append(
            {
                "variable": variable,
                "n": summary.get("n"),
                "RMSE": summary.get("rmse"),
                "mean error (ME)": summary.get("mean_error"),
                "mean standardized error": summary.get("mean_std_error"),
                "variance of standardized error": summary.get("var_std_error"),
            }
        )
        samples = cv.samples
        if len(samples) and {"observed", "estimate"} <= set(samples):
            fig = fg.crossval_figure(
                samples, variable=variable, units=_VARIABLE_UNITS.get(variable, "")
            )
            parts.append(
                _figure(
                    fig,
                    name=f"crossval-{variable}",
                    alt=f"Cross-validation of {variable}",
                    caption="Left: estimate with the whole boring left out against the "
                    "observed value. Right: standardized errors; a good model has mean "
                    "near 0 and variance near 1.",
                )
            )
    parts.insert(0, _table(pd.DataFrame(rows), caption="Leave-one-boring-out statistics"))
    return "".join(parts) + facies


#: Main maps: key, label, units ("length" = the output length unit).
_MAIN_MAPS = (
    ("transmissive_thickness", "transmissive thickness", "length"),
    ("storage_thickness", "storage thickness", "length"),
    ("transmissivity", "transmissivity", "m\u00b2/s"),
    ("transmissive_top_depth", "depth to the top of the main transmissive zone", "length"),
)
_PERCENTILES = ("_p10", "_p50", "_p90")


def _is_water_map(key: str) -> bool:
    lower = key.lower()
    return "water" in lower or lower.startswith("wt_")


def _section_maps(ctx: _Context) -> str:
    given = {
        k: v for k, v in ctx.maps.items() if set(v.dims) == {"y", "x"} and not _is_water_map(k)
    }
    derived = ctx.facies_maps
    if not any("thick" in k for k in given):
        given.update({k: v for k, v in derived.items() if k.startswith("thickness_")})
    if not any("prob" in k for k in given):
        given.update({k: v for k, v in derived.items() if k.startswith("mean_prob_")})
    if not given:
        return _note("No maps are available (no 3D model was built).")
    known = {key for key, _, _ in _MAIN_MAPS}
    plain = [k for k in given if not k.endswith(_PERCENTILES)]
    order = [key for key, _, _ in _MAIN_MAPS if key in given]
    order += sorted(k for k in plain if k not in known and "thick" in k)
    order += sorted(k for k in plain if k not in known and "prob" in k)
    cells = []
    for key in order:
        grid = given[key]
        label = next((text for k, text, _ in _MAIN_MAPS if k == key), key.replace("_", " "))
        units: str
        vmin: float | None
        vmax: float | None
        if "prob" in key:
            units, cmap, vmin, vmax = "probability", "cividis", 0.0, 1.0
            caption = f"{_esc(label)}: probability from the conditional simulations" + (
                ", averaged over the column" if key.startswith("mean_prob_") else ""
            )
        else:
            known_units = next((u for k, _, u in _MAIN_MAPS if k == key), None)
            units = known_units or str(grid.attrs.get("units", "m"))
            units = ctx.length_unit if units in ("m", "length") else units
            cmap, vmax = "viridis", None
            vmin = 0.0 if "thick" in key else None
            caption = f"{_esc(label)} ({_esc(units)})"
        panels = [("", grid)]
        if f"{key}_p10" in given and f"{key}_p90" in given:
            panels = [
                ("P10", given[f"{key}_p10"]),
                ("estimate", grid),
                ("P90", given[f"{key}_p90"]),
            ]
            caption += (
                "; left to right: P10 over the conditional simulations, the kriged estimate, P90"
            )
        fig = fg.map_panels_figure(
            panels,
            units=units,
            cmap=cmap,
            vmin=vmin,
            vmax=vmax,
            boundary=ctx.boundary,
            borings=ctx.borings,
            coordinate_unit=ctx.coord_unit,
        )
        fig.suptitle(label, fontsize=10)
        cell = _figure(fig, name=f"map-{key}", alt=label, caption=caption + ".")
        cells.append(f'<div class="wide">{cell}</div>' if len(panels) > 1 else cell)
    shown = set(order) | {k + p for k in order for p in _PERCENTILES}
    rest = sorted(set(given) - shown)
    note = ""
    if rest:
        note = _note(
            "Further maps of this run (GeoTIFF in the maps folder when exported): "
            + ", ".join(_esc(k) for k in rest)
            + "."
        )
    return f'<div class="maps">{"".join(cells)}</div>{note}'


def _section_sections(ctx: _Context) -> str:
    ds = ctx.dataset
    if ds is None:
        return _note("No cross-sections: no 3D model was built.")
    if not ctx.sections:
        return _note("No cross-sections: the site geometry does not define a section line.")
    parts = []
    dx = float(np.abs(np.diff(ds["x"].values[:2]))[0]) if ds.sizes["x"] > 1 else 1.0
    surface = None if ctx.logs is None else ctx.logs.water_table
    intervals = ctx.intervals_shown
    for line in ctx.sections:
        probs = tuple(f"prob_{n}" for n in ctx.facies_names)
        section = fg.sample_section(ds, line, variables=("facies_code", "log10_k", "mask", *probs))
        projected = None
        max_offset = max(2.0 * dx, 0.05 * line.length)
        if intervals is not None and len(intervals) and {"x", "y", "z_mid"} <= set(intervals):
            projected = fg.project_intervals(intervals, line, max_offset=max_offset)
        water = None
        if surface is not None:
            try:
                qx, qy = ctx.frame.xy_internal(section["x"].values, section["y"].values)
                water = np.asarray(ctx.length(surface.elevation(qx, qy)), dtype=float)
            except Exception as exc:  # a surface that cannot be evaluated is just not drawn
                logger.warning("water table not drawn on section %s: %s", line.name, exc)
        fig = fg.section_figure(
            section,
            line=line,
            facies_names=ctx.facies_names,
            projected=projected,
            water_table=water,
            distance_unit=ctx.coord_unit,
            elevation_unit=ctx.length_unit,
        )
        # the same unit along both axes for the exaggeration
        z = section["z"].values * factor(ctx.frame.length_unit, "length")
        z = z / factor(ctx.frame.coordinate_unit, "length")
        ax = fig.axes[0]
        fig.canvas.draw()
        exaggeration = fg.vertical_exaggeration(
            fig,
            ax,
            horizontal=float(np.ptp(section["distance"].values)) or 1.0,
            vertical=float(np.ptp(z)) or 1.0,
        )
        n_borings = 0 if projected is None else projected["boring_id"].nunique()
        parts.append(
            _figure(
                fig,
                name=f"section-{line.name}",
                alt=f"Cross-section {line.name}-{line.name}'",
                caption=f"Section {line.name}-{line.name}' ({line.length:.0f} {ctx.coord_unit}, "
                "from "
                f"({line.start[0]:.0f}, {line.start[1]:.0f}) to ({line.end[0]:.0f}, "
                f"{line.end[1]:.0f})): hydrofacies (top) and log10 K (bottom) of the voxel "
                f"model, with the {n_borings} boring(s) within {max_offset:.0f} {ctx.coord_unit} "
                "projected "
                f"onto it as narrow columns; vertical exaggeration about "
                f"{exaggeration:.0f}\u00d7.",
            )
        )
        parts.append(_probability_section(ctx, section, line, water))
    return "".join(parts)


def _probability_section(ctx: _Context, section: xr.Dataset, line: Any, water: Any) -> str:
    fig = fg.probability_section_figure(
        section, line=line, facies_names=ctx.facies_names, water_table=water,
        distance_unit=ctx.coord_unit, elevation_unit=ctx.length_unit,
    )  # fmt: skip
    if fig is None:
        return ""
    return _figure(
        fig,
        name=f"section-prob-{line.name}",
        alt=f"Facies probabilities along section {line.name}-{line.name}'",
        caption=f"Section {line.name}-{line.name}': probability of each hydrofacies, the share "
        "of the realizations that put it in the cell (1 = every realization). Cells far "
        "from the borings and near contacts are the uncertain ones; above the water table the "
        "facies of a facies-first model come from EC.",
    )


def _section_view3d(ctx: _Context) -> str:
    ds = ctx.dataset
    if ds is None:
        return _note("No 3D view: no 3D model was built.")
    from geo3d.report.view3d import View3DUnavailable, render_model_view

    try:
        view = render_model_view(ds, facies_names=ctx.facies_names, intervals=ctx.intervals_shown)
    except View3DUnavailable as exc:
        return _note(
            f"The 3D view could not be rendered on this machine ({_esc(exc)}); open "
            "model.vti or site.vtm in a 3D viewer instead."
        )
    shown = " and ".join(_esc(s) for s in view.shown) or "no"
    return _img(
        fg.png_to_data_uri(view.png),
        name="view3d",
        alt="3D view of the voxel model",
        caption=f"The {shown} hydrofacies of the voxel model inside its outline, borings as "
        f"black tubes; vertical exaggeration {view.vertical_exaggeration:.0f}\u00d7 (a view "
        "setting only; the exported files keep true elevations).",
    )


def _long_volumes(volumes: pd.DataFrame) -> pd.DataFrame:
    """One row per quantity with its estimate and P10/P50/P90 beside it."""
    columns = list(volumes.columns)
    bases = [
        c
        for c in columns
        if all(f"{c}{p}" in volumes for p in _PERCENTILES)
        and pd.api.types.is_numeric_dtype(volumes[c])
    ]
    if not bases:
        return volumes
    attached = {f"{b}{p}" for b in bases for p in (*_PERCENTILES, "_most_likely")}
    ids = [c for c in columns if c not in bases and c not in attached]
    rows = []
    for _, row in volumes.iterrows():
        for base in bases:
            out = {c: row[c] for c in ids}
            out["quantity"] = base.replace("_", " ")
            out["estimate"] = row[base]
            if f"{base}_most_likely" in volumes:
                out["most likely"] = row[f"{base}_most_likely"]
            for p in _PERCENTILES:
                out[p[1:].upper()] = row[f"{base}{p}"]
            rows.append(out)
    return pd.DataFrame(rows)


def _section_volumes(ctx: _Context) -> str:
    volumes = ctx.results.volumes
    if volumes is None or not len(volumes):
        return _note("No volumes were computed (no treatment zones were given).")
    volumes = ctx.table(volumes)
    text = _note(
        f"Volumes in {ctx.frame.volume_label} and areas in {ctx.frame.area_label} (as the "
        "quantity names say). The estimate is the expected volume over the facies "
        "probabilities of the model; P10/P50/P90 are the 10th, 50th and 90th percentiles over "
        "the conditional simulations: 80% of the simulated outcomes fall between P10 and P90. "
        "Band 'all' is the whole zone; 'saturated' and 'unsaturated' are its parts below and "
        "above the water table (where K is not measured: a facies-first model takes the facies "
        "there from EC). The bands hold only the uncertainty the model represents; on "
        "synthetic sites with known truth they held the truth less often than 80 % of the time "
        "(see the README), so treat them as a lower bound."
    )
    return text + _table(
        _long_volumes(volumes),
        caption="Volumes per treatment zone, depth band and hydrofacies",
        max_rows=2000,
    )


def _section_injection(ctx: _Context) -> str:
    plans = ctx.results.injection
    if not plans:
        return _note("No injection plans (no treatment zones were given).")
    parts = []
    for zone, plan in plans.items():
        parts.append(f"<h3>{_esc(zone)}</h3>")
        summary = mapping_to_output_units(
            plan.summary, length_unit=ctx.frame.length_unit, volume_unit=ctx.frame.volume_unit
        )
        if summary:
            parts.append(_mapping_table(summary, caption="Design summary"))
        schedule = plan.schedule
        if len(schedule):
            parts.append(_schedule_table(schedule, ctx.frame))
    return "".join(parts)


def _first(frame: pd.DataFrame, names: Iterable[str]) -> str | None:
    return next((n for n in names if n in frame.columns), None)


def _schedule_table(schedule: pd.DataFrame, frame: OutputFrame) -> str:
    top = _first(schedule, ("top_depth", "top"))
    bottom = _first(schedule, ("bottom_depth", "bottom"))
    volume = _first(schedule, ("volume_m3", "volume"))
    if not (top and bottom and volume):
        return _table(to_output_units(schedule, frame=frame), caption="Injection schedule")
    if "interval" in schedule:
        key = schedule["interval"]
    else:
        # depths differ from point to point with the ground: group by 0.5 m of top depth
        key = (schedule[top] / 0.5).round() * 0.5
    point = "point_id" if "point_id" in schedule else volume
    grouped = (
        schedule.groupby(key, sort=True)
        .agg(
            top=(top, "mean"),
            bottom=(bottom, "mean"),
            points=(point, "nunique"),
            per_point=(volume, "mean"),
            total=(volume, "sum"),
        )
        .reset_index(drop=True)
    )
    for column in ("top", "bottom"):
        grouped[column] = frame.length(grouped[column].to_numpy(dtype=float))
    for column in ("per_point", "total"):
        grouped[column] = frame.volume(grouped[column].to_numpy(dtype=float))
    length, volume_unit = frame.length_label, frame.volume_label
    grouped.columns = [
        f"mean top depth ({length})",
        f"mean bottom depth ({length})",
        "points",
        f"mean volume per point ({volume_unit})",
        f"total volume ({volume_unit})",
    ]
    return _table(grouped, caption="Injection volume per depth interval (all points)")


def _section_methods(ctx: _Context) -> str:
    items = "".join(f"<dt>{name}</dt><dd>{text}</dd>" for name, text in _METHODS)
    refs = "".join(f'<li id="ref-{key}">{_esc(text)}</li>' for key, text in _REFERENCES)
    timings = ctx.results.timings
    run = ""
    if timings:
        frame = pd.DataFrame([{"stage": k, "seconds": float(v)} for k, v in timings.items()])
        run = _table(frame, caption="Run time per stage")
    return (
        f'<dl class="facts methods">{items}</dl>'
        f'<h3>Sources</h3><ol class="references">{refs}</ol>{run}'
    )


def _section_cautions(ctx: _Context) -> str:
    return _section_read_first(ctx)


_BUILDERS: dict[str, Callable[[_Context], str]] = {
    "read-first": _section_read_first,
    "site": _section_site,
    "water": _section_water,
    "logs": _section_logs,
    "calibration": _section_calibration,
    "variograms": _section_variograms,
    "crossval": _section_crossval,
    "maps": _section_maps,
    "sections": _section_sections,
    "view3d": _section_view3d,
    "volumes": _section_volumes,
    "injection": _section_injection,
    "methods": _section_methods,
    "cautions": _section_cautions,
}


def _render_section(ctx: _Context, anchor: str) -> str:
    title = SECTION_TITLES[anchor]
    started = time.perf_counter()
    try:
        body = _BUILDERS[anchor](ctx)
        logger.debug("report section %r drawn in %.2f s", title, time.perf_counter() - started)
    except Exception as exc:  # one failed section must not cost the whole report
        logger.exception("report section %r failed", title)
        warnings.warn(
            f"report section '{title}' could not be drawn: {exc}", Geo3dWarning, stacklevel=3
        )
        body = _note(f"This section could not be drawn: {_esc(exc)}")
    css = ' class="cautions"' if anchor in ("read-first", "cautions") else ""
    return (
        f'<section id="{anchor}"{css} aria-labelledby="{anchor}-h">'
        f'<h2 id="{anchor}-h">{_esc(title)}</h2>{body}</section>'
    )


def _header(ctx: _Context, generated: _dt.datetime) -> str:
    name = ctx.site.name
    facts = {
        "Coordinate reference system": ctx.crs_label,
        "Report date": generated.strftime("%Y-%m-%d %H:%M UTC"),
        "geo3d version": geo3d.__version__,
        "Borings": 0 if ctx.borings is None else len(ctx.borings),
    }
    facts["Site folder"] = Path(ctx.site.root).name
    if ctx.dataset is not None and "mask" in ctx.dataset:
        facts["Model cells inside the site"] = f"{int(ctx.dataset['mask'].sum()):,}"
    timings = ctx.results.timings
    if timings:
        facts["Run time"] = f"{sum(float(v) for v in timings.values()):.1f} s"
    rows = "".join(f"<dt>{_esc(k)}</dt><dd>{_esc(v)}</dd>" for k, v in facts.items())
    return (
        '<header class="title-block"><p class="kicker">Hydrogeological site model</p>'
        f'<h1>{_esc(name)}</h1><dl class="facts">{rows}</dl></header>'
    )


def _toc() -> str:
    items = "".join(
        f'<li><a href="#{anchor}">{_esc(title)}</a></li>'
        for anchor, title in SECTION_TITLES.items()
    )
    return (
        '<nav class="toc" aria-labelledby="toc-h"><h2 id="toc-h">Contents</h2>'
        f"<ol>{items}</ol></nav>"
    )


def _resource(name: str) -> str:
    return resources.files("geo3d.report").joinpath(name).read_text(encoding="utf-8")


def build_report(
    results: RunResults,
    *,
    generated: _dt.datetime | None = None,
    log_figures: Mapping[str, bytes] | None = None,
) -> str:
    """Build the report of a run as one self-contained HTML document.

    Parameters
    ----------
    results
        The results of the stages run; absent stages give notes instead of figures.
    generated
        Time stamp of the report; now (UTC) when None.
    log_figures
        Boring id -> PNG of its log figure, embedded as it is; drawn here when None.

    Returns
    -------
    str
        The HTML text.
    """
    generated = generated or _dt.datetime.now(_dt.UTC)
    ctx = _Context.from_results(results)
    ctx.log_figures = {} if log_figures is None else log_figures
    body = "\n".join(_render_section(ctx, anchor) for anchor in SECTION_TITLES)
    name = ctx.site.name
    template = string.Template(_resource("template.html"))
    return template.substitute(
        title=_esc(f"{name}: geo3d site model report"),
        version=_esc(geo3d.__version__),
        css=_resource("report.css"),
        header=_header(ctx, generated),
        toc=_toc(),
        body=body,
        footer=_esc(
            f"Made with geo3d {geo3d.__version__} on {generated:%Y-%m-%d}. The figures are "
            "embedded; this file needs no network connection."
        ),
    )


def write_report(
    results: RunResults,
    path: str | os.PathLike,
    *,
    log_figures: Mapping[str, bytes] | None = None,
) -> Path:
    """Write the self-contained HTML report of a run.

    Parameters
    ----------
    results
        The results of the stages run.
    path
        File to write (usually ``OUT/report.html``); written under a temporary name and
        moved into place only when complete.
    log_figures
        Boring id -> PNG of its log figure (see :func:`build_report`).

    Returns
    -------
    pathlib.Path
        The written file.
    """
    path = Path(path)
    text = build_report(results, log_figures=log_figures)
    with atomic_file(path) as tmp:
        tmp.write_text(text, encoding="utf-8")
    logger.info("wrote report %s (%.1f MB)", path, path.stat().st_size / 1e6)
    return path
