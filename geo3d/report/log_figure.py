"""One figure per boring: the injection log, what it gives, and its flags.

Five panels share the depth axis (down): recorded pressure with its atmospheric and
hydrostatic parts, net injection pressure, log-derived K (log axis), EC, and a hydrofacies
strip from the composited intervals.  Flagged samples are marked with distinct symbols, so the
marks read without colour.  Categorical colours are the Okabe-Ito colour-blind-safe palette.

References
----------
.. [1] Okabe, M., Ito, K. (2008) Color universal design: how to make figures and
   presentations that are friendly to colorblind people (the eight-colour palette).
"""

from __future__ import annotations

import io
import warnings
from typing import Any

import matplotlib

matplotlib.use("Agg")

import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402
from matplotlib.figure import Figure  # noqa: E402
from matplotlib.patches import Patch  # noqa: E402

from geo3d.errors import Geo3dWarning  # noqa: E402

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
    "ionic": ("D", OKABE_ITO["reddish_purple"]),
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


def _pressure_panel(ax_p: Any, axes: Any, s: pd.DataFrame, depth: np.ndarray) -> None:
    """Draw the recorded pressure and its atmospheric and hydrostatic parts; the water table."""
    ax_p.plot(s["pressure"], depth, color=OKABE_ITO["black"], lw=0.7, label="recorded")
    if {"p_atm", "p_hydrostatic"} <= set(s.columns):
        ax_p.plot(
            s["p_atm"] + s["p_hydrostatic"],
            depth,
            color=OKABE_ITO["sky_blue"],
            lw=1.2,
            ls="--",
            label="atmospheric + hydrostatic",
        )
    if "depth_to_water" in s and len(s):
        dtw = float(s["depth_to_water"].iloc[0])
        for ax in axes[:4]:
            ax.axhline(dtw, color=OKABE_ITO["blue"], lw=0.8, ls=":")
        ax_p.annotate(
            "water table",
            (1.0, dtw),
            xycoords=("axes fraction", "data"),
            ha="right",
            va="bottom",
            fontsize=7,
            color=OKABE_ITO["blue"],
        )
    ax_p.set_xlabel("pressure (kPa)")
    ax_p.set_ylabel("depth (m)")
    ax_p.legend(loc="lower left", fontsize=7)


def _facies_strip(ax_f: Any, intervals_of_boring: pd.DataFrame) -> None:
    """Draw the hydrofacies of the intervals as coloured bands, with a legend."""
    legend: dict[int, Patch] = {}
    for row in intervals_of_boring.itertuples(index=False):
        code = int(getattr(row, "facies_code", -1))
        colour = facies_colour(code)
        ax_f.axhspan(row.top, row.bottom, color=colour, lw=0)
        name = str(getattr(row, "facies", "")) or "unclassified"
        legend.setdefault(code, Patch(color=colour, label=name))
    ax_f.set_xticks([])
    ax_f.set_xlabel("facies")
    if legend:
        ax_f.legend(
            handles=[legend[c] for c in sorted(legend)],
            loc="upper left",
            bbox_to_anchor=(1.0, 1.0),
            fontsize=7,
            frameon=False,
        )


def log_figure(
    samples_of_boring: pd.DataFrame,
    intervals_of_boring: pd.DataFrame,
    *,
    boring_id: str,
) -> Figure:
    """Plot one boring's log, net pressure, K, EC and hydrofacies against depth.

    Parameters
    ----------
    samples_of_boring
        Per-sample rows of one boring (``depth, pressure, p_atm, p_hydrostatic, p_net,
        k_log, ec`` and flag columns).
    intervals_of_boring
        Composited intervals of the boring (``top, bottom, facies, facies_code``); may be empty.
    boring_id
        Shown in the title.

    Returns
    -------
    matplotlib.figure.Figure
        Not shown; the caller saves and closes it.
    """
    s = samples_of_boring.sort_values("depth")
    depth = s["depth"].to_numpy(dtype=float)
    fig, axes = plt.subplots(
        1,
        5,
        sharey=True,
        figsize=(11, 8),
        gridspec_kw={"width_ratios": [3, 3, 3, 3, 0.8]},
        constrained_layout=True,
    )
    ax_p, ax_net, ax_k, ax_ec, ax_f = axes

    _pressure_panel(ax_p, axes, s, depth)

    if "p_net" in s:
        p_net = s["p_net"].to_numpy(dtype=float)
        ax_net.plot(p_net, depth, color=OKABE_ITO["bluish_green"], lw=0.7)
        _mark_flags(ax_net, depth, p_net, s, ("out_of_range_high", "out_of_range_low"))
        ax_net.axvline(0.0, color="#888888", lw=0.5)
    ax_net.set_xlabel("net injection pressure (kPa)")

    handles = []
    if "k_log" in s:
        k = s["k_log"].to_numpy(dtype=float)
        good = np.isfinite(k) & (k > 0)
        ax_k.plot(np.where(good, k, np.nan), depth, color=OKABE_ITO["blue"], lw=0.7)
        handles += _mark_flags(
            ax_k,
            depth,
            np.where(good, k, np.nan),
            s,
            ("out_of_range_high", "out_of_range_low", "sensor_check_failed"),
        )
        if good.any():
            ax_k.set_xscale("log")
    ax_k.set_xlabel("log-derived K (m/s)")

    if "ec" in s:
        ec = s["ec"].to_numpy(dtype=float)
        ax_ec.plot(ec, depth, color=OKABE_ITO["orange"], lw=0.7)
        handles += _mark_flags(ax_ec, depth, ec, s, ("spike", "ionic"))
    ax_ec.set_xlabel("EC (mS/m)")
    if handles:
        ax_ec.legend(handles=handles, loc="lower right", fontsize=7)

    _facies_strip(ax_f, intervals_of_boring)

    if depth.size:
        ax_p.set_ylim(float(np.nanmax(depth)) + 0.1, max(0.0, float(np.nanmin(depth)) - 0.1))
    for ax in axes[:4]:
        ax.grid(True, color="#DDDDDD", lw=0.5)
    fig.suptitle(f"Boring {boring_id}")
    return fig


def log_figure_pngs(samples: pd.DataFrame, intervals: pd.DataFrame) -> dict[str, bytes]:
    """Draw :func:`log_figure` for every boring, as PNG bytes.

    Parameters
    ----------
    samples
        Per-sample table of the logs stage (every boring).
    intervals
        Composited intervals of the logs stage.

    Returns
    -------
    dict of str to bytes
        Boring id -> PNG at :data:`LOG_FIGURE_DPI`, in boring order.
    """
    pngs: dict[str, bytes] = {}
    intervals_by = dict(tuple(intervals.groupby("boring_id", sort=True)))
    empty = intervals.iloc[0:0]
    for boring_id, log in samples.groupby("boring_id", sort=True):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", Geo3dWarning)
            fig = log_figure(log, intervals_by.get(boring_id, empty), boring_id=str(boring_id))
        buffer = io.BytesIO()
        fig.savefig(buffer, format="png", dpi=LOG_FIGURE_DPI)
        plt.close(fig)
        pngs[str(boring_id)] = buffer.getvalue()
    return pngs
