"""One figure per boring: the injection log, what it gives, and its flags.

Six tracks share the depth axis (down), results first and the records they come from after:
a hydrofacies strip from the composited intervals, log-derived K (log axis), net injection
pressure, recorded pressure with its atmospheric and hydrostatic parts, injection flow, and EC.
Values are shown in the units the site file declares.  Flagged samples are marked with distinct
symbols, so the marks read without colour; a failed sensor check is a bold line across its
sensor's track at the top (check before the log) or the bottom (after) with its values, and a
run of missing EC is shaded and labelled, never drawn as a low reading.  Categorical colours
are the Okabe-Ito colour-blind-safe palette.

References
----------
.. [1] Okabe, M., Ito, K. (2008) Color universal design: how to make figures and
   presentations that are friendly to colorblind people (the eight-colour palette).
"""

from __future__ import annotations

import io
import warnings

import matplotlib

matplotlib.use("Agg")

import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402
from matplotlib.figure import Figure  # noqa: E402
from matplotlib.patches import Patch  # noqa: E402

from geo3d.errors import Geo3dWarning  # noqa: E402
from geo3d.io.output_frame import LENGTH_LABELS  # noqa: E402
from geo3d.logs.sensor_checks import in_declared_units  # noqa: E402
from geo3d.units import from_internal  # noqa: E402

__all__ = ["OKABE_ITO", "LOG_FIGURE_DPI", "facies_colour", "log_figure", "log_figure_pngs"]

#: Okabe & Ito (2008) colour-blind-safe palette.
OKABE_ITO: dict[str, str] = {
    "black": "#000000",
    "orange": "#E69F00",
    "sky_blue": "#56B4E9",
    "bluish_green": "#009E73",
    "yellow": "#F0E442",
    "blue": "#0072B2",
    "vermillion": "#D55E00",
    "reddish_purple": "#CC79A7",
}

# lowest K first: vermillion for tight, yellow between, blue for permeable (three classes)
_FACIES_ORDER = ("vermillion", "yellow", "blue", "orange", "sky_blue", "bluish_green")

_FLAG_STYLE = {
    "above_water": ("_", OKABE_ITO["sky_blue"]),
    "out_of_range_high": ("^", OKABE_ITO["blue"]),
    "out_of_range_low": ("v", OKABE_ITO["vermillion"]),
    "spike": ("x", OKABE_ITO["black"]),
    "ec_above_trend": ("D", OKABE_ITO["reddish_purple"]),
    "sensor_check_failed": ("s", OKABE_ITO["orange"]),
}


_MAX_MARKS = 150

#: Resolution of the per-boring log figures (written as PNG and embedded in the report).
LOG_FIGURE_DPI = 110


def facies_colour(code: int) -> str:
    """Colour of a facies code (0 = lowest K); grey for unclassified (-1)."""
    if code < 0:
        return "#BBBBBB"
    return OKABE_ITO[_FACIES_ORDER[code % len(_FACIES_ORDER)]]


def _mark_flags(ax, depth, values, samples: pd.DataFrame, flags) -> list:
    handles = []
    for flag in flags:
        if flag not in samples or not samples[flag].any():
            continue
        marker, colour = _FLAG_STYLE[flag]
        sel = samples[flag].to_numpy(dtype=bool) & np.isfinite(values)
        index = np.flatnonzero(sel)
        if index.size > _MAX_MARKS:  # long flagged runs: every n-th mark reads the same
            sel = np.zeros_like(sel)
            sel[index[:: int(np.ceil(index.size / _MAX_MARKS))]] = True
        if sel.any():
            handles.append(
                ax.scatter(
                    values[sel], depth[sel], marker=marker, s=14, color=colour, label=flag, zorder=3
                )
            )
    return handles


