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

import numpy as np
import pandas as pd
import xarray as xr

import geo3d
from geo3d.errors import Geo3dWarning
from geo3d.io.atomic import atomic_file
from geo3d.io.output_frame import OutputFrame, crs_label
from geo3d.io.tables import mapping_to_output_units, to_output_units
from geo3d.report import figures as fg
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
        "ionic EC where EC sits well above the site's EC-log10 K trend (Archie 1942); readings "
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


def _get(obj: Any, name: str, default: Any = None) -> Any:
    return getattr(obj, name, default) if obj is not None else default


def _frame(value: Any) -> pd.DataFrame | None:
    if value is None:
        return None
    if isinstance(value, pd.DataFrame):
        return value
    try:
        return pd.DataFrame(value)
    except (TypeError, ValueError):
        return None


# --------------------------------------------------------------------------- context


@dataclass
class _Context:
    """Everything the sections share, gathered once from the run results."""

    results: Any
    site: Any
    logs: Any
    model: Any
    dataset: xr.Dataset | None
    facies_names: list[str]
    borings: pd.DataFrame | None
    boundary: Any
    zones: Any
    crs_label: str
    frame: OutputFrame | None = None
    maps: dict = field(default_factory=dict)
    sections: list = field(default_factory=list)
    log_figure_dir: Path | None = None

    @classmethod
    def from_results(cls, results: Any) -> _Context:
        site = _get(results, "site")
        logs = _get(results, "logs")
        model = _get(results, "model")
        dataset = _get(model, "dataset")
        if dataset is not None and not isinstance(dataset, xr.Dataset):
            dataset = None
        borings = _frame(_get(site, "borings"))
        intervals = _frame(_get(logs, "intervals"))
        if (borings is None or not len(borings)) and intervals is not None and len(intervals):
            borings = intervals.groupby("boring_id", as_index=False)[["x", "y"]].first()
        boundary = _get(site, "boundary")
        zones = _get(site, "zones")
        maps = {
            str(k): v
            for k, v in (_get(results, "maps") or {}).items()
            if isinstance(v, xr.DataArray)
        }
        frame = _frame_of(site)
        names = _facies_names(site, intervals, dataset)
        if frame is not None:
            # everything drawn or tabled is shown in the output CRS and units
            borings = None if borings is None else frame.points(borings, ("ground_elev",))
            boundary = frame.geometry(boundary)
            zones = frame.layer(zones) if zones is not None and len(zones) else zones
            dataset = None if dataset is None else frame.grid(dataset)
            maps = {k: frame.grid(v) for k, v in maps.items() if {"y", "x"} <= set(v.dims)}
        ctx = cls(
            results=results,
            site=site,
            logs=logs,
            model=model,
            dataset=dataset,
            facies_names=names,
            borings=borings,
            boundary=boundary,
            zones=zones,
            crs_label=frame.label if frame is not None else _crs_label(_get(site, "crs")),
            frame=frame,
            maps=maps,
        )
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
            ctx.sections = fg.default_section_lines(boundary, fallback_bounds=bounds)
        except Exception as exc:  # degenerate geometry: no sections, said in that section
            logger.warning("no section lines: %s", exc)
        return ctx

    @property
    def intervals(self) -> pd.DataFrame | None:
        return _frame(_get(self.logs, "intervals"))

    @property
    def samples(self) -> pd.DataFrame | None:
        return _frame(_get(self.logs, "samples"))

    @property
    def intervals_shown(self) -> pd.DataFrame | None:
        """Intervals with coordinates, depths and elevations in the output frame."""
        intervals = self.intervals
        if intervals is None or self.frame is None:
            return intervals
        return self.frame.points(intervals, ("top", "bottom", "z_mid", "thickness"))

    @property
    def units(self) -> Any:
        """``[units]`` of the site file (None when unknown)."""
        return _get(_get(self.site, "config"), "units")

    @property
    def coord_unit(self) -> str:
        return "m" if self.frame is None else self.frame.coordinate_label

    @property
    def length_unit(self) -> str:
        return "m" if self.frame is None else self.frame.length_label

    @property
    def length_key(self) -> str:
        return "m" if self.frame is None else self.frame.length_unit

    @property
    def volume_unit(self) -> str:
        return "m\u00b3" if self.frame is None else self.frame.volume_label

    @property
    def area_unit(self) -> str:
        return "m\u00b2" if self.frame is None else self.frame.area_label

    def length(self, values):
        """Lengths (m) in the output length unit."""
        return values if self.frame is None else self.frame.length(values)

    def table(self, frame: pd.DataFrame) -> pd.DataFrame:
        """Return a table in the output CRS and units, each converted column named with its unit."""
        if self.frame is None:
            return frame
        return to_output_units(frame, frame=self.frame)