def log_figure(
    samples_of_boring: pd.DataFrame,
    intervals_of_boring: pd.DataFrame,
    *,
    boring_id: str,
    units=None,
    checks: pd.DataFrame | None = None,
) -> Figure:
    """Plot one boring's hydrofacies, K, pressures, flow and EC against depth.

    Tracks, left to right: the hydrofacies strip and log-derived K (what the log gives), then
    net injection pressure, recorded pressure, injection flow and EC (what it was made from).

    Parameters
    ----------
    samples_of_boring
        Per-sample rows of one boring (``depth, pressure, p_atm, p_hydrostatic, p_net,
        flow, k_log, ec`` and flag columns), internal units.
    intervals_of_boring
        Composited intervals of the boring (``top, bottom, facies, facies_code``); may be empty.
    boring_id
        Shown in the title.
    units
        ``[units]`` of the site file: depth in ``output_length``, pressures in ``pressure``,
        flow in ``flow`` and EC in ``ec``; None keeps m, kPa, mL/min and mS/m.
    checks
        Evaluated sensor checks of the boring (:func:`geo3d.logs.sensor_checks.
        evaluate_sensor_checks`); each failed check is marked on its sensor's track at the
        top (pre-log check) or the bottom (post-log check) of the log.

    Returns
    -------
    matplotlib.figure.Figure
        Not shown; the caller saves and closes it.
    """
    shown = _units(units)
    s = samples_of_boring.sort_values("depth")
    depth = from_internal(s["depth"].to_numpy(dtype=float), shown["length"], "length")
    fig, axes = plt.subplots(
        1,
        6,
        sharey=True,
        figsize=(12.5, 8),
        gridspec_kw={"width_ratios": [0.8, 3, 3, 3, 3, 3]},
        constrained_layout=True,
    )
    ax_f, ax_k, ax_net, ax_p, ax_q, ax_ec = axes
    tracks = axes[1:]
    _facies_track(ax_f, intervals_of_boring, shown["length"])
    ax_f.set_ylabel(f"depth ({LENGTH_LABELS.get(shown['length'], shown['length'])})")

    handles = _k_track(ax_k, s, depth)
    _net_pressure_track(ax_net, s, depth, shown["pressure"])
    _pressure_track(ax_p, s, depth, shown["pressure"])
    _flow_track(ax_q, s, depth, shown["flow"])
    handles += _ec_track(ax_ec, s, depth, shown["ec"])
    if handles:
        ax_ec.legend(handles=handles, loc="lower right", fontsize=7)
    if checks is not None and len(checks) and depth.size:
        track_of = {"pressure": ax_p, "flow": ax_q, "ec": ax_ec}
        _mark_checks(track_of, checks, units, float(np.nanmin(depth)), float(np.nanmax(depth)))
    _water_line(s, tracks, ax_net, shown["length"])
    if depth.size:
        pad = float(from_internal(0.1, shown["length"], "length"))
        ax_f.set_ylim(float(np.nanmax(depth)) + pad, max(0.0, float(np.nanmin(depth)) - pad))
    for ax in tracks:
        ax.grid(True, color="#DDDDDD", lw=0.5)
    fig.suptitle(f"Boring {boring_id}")
    return fig


def _k_track(ax, s: pd.DataFrame, depth: np.ndarray) -> list:
    handles: list = []
    if "k_log" in s:
        k = s["k_log"].to_numpy(dtype=float)
        good = np.isfinite(k) & (k > 0)
        ax.plot(np.where(good, k, np.nan), depth, color=OKABE_ITO["blue"], lw=0.7)
        handles += _mark_flags(
            ax,
            depth,
            np.where(good, k, np.nan),
            s,
            ("out_of_range_high", "out_of_range_low", "sensor_check_failed"),
        )
        if good.any():
            ax.set_xscale("log")
    ax.set_xlabel("log-derived K (m/s)")
    return handles


def _net_pressure_track(ax, s: pd.DataFrame, depth: np.ndarray, unit: str) -> None:
    if "p_net" in s:
        p_net = from_internal(s["p_net"].to_numpy(dtype=float), unit, "pressure")
        ax.plot(p_net, depth, color=OKABE_ITO["bluish_green"], lw=0.7)
        _mark_flags(ax, depth, p_net, s, ("out_of_range_high", "out_of_range_low"))
        ax.axvline(0.0, color="#888888", lw=0.5)
    ax.set_xlabel(f"net injection pressure ({unit})")


def _flow_track(ax, s: pd.DataFrame, depth: np.ndarray, unit: str) -> None:
    if "flow" in s:
        flow = from_internal(s["flow"].to_numpy(dtype=float), unit, "flow")
        ax.plot(flow, depth, color=OKABE_ITO["reddish_purple"], lw=0.7)
        _mark_flags(ax, depth, flow, s, ("out_of_range_low",))
    ax.set_xlabel(f"injection flow ({unit})")


def _ec_track(ax, s: pd.DataFrame, depth: np.ndarray, unit: str) -> list:
    handles: list = []
    if "ec" in s:
        ec = from_internal(s["ec"].to_numpy(dtype=float), unit, "ec")
        ax.plot(ec, depth, color=OKABE_ITO["orange"], lw=0.7)
        handles = _mark_flags(ax, depth, ec, s, ("spike", "ec_above_trend"))
        _shade_gaps(ax, depth, ec)
    ax.set_xlabel(f"EC ({unit})")
    return handles


def _units(units) -> dict[str, str]:
    return {
        "length": str(getattr(units, "output_length", "m")),
        "pressure": str(getattr(units, "pressure", "kPa")),
        "flow": str(getattr(units, "flow", "mL/min")),
        "ec": str(getattr(units, "ec", "mS/m")),
    }


def _facies_track(ax, intervals: pd.DataFrame, length_unit: str) -> None:
    legend: dict[int, Patch] = {}
    for row in intervals.itertuples(index=False):
        code = int(getattr(row, "facies_code", -1))
        colour = facies_colour(code)
        top, bottom = from_internal(np.array([row.top, row.bottom], float), length_unit, "length")
        ax.axhspan(top, bottom, color=colour, lw=0)
        name = str(getattr(row, "facies", "")) or "unclassified"
        legend.setdefault(code, Patch(color=colour, label=name))
    ax.set_xticks([])
    ax.set_xlabel("facies")
    if legend:
        ax.legend(
            handles=[legend[c] for c in sorted(legend)],
            loc="upper center",
            bbox_to_anchor=(0.5, -0.06),
            fontsize=7,
            frameon=False,
        )