def _frame_of(site: Any) -> OutputFrame | None:
    """Return the output frame of a site; None when the results carry no site file (metres)."""
    if _get(site, "config") is None or _get(site, "crs") is None:
        return None
    try:
        return OutputFrame.from_site(site)
    except Exception as exc:  # an incomplete site object: shown as computed
        logger.warning("report shown in the internal CRS and metres: %s", exc)
        return None


def _facies_names(site: Any, intervals: pd.DataFrame | None, dataset: Any) -> list[str]:
    classes = _get(_get(_get(site, "config"), "facies"), "classes")
    if classes:
        names = [str(_get(c, "name")) for c in classes if _get(c, "name") is not None]
        if names:
            return names
    if intervals is not None and {"facies", "facies_code"} <= set(intervals.columns):
        pairs = intervals[["facies_code", "facies"]].dropna().drop_duplicates("facies_code")
        pairs = pairs.sort_values("facies_code")
        if len(pairs) and (pairs["facies_code"].to_numpy() == np.arange(len(pairs))).all():
            return [str(v) for v in pairs["facies"]]
    if dataset is not None:
        names = [str(v)[5:] for v in dataset.data_vars if str(v).startswith("prob_")]
        if names:
            return names
        if "facies_code" in dataset:
            top = int(np.nanmax(dataset["facies_code"].values))
            return [f"class {i}" for i in range(top + 1)]
    return []


def _crs_label(crs: Any) -> str:
    if crs is None or not hasattr(crs, "to_authority"):
        return "CRS not given" if crs is None else str(crs)
    return crs_label(crs)


# --------------------------------------------------------------------------- sections


def _section_read_first(ctx: _Context) -> str:
    items = "".join(f"<li>{_esc(text)}</li>" for text in _CAUTIONS)
    return f"<ul>{items}</ul>"


def _injection_points(ctx: _Context) -> list[tuple[float, float]]:
    points = []
    for plan in (_get(ctx.results, "injection") or {}).values():
        frame = _get(plan, "points")
        if frame is None or not len(frame):
            continue
        if "geometry" in getattr(frame, "columns", []):
            points.extend((g.x, g.y) for g in frame.geometry if g is not None)
        elif {"x", "y"} <= set(frame.columns):
            points.extend(zip(frame["x"], frame["y"], strict=True))
    if ctx.frame is not None and points:
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
    if n_borings:
        columns = [c for c in ("boring_id", "x", "y", "ground_elev", "date") if c in ctx.borings]
        table = ctx.borings[columns].copy()
        intervals = ctx.intervals
        if intervals is not None and len(intervals):
            depth = intervals.groupby("boring_id")["bottom"].max().rename("logged_depth")
            depth = pd.Series(
                ctx.length(depth.to_numpy(dtype=float)), index=depth.index, name=depth.name
            )
            table = table.merge(depth, left_on="boring_id", right_index=True, how="left")
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
        if _is_water_map(str(key)) and "depth" not in str(key):
            return grid
    surface = _get(ctx.logs, "water_table")
    if surface is None or ctx.dataset is None:
        return None
    x = ctx.dataset["x"].values
    y = ctx.dataset["y"].values
    xx, yy = np.meshgrid(x, y)
    qx, qy = (xx.ravel(), yy.ravel()) if ctx.frame is None else ctx.frame.xy_internal(xx, yy)
    values = np.asarray(surface.elevation(np.ravel(qx), np.ravel(qy)), dtype=float)
    values = ctx.length(values).reshape(xx.shape)
    if "mask" in ctx.dataset:
        values = np.where(ctx.dataset["mask"].any("z").values, values, np.nan)
    return xr.DataArray(values, dims=("y", "x"), coords={"y": y, "x": x})


def _section_water(ctx: _Context) -> str:
    parts = []
    levels = _frame(_get(ctx.logs, "water_levels"))
    surface = _get(ctx.logs, "water_table")
    if levels is None or not len(levels):
        parts.append(_note("No water levels from dissipation tests are available."))
    else:
        columns = [
            c
            for c in (
                "boring_id",
                "test_id",
                "depth",
                "p_static",
                "depth_to_water",
                "wt_elev",
                "fraction_dissipated",
                "method",
                "fit_rmse",
            )
            if c in levels
        ]
        pressure = str(_get(ctx.units, "pressure", "kPa"))
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
    gradient = _get(surface, "gradient")
    direction = _get(surface, "flow_direction_deg")
    method = _get(surface, "method")
    grid = _water_surface(ctx)
    if grid is None and (levels is None or not len(levels)):
        return "".join(parts)
    if levels is not None and ctx.frame is not None:
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


def _close(fig) -> None:
    """Release a figure that may have been made through pyplot."""
    import matplotlib.pyplot as plt

    plt.close(fig)


def _log_figure_function() -> Callable | None:
    try:
        from geo3d.report.log_figure import log_figure
    except ImportError:
        return None
    return log_figure


def _section_logs(ctx: _Context) -> str:
    samples, intervals = ctx.samples, ctx.intervals
    if (samples is None or not len(samples)) and (intervals is None or not len(intervals)):
        return _note("No processed logs are available.")
    ids = sorted(
        set(samples["boring_id"].astype(str) if samples is not None and len(samples) else [])
        | set(
            intervals["boring_id"].astype(str) if intervals is not None and len(intervals) else []
        )
    )
    checks = _frame(_get(ctx.logs, "sensor_checks"))
    parts = [_flag_summary(samples), _sensor_summary(checks, ctx.units)]
    shared = _log_figure_function()
    cells = []
    for boring_id in ids:
        own_samples = (
            samples[samples["boring_id"].astype(str) == boring_id] if samples is not None else None
        )
        own_intervals = (
            intervals[intervals["boring_id"].astype(str) == boring_id]
            if intervals is not None
            else None
        )
        saved = _saved_log_figure(ctx.log_figure_dir, boring_id)
        if saved is not None:
            cells.append(
                _img(
                    fg.png_to_data_uri(saved),
                    name=f"log-{boring_id}",
                    alt=f"Log of boring {boring_id}",
                    caption=f"Boring {_esc(boring_id)}",
                )
            )
            continue
        fig = None
        if shared is not None:
            try:
                own_checks = None
                if checks is not None and "boring_id" in checks:
                    own_checks = checks[checks["boring_id"].astype(str) == boring_id]
                fig = shared(
                    own_samples,
                    own_intervals,
                    boring_id=boring_id,
                    units=ctx.units,
                    checks=own_checks,
                )
            except Exception as exc:  # fall back to the report's own panel
                logger.warning("shared log figure failed for %s: %s", boring_id, exc)
                fig = None
        if fig is None:
            dtw = None
            if own_samples is not None and "depth_to_water" in own_samples and len(own_samples):
                dtw = float(np.nanmedian(own_samples["depth_to_water"].to_numpy(dtype=float)))
                dtw = float(ctx.length(dtw))
            if own_samples is not None and ctx.frame is not None:
                own_samples = ctx.frame.points(own_samples, ("depth",))
            if own_intervals is not None and ctx.frame is not None:
                own_intervals = ctx.frame.points(own_intervals, ("top", "bottom"))
            fig = fg.log_panel_figure(
                own_samples,
                own_intervals,
                boring_id=boring_id,
                facies_names=ctx.facies_names,
                depth_to_water=dtw,
                length_unit=ctx.length_unit,
            )
        uri = fg.figure_to_data_uri(fig, dpi=72 if shared is not None else 80)
        _close(fig)
        cells.append(
            _img(
                uri,
                name=f"log-{boring_id}",
                alt=f"Log of boring {boring_id}",
                caption=f"Boring {_esc(boring_id)}",
            )
        )
    legend = ", ".join(f"{_esc(name)}" for name in ctx.facies_names)
    if shared is None:
        parts.append(
            _note(
                "Each panel: log-derived log10 K per sample (grey; flagged samples as dots) "
                "and per composited interval (blue), bulk EC, and the hydrofacies column "
                f"(lowest K first: {legend}); the dashed line is the water table."
            )
        )
    else:
        parts.append(
            _note(
                f"Each figure: the hydrofacies strip (lowest K first: {legend}), log-derived K, "
                "net injection pressure, recorded pressure with its atmospheric and hydrostatic "
                "parts, injection flow and bulk EC, in the units the site file declares; flagged "
                "samples carry their own symbols, a failed sensor check is a red line across its "
                "sensor's track (top: check before the log, bottom: after), and a run of missing "
                "EC is shaded grey."
            )
        )
    kind = "log-grid" if shared is not None else "gallery"
    parts.append(f'<div class="{kind}">{"".join(cells)}</div>')
    return "".join(parts)