def _pressure_track(ax, s: pd.DataFrame, depth: np.ndarray, unit: str) -> None:
    def shown(column: str) -> np.ndarray:
        return from_internal(s[column].to_numpy(dtype=float), unit, "pressure")

    if "pressure" in s:
        ax.plot(shown("pressure"), depth, color=OKABE_ITO["black"], lw=0.7, label="recorded")
    if {"p_atm", "p_hydrostatic"} <= set(s.columns):
        ax.plot(
            shown("p_atm") + shown("p_hydrostatic"),
            depth,
            color=OKABE_ITO["sky_blue"],
            lw=1.2,
            ls="--",
            label="atmospheric + hydrostatic",
        )
    ax.set_xlabel(f"pressure ({unit})")
    ax.legend(loc="lower left", fontsize=7)


def _water_line(s: pd.DataFrame, tracks, label_ax, length_unit: str) -> None:
    if "depth_to_water" not in s or not len(s):
        return
    dtw = float(from_internal(float(s["depth_to_water"].iloc[0]), length_unit, "length"))
    if not np.isfinite(dtw):
        return
    for ax in tracks:
        ax.axhline(dtw, color=OKABE_ITO["blue"], lw=0.8, ls=":")
    label_ax.annotate(
        "water table",
        (1.0, dtw),
        xycoords=("axes fraction", "data"),
        ha="right",
        va="bottom",
        fontsize=7,
        color=OKABE_ITO["blue"],
    )


def _shade_gaps(ax, depth: np.ndarray, ec: np.ndarray) -> None:
    """Shade runs of missing EC (a logger gap), so that a gap never reads as a low value."""
    missing = ~np.isfinite(ec)
    if not missing.any() or missing.all():
        return
    edges = np.flatnonzero(np.diff(np.r_[0, missing.astype(int), 0]))
    for first, stop in zip(edges[::2], edges[1::2], strict=True):
        ax.axhspan(depth[first], depth[stop - 1], color="#CCCCCC", lw=0, zorder=0)
        ax.annotate(
            "no EC",
            (0.02, (depth[first] + depth[stop - 1]) / 2),
            xycoords=("axes fraction", "data"),
            fontsize=7,
            va="center",
            color="#555555",
        )


def _mark_checks(track_of, checks: pd.DataFrame, units, top: float, bottom: float) -> None:
    """Mark each failed sensor check on its sensor's track, with its values in declared units."""
    status = checks["passed"].fillna(False).astype(bool) if "passed" in checks else None
    if status is None:
        return
    for row in in_declared_units(checks[~status], units).itertuples(index=False):
        ax = track_of.get(str(row.sensor))
        if ax is None:
            continue
        at = top if str(row.stage) == "pre" else bottom
        ax.axhline(at, color=OKABE_ITO["vermillion"], lw=2.0)
        ax.annotate(
            f"{row.stage}-log {row.sensor} check failed:\n{row.measured:.4g} {row.unit} "
            f"(expected {row.expected:.4g} \u00b1 {row.tolerance:.4g})",
            (0.98, at),
            xycoords=("axes fraction", "data"),
            ha="right",
            va="bottom" if str(row.stage) != "pre" else "top",
            fontsize=7,
            color=OKABE_ITO["vermillion"],
            bbox={"facecolor": "white", "edgecolor": "none", "alpha": 0.8},
        )


def log_figure_pngs(
    samples: pd.DataFrame,
    intervals: pd.DataFrame,
    *,
    units=None,
    checks: pd.DataFrame | None = None,
) -> dict[str, bytes]:
    """Draw :func:`log_figure` for every boring, as PNG bytes.

    Parameters
    ----------
    samples
        Per-sample table of the logs stage (every boring).
    intervals
        Composited intervals of the logs stage.
    units
        ``[units]`` of the site file: the figures show the declared units.
    checks
        Evaluated sensor checks of the site; each boring's failed checks are marked.

    Returns
    -------
    dict of str to bytes
        Boring id -> PNG at :data:`LOG_FIGURE_DPI`, in boring order.
    """
    pngs: dict[str, bytes] = {}
    intervals_by = dict(tuple(intervals.groupby("boring_id", sort=True)))
    empty = intervals.iloc[0:0]
    for boring_id, log in samples.groupby("boring_id", sort=True):
        own = None
        if checks is not None and len(checks) and "boring_id" in checks:
            own = checks[checks["boring_id"].astype(str) == str(boring_id)]
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", Geo3dWarning)
            fig = log_figure(
                log,
                intervals_by.get(boring_id, empty),
                boring_id=str(boring_id),
                units=units,
                checks=own,
            )
        buffer = io.BytesIO()
        fig.savefig(buffer, format="png", dpi=LOG_FIGURE_DPI)
        plt.close(fig)
        pngs[str(boring_id)] = buffer.getvalue()
    return pngs