def _saved_log_figure(folder: Path | None, boring_id: str) -> bytes | None:
    """Return the PNG the logs stage already wrote for a boring, if it sits beside the report."""
    if folder is None:
        return None
    path = Path(folder) / f"{boring_id}.png"
    try:
        png = path.read_bytes()
    except OSError:
        return None
    return png if png[:8] == b"\x89PNG\r\n\x1a\n" else None


def _flag_summary(samples: pd.DataFrame | None) -> str:
    if samples is None or not len(samples):
        return ""
    flags = [c for c in _FLAG_COLUMNS if c in samples]
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
    from geo3d.logs.sensor_checks import in_declared_units

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


_FLAG_COLUMNS = (
    "above_water",
    "out_of_range_high",
    "out_of_range_low",
    "spike",
    "ionic",
    "sensor_check_failed",
)


def _physics_screen_k(ctx: _Context, residuals: pd.DataFrame) -> tuple[np.ndarray, float] | None:
    """Physics-only K averaged over each slug-test screen, and ``log10(gamma_w / F)``."""
    probe = _get(_get(_get(ctx.site, "config"), "probe"), "shape")
    samples = ctx.samples
    needed = {"boring_id", "top_depth", "bottom_depth"}
    if (
        (probe is None and _get(ctx.logs, "shape_factor") is None)
        or samples is None
        or "q_over_p" not in samples
    ):
        return None
    if not needed <= set(residuals):
        return None
    from geo3d.logs.calibration import physics_coefficients, screen_samples
    from geo3d.logs.hydraulic import shape_factor

    factor = _get(ctx.logs, "shape_factor")
    if factor is None:
        config = ctx.site.config.probe
        factor = shape_factor(
            config.shape, length=config.screen_length, diameter=config.screen_diameter
        )
    a_phys, _ = physics_coefficients(factor)
    if "k_physics" in residuals:
        # the calibration's own screen means, over exactly the samples the fit used
        return residuals["k_physics"].to_numpy(dtype=float), a_phys
    usable = np.ones(len(samples), dtype=bool)
    for flag in _FLAG_COLUMNS:
        if flag in samples:
            usable &= ~samples[flag].fillna(False).to_numpy(dtype=bool)
    tests = residuals[["boring_id", "top_depth", "bottom_depth"]].assign(k=np.nan)
    groups = screen_samples(
        samples.assign(boring_id=samples["boring_id"].astype(str)),
        tests.assign(boring_id=tests["boring_id"].astype(str)),
        usable=usable,
    )
    k = np.array([np.mean(10.0 ** (a_phys + x)) if x.size else np.nan for x in groups])
    return k, a_phys


def _section_calibration(ctx: _Context) -> str:
    calibration = _get(ctx.logs, "calibration")
    if calibration is not None and not isinstance(calibration, Mapping):
        as_dict = getattr(calibration, "as_dict", None)
        calibration = as_dict() if callable(as_dict) else dict(vars(calibration))
    calibration = calibration or {}
    method = calibration.get("method")
    n_tests = calibration.get("n_tests") or 0
    residuals = _frame(calibration.get("residuals"))
    parts = []
    if method != "slug_tests":
        text = "Physics-only K, no calibration: log-derived K comes from the Hvorslev shape factor"
        text += (
            f" alone ({n_tests} slug test(s), fewer than a calibration needs)."
            if n_tests
            else " alone (no slug tests were given)."
        )
        parts.append(_note(text))
    keys = ("method", "a", "b", "se_a", "se_b", "n_tests", "r2")
    summary = {k: calibration[k] for k in keys if k in calibration}
    if summary:
        parts.append(_mapping_table(summary, caption="Calibration log10 K = a + b log10(Q/P_net)"))
    if residuals is not None and len(residuals) and "k_slug" in residuals:
        fitted = method == "slug_tests"
        physics = None
        try:
            physics = _physics_screen_k(ctx, residuals)
        except Exception as exc:  # no physics-only axis: plot the calibrated prediction
            logger.warning("physics-only K over the slug-test screens not computed: %s", exc)
        if physics is not None:
            x, offset = physics
            xlabel = "log10 K from physics alone, mean over the screen (m/s)"
            caption = (
                "Slug-test K against physics-only log-derived K (Hvorslev shape factor) "
                "averaged over each test screen; dotted: 1:1"
                + ("; red: the fitted calibration." if fitted else " (no calibration fitted).")
            )
        elif "k_predicted" in residuals:
            x, offset = residuals["k_predicted"].to_numpy(dtype=float), None
            xlabel = "log10 K from the logs, calibrated, mean over the screen (m/s)"
            caption = (
                "Slug-test K against calibrated log-derived K averaged over each test screen; "
                "dotted: 1:1."
            )
        else:
            x = None
        if x is not None:
            fig = fg.calibration_figure(
                x,
                residuals["k_slug"].to_numpy(dtype=float),
                a=calibration.get("a") if fitted and offset is not None else None,
                b=calibration.get("b") if fitted and offset is not None else None,
                x_offset=offset or 0.0,
                labels=residuals["boring_id"] if "boring_id" in residuals else None,
                xlabel=xlabel,
            )
            parts.append(_figure(fig, name="calibration", alt="Calibration plot", caption=caption))
        caption = f"Slug tests and residuals (K in m/s, depths in {ctx.length_unit})"
        parts.append(_table(ctx.table(residuals), caption=caption))
    elif method == "slug_tests":
        parts.append(_note("The calibration carries no per-test residuals to plot."))
    return "".join(parts)


def _model_curves(model: Any, max_v: float, max_h: float):
    """Model semivariance along the vertical and the horizontal major/minor axes."""
    lags_v = np.linspace(0.0, max_v, 120)
    lags_h = np.linspace(0.0, max_h, 120)
    azimuth = float(_get(model, "azimuth", 0.0) or 0.0)
    ex, ey = fg.azimuth_vector(azimuth)
    directions = {"major": (ex, ey, 0.0)}
    if float(_get(model, "minor_ratio", 1.0) or 1.0) != 1.0:
        directions["minor"] = (ey, -ex, 0.0)

    def along(vector, lags):
        coords = np.outer(lags, vector)
        scaled = np.asarray(model.scaled(coords))
        return np.asarray(model.variogram(np.linalg.norm(scaled - scaled[0], axis=1)))

    vertical = (lags_v, along((0.0, 0.0, 1.0), lags_v))
    horizontal = {name: (lags_h, along(v, lags_h)) for name, v in directions.items()}
    return vertical, horizontal


def _section_variograms(ctx: _Context) -> str:
    fits = _get(ctx.model, "variograms") or {}
    if not fits:
        return _note("No variograms are available (no 3D model was built).")
    parts, rows = [], []
    units = {"log10_k": "(log10 m/s)\u00b2", "ec": "(mS/m)\u00b2"}
    lag = ctx.length_unit
    for variable, fit in fits.items():
        vertical = _frame(_get(fit, "vertical"))
        horizontal = _frame(_get(fit, "horizontal"))
        model = _get(fit, "model")
        max_v = float(vertical["lag"].max()) if vertical is not None and len(vertical) else 5.0
        max_h = (
            float(horizontal["lag"].max()) if horizontal is not None and len(horizontal) else 50.0
        )
        v_curve = h_curves = None
        if model is not None:
            try:
                v_curve, h_curves = _model_curves(model, max_v * 1.05, max_h * 1.05)
            except Exception as exc:  # a model without scaled()/variogram(): points only
                logger.warning("variogram model curve for %s not drawn: %s", variable, exc)
            rows.append(
                {
                    "variable": variable,
                    "model": _get(model, "kind", _get(fit, "kind")),
                    "nugget": _get(model, "nugget"),
                    "partial sill": _get(model, "sill"),
                    f"horizontal range ({lag})": _length_or_none(ctx, _get(model, "range_h")),
                    f"vertical range ({lag})": _length_or_none(ctx, _get(model, "range_v")),
                    "azimuth (\u00b0)": _get(model, "azimuth"),
                    "minor/major": _get(model, "minor_ratio"),
                    "fit RMSE": _get(fit, "rmse"),
                }
            )
        fig = fg.variogram_figure(
            _lags_shown(ctx, vertical),
            _lags_shown(ctx, horizontal),
            vertical_model=_curve_shown(ctx, v_curve),
            horizontal_model=None
            if h_curves is None
            else {k: _curve_shown(ctx, c) for k, c in h_curves.items()},
            variable=variable,
            units=units.get(
                variable, "normal score\u00b2" if "normal_score" in variable else "units\u00b2"
            ),
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


def _length_or_none(ctx: _Context, value: Any) -> Any:
    try:
        return float(ctx.length(float(value)))
    except (TypeError, ValueError):
        return value


def _lags_shown(ctx: _Context, table: pd.DataFrame | None) -> pd.DataFrame | None:
    if table is None or "lag" not in table:
        return table
    return table.assign(lag=ctx.length(table["lag"].to_numpy(dtype=float)))


def _curve_shown(ctx: _Context, curve):
    if curve is None:
        return None
    lags, gamma = curve
    return ctx.length(np.asarray(lags, dtype=float)), gamma


def _section_crossval(ctx: _Context) -> str:
    results = _get(ctx.model, "crossval") or {}
    if not results:
        return _note("No cross-validation is available.")
    parts, rows = [], []
    units = {"log10_k": "log10 m/s", "ec": "mS/m"}
    for variable, cv in results.items():
        summary = _get(cv, "summary") or {}
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
        samples = _frame(_get(cv, "samples"))
        if samples is not None and len(samples) and {"observed", "estimate"} <= set(samples):
            fig = fg.crossval_figure(samples, variable=variable, units=units.get(variable, ""))
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
    return "".join(parts)


def _derived_maps(ctx: _Context) -> dict[str, xr.DataArray]:
    """Thickness and probability maps computed from the voxel model when none are given."""
    ds = ctx.dataset
    out: dict[str, xr.DataArray] = {}
    if ds is None or "facies_code" not in ds:
        return out
    dz = float(np.abs(np.diff(ds["z"].values[:2]))[0]) if ds.sizes["z"] > 1 else 1.0
    inside = ds["mask"].any("z") if "mask" in ds else xr.ones_like(ds["facies_code"].isel(z=0))
    for code, name in enumerate(ctx.facies_names):
        thickness = (ds["facies_code"] == code).sum("z") * dz
        out[f"thickness_{name}"] = thickness.where(inside)
        prob = f"prob_{name}"
        if prob in ds:
            out[f"mean_prob_{name}"] = ds[prob].mean("z", skipna=True).where(inside)
    return out


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
    derived = _derived_maps(ctx)
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
        if "prob" in key:
            units, cmap, vmin, vmax = "probability", "cividis", 0.0, 1.0
            caption = f"{_esc(label)}: probability from the conditional simulations" + (
                ", averaged over the column" if key.startswith("mean_prob_") else ""
            )
        else:
            units = next((u for k, _, u in _MAIN_MAPS if k == key), None)
            units = units or str(grid.attrs.get("units", "m"))
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
    surface = _get(ctx.logs, "water_table")
    intervals = ctx.intervals_shown
    for line in ctx.sections:
        section = fg.sample_section(ds, line, variables=("facies_code", "log10_k", "mask"))
        projected = None
        max_offset = max(2.0 * dx, 0.05 * line.length)
        if intervals is not None and len(intervals) and {"x", "y", "z_mid"} <= set(intervals):
            projected = fg.project_intervals(intervals, line, max_offset=max_offset)
        water = None
        if surface is not None:
            try:
                qx, qy = section["x"].values, section["y"].values
                if ctx.frame is not None:
                    qx, qy = ctx.frame.xy_internal(qx, qy)
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
        z = section["z"].values
        if ctx.frame is not None:  # the same unit along both axes for the exaggeration
            z = z * factor(ctx.frame.length_unit, "length")
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
    return "".join(parts)


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
    volumes = _frame(_get(ctx.results, "volumes"))
    if volumes is None or not len(volumes):
        return _note("No volumes were computed (no treatment zones were given).")
    volumes = ctx.table(volumes)
    text = _note(
        f"Volumes in {ctx.volume_unit} and areas in {ctx.area_unit} (as the quantity names say). "
        "The estimate "
        "comes from the kriged model; P10/P50/P90 are the 10th, 50th and 90th percentiles over "
        "the conditional simulations: 80% of the simulated outcomes fall between P10 and P90."
    )
    return text + _table(
        _long_volumes(volumes),
        caption="Volumes per treatment zone, depth band and hydrofacies",
        max_rows=300,
    )


def _section_injection(ctx: _Context) -> str:
    plans = _get(ctx.results, "injection") or {}
    if not plans:
        return _note("No injection plans (no treatment zones were given).")
    parts = []
    for zone, plan in plans.items():
        parts.append(f"<h3>{_esc(zone)}</h3>")
        summary = _get(plan, "summary") or {}
        if summary and ctx.frame is not None:
            summary = mapping_to_output_units(
                summary, length_unit=ctx.frame.length_unit, volume_unit=ctx.frame.volume_unit
            )
        if summary:
            parts.append(_mapping_table(summary, caption="Design summary"))
        schedule = _frame(_get(plan, "schedule"))
        if schedule is not None and len(schedule):
            parts.append(_schedule_table(schedule, ctx))
    return "".join(parts)


def _first(frame: pd.DataFrame, names: Iterable[str]) -> str | None:
    return next((n for n in names if n in frame.columns), None)


def _schedule_table(schedule: pd.DataFrame, ctx: _Context) -> str:
    top = _first(schedule, ("top_depth", "top"))
    bottom = _first(schedule, ("bottom_depth", "bottom"))
    volume = _first(schedule, ("volume_m3", "volume"))
    if not (top and bottom and volume):
        return _table(ctx.table(schedule), caption="Injection schedule")
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
    if ctx.frame is not None:
        for column in ("top", "bottom"):
            grouped[column] = ctx.frame.length(grouped[column].to_numpy(dtype=float))
        for column in ("per_point", "total"):
            grouped[column] = ctx.frame.volume(grouped[column].to_numpy(dtype=float))
    grouped.columns = [
        f"mean top depth ({ctx.length_unit})",
        f"mean bottom depth ({ctx.length_unit})",
        "points",
        f"mean volume per point ({ctx.volume_unit})",
        f"total volume ({ctx.volume_unit})",
    ]
    return _table(grouped, caption="Injection volume per depth interval (all points)")


def _section_methods(ctx: _Context) -> str:
    items = "".join(f"<dt>{name}</dt><dd>{text}</dd>" for name, text in _METHODS)
    refs = "".join(f'<li id="ref-{key}">{_esc(text)}</li>' for key, text in _REFERENCES)
    timings = _get(ctx.results, "timings") or {}
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
    name = _get(ctx.site, "name") or "Unnamed site"
    facts = {
        "Coordinate reference system": ctx.crs_label,
        "Report date": generated.strftime("%Y-%m-%d %H:%M UTC"),
        "geo3d version": geo3d.__version__,
        "Borings": 0 if ctx.borings is None else len(ctx.borings),
    }
    root = _get(ctx.site, "root")
    if root is not None:
        facts["Site folder"] = Path(root).name
    if ctx.dataset is not None and "mask" in ctx.dataset:
        facts["Model cells inside the site"] = f"{int(ctx.dataset['mask'].sum()):,}"
    timings = _get(ctx.results, "timings") or {}
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
    results: Any,
    *,
    generated: _dt.datetime | None = None,
    log_figure_dir: str | os.PathLike | None = None,
) -> str:
    """Build the report of a run as one self-contained HTML document.

    Parameters
    ----------
    results
        A :class:`geo3d.pipeline.RunResults` or any object with the same attributes
        (``site``, ``logs``, ``model``, ``maps``, ``volumes``, ``injection``, ``timings``);
        absent parts give notes instead of sections' figures.
    generated
        Time stamp of the report; now (UTC) when None.
    log_figure_dir
        Folder where the logs stage wrote ``<boring_id>.png`` log figures; those found there
        are embedded as they are instead of being drawn again.

    Returns
    -------
    str
        The HTML text.
    """
    generated = generated or _dt.datetime.now(_dt.UTC)
    ctx = _Context.from_results(results)
    ctx.log_figure_dir = None if log_figure_dir is None else Path(log_figure_dir)
    body = "\n".join(_render_section(ctx, anchor) for anchor in SECTION_TITLES)
    name = _get(ctx.site, "name") or "Unnamed site"
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


def write_report(results: Any, path: str | os.PathLike) -> Path:
    """Write the self-contained HTML report of a run.

    Parameters
    ----------
    results
        A :class:`geo3d.pipeline.RunResults` (or an object with the same attributes).
    path
        File to write (usually ``OUT/report.html``); written under a temporary name and
        moved into place only when complete. Log figures that the logs stage wrote in
        ``figures/logs/`` beside it are embedded rather than drawn again.

    Returns
    -------
    pathlib.Path
        The written file.
    """
    path = Path(path)
    text = build_report(results, log_figure_dir=path.parent / "figures" / "logs")
    with atomic_file(path) as tmp:
        tmp.write_text(text, encoding="utf-8")
    logger.info("wrote report %s (%.1f MB)", path, path.stat().st_size / 1e6)
    return path
