"""Reference (atmospheric) pressure of each log, and where it came from.

An absolute pressure record includes the atmospheric pressure, which must be subtracted before
the water level or the net injection pressure can be read from it.  A reading made with the
flow on is never atmospheric: in unsaturated soil the injection pressure adds several kPa, which
would put the water table decimetres too deep.  The reference pressure of a boring is therefore
taken, in order of preference, from:

1. ``collar_flow_off``: readings with the flow off at the collar, before the log (and after
   it, when the log ends back at the collar with the flow off); when readings exist before and
   after, the value is interpolated linearly in time;
2. ``site_file``: a barometric value given in ``site.toml`` for the boring, for the day the
   boring was logged, or for the whole site;
3. ``same_day_logs``: the flow-off collar readings of the other logs made on the same day;
4. ``standard_atmosphere``: the ISO 2533 standard atmosphere at the collar elevation, with a
   warning that states the water-level uncertainty it implies (1 kPa is 0.10 m of water).

A number given as ``[probe] atmospheric_pressure`` is used for every boring (``given``) and
gauge records need no reference (``gauge``, 0 kPa).

References
----------
.. [1] ISO 2533:1975 Standard Atmosphere. International Organization for Standardization
   (troposphere: T = 288.15 K - 0.0065 K/m * H, p0 = 101.325 kPa, g/(R L) = 5.255877).
.. [2] Thompson, A., Taylor, B.N. (2008) NIST Special Publication 811 (g = 9.80665 m/s2).
"""

from __future__ import annotations

import logging
import warnings
from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np
import pandas as pd

from geo3d.errors import Geo3dWarning
from geo3d.logs.hydraulic import GAMMA_W

__all__ = [
    "REFERENCE_SOURCES",
    "CollarReadings",
    "flow_off_collar_readings",
    "standard_atmosphere_pressure",
    "reference_pressures",
]

logger = logging.getLogger(__name__)

#: Where a boring's reference pressure came from, best first.
REFERENCE_SOURCES = (
    "gauge",
    "given",
    "collar_flow_off",
    "site_file",
    "same_day_logs",
    "standard_atmosphere",
)

# ISO 2533:1975, troposphere
_P0 = 101.325  # kPa, sea-level pressure
_T0 = 288.15  # K, sea-level temperature
_LAPSE = 0.0065  # K/m, temperature gradient
_EXPONENT = 5.255877  # g0 / (R_air * L) = 9.80665 / (287.05287 * 0.0065)

#: Typical departure of the barometric pressure from the standard atmosphere with the weather,
#: kPa (about +-3 kPa at mid latitudes; common practice, from memory).
WEATHER_SPREAD_KPA = 3.0


def standard_atmosphere_pressure(elevation):
    """Pressure of the ISO 2533 standard atmosphere at an elevation, kPa.

    ``p = 101.325 * (1 - 0.0065 * H / 288.15) ** 5.255877`` (troposphere, H in m; at the
    elevations of land sites the geometric and geopotential heights differ by less than 0.1 %).

    References
    ----------
    .. [1] ISO 2533:1975 Standard Atmosphere.

    Examples
    --------
    >>> round(standard_atmosphere_pressure(0.0), 3)
    101.325
    >>> round(standard_atmosphere_pressure(1000.0), 2)
    89.87
    """
    h = np.asarray(elevation, dtype=float)
    p = _P0 * (1.0 - _LAPSE * h / _T0) ** _EXPONENT
    return float(p) if p.ndim == 0 else p


@dataclass(frozen=True)
class CollarReadings:
    """Flow-off readings at the collar of one log.

    Attributes
    ----------
    before, after
        Median pressure of the flow-off collar readings before and after the log, kPa (NaN when
        there are none).
    time_before, time_after
        Mean time of those readings, s on the log's clock (NaN when the log has no time).
    """

    before: float = float("nan")
    after: float = float("nan")
    time_before: float = float("nan")
    time_after: float = float("nan")

    @property
    def found(self) -> bool:
        """Whether any flow-off collar reading exists."""
        return bool(np.isfinite(self.before) or np.isfinite(self.after))

    def at(self, time=None):
        """Return the reference pressure at ``time`` (s), interpolated between before and after.

        With readings on one side only, or no time, the value on the side that exists (the
        mean of both when there is no time to interpolate with).
        """
        both = np.isfinite(self.before) and np.isfinite(self.after)
        timed = np.isfinite(self.time_before) and np.isfinite(self.time_after)
        if both and timed and self.time_after > self.time_before and time is not None:
            t = np.asarray(time, dtype=float)
            w = np.clip((t - self.time_before) / (self.time_after - self.time_before), 0.0, 1.0)
            value = self.before + w * (self.after - self.before)
            return float(value) if np.ndim(value) == 0 else value
        value = float(np.nanmean([self.before, self.after])) if self.found else float("nan")
        if time is None or np.ndim(time) == 0:
            return value
        return np.full(np.shape(time), value)


def flow_off_collar_readings(
    depth,
    pressure,
    flow,
    time=None,
    *,
    flow_off: float,
    window: float = 0.05,
    plausible: tuple[float, float] = (60.0, 110.0),
) -> CollarReadings:
    """Find the readings of one log made at the collar with the flow off.

    A reading is at the collar when its depth is within ``window`` of the shallowest depth of
    the log, and flow-off when its flow is at most ``flow_off``.  The readings at the start of
    the log are "before"; readings after the first flow-on reading (the log came back to the
    collar) are "after".  Medians outside the ``plausible`` range of atmospheric pressure (sea
    level to about 4000 m) are discarded.

    Parameters
    ----------
    depth, pressure, flow
        One log, in record order (m, kPa, m3/s).
    time
        Time of each reading, s; optional (needed to interpolate between before and after).
    flow_off
        Largest flow taken as "off", m3/s.
    window
        Depth span below the shallowest reading that counts as the collar, m.
    plausible
        Range of atmospheric pressure, kPa.

    Returns
    -------
    CollarReadings
    """
    d = np.asarray(depth, dtype=float)
    p = np.asarray(pressure, dtype=float)
    q = np.asarray(flow, dtype=float)
    t = np.full(d.size, np.nan) if time is None else np.asarray(time, dtype=float)
    ok = np.isfinite(d) & np.isfinite(p)
    if not ok.any():
        return CollarReadings()
    on = np.isfinite(q) & (q > flow_off)
    collar = ok & (d <= np.nanmin(d[ok]) + window) & ~on
    first_on = int(np.argmax(on)) if on.any() else d.size
    deepest = int(np.nanargmax(np.where(ok, d, -np.inf)))
    index = np.arange(d.size)

    def side(mask: np.ndarray) -> tuple[float, float]:
        if not mask.any():
            return float("nan"), float("nan")
        value = float(np.median(p[mask]))
        if not plausible[0] <= value <= plausible[1]:
            return float("nan"), float("nan")
        times = t[mask]
        return value, float(np.mean(times)) if np.isfinite(times).all() else float("nan")

    before, t_before = side(collar & (index < first_on))
    after, t_after = side(collar & (index > max(deepest, first_on)))
    return CollarReadings(before, after, t_before, t_after)


def _site_file_value(
    boring_id: str, date: str | None, barometric: float | Mapping[str, float] | None
) -> float:
    if barometric is None or isinstance(barometric, str):
        return float("nan")
    if isinstance(barometric, Mapping):
        for key in (boring_id, date):
            if key is not None and key in barometric:
                return float(barometric[key])
        return float("nan")
    return float(barometric)


def _warn_standard_atmosphere(table: pd.DataFrame) -> None:
    """Warn once, naming the borings whose reference is the standard atmosphere."""
    fallback = table["p_atm_source"].eq("standard_atmosphere")
    if not fallback.any():
        return
    names = ", ".join(table.loc[fallback, "boring_id"])
    per_kpa = 1.0 / GAMMA_W
    warnings.warn(
        f"boring(s) {names}: no flow-off reading at the collar and no barometric value in "
        "site.toml ([probe] barometric_pressure), so the reference pressure is the ISO 2533 "
        "standard atmosphere at the collar elevation. Each kPa the real barometric pressure "
        f"differs from it moves the water level by {per_kpa:.2f} m; the weather moves it by "
        f"up to about +-{WEATHER_SPREAD_KPA:g} kPa, so these water levels are uncertain by "
        f"up to about +-{WEATHER_SPREAD_KPA * per_kpa:.1f} m",
        Geo3dWarning,
        stacklevel=3,
    )


def reference_pressures(
    borings: pd.DataFrame,
    collar: Mapping[str, CollarReadings],
    *,
    gauge: bool = False,
    given: float | None = None,
    barometric: float | Mapping[str, float] | None = None,
) -> pd.DataFrame:
    """Choose the reference pressure of every boring and its source, in order of preference.

    Parameters
    ----------
    borings
        ``boring_id, ground_elev [, date]``.
    collar
        Flow-off collar readings of each boring's log (see :func:`flow_off_collar_readings`).
    gauge
        The logger records gauge pressure: the reference is 0 kPa for every boring.
    given
        One atmospheric pressure for every boring, kPa (``[probe] atmospheric_pressure``).
    barometric
        Barometric pressure from ``site.toml``, kPa: one site-wide value, or a mapping of boring
        ids and/or days (``YYYY-MM-DD``, matched to the borings' ``date``) to values.

    Returns
    -------
    DataFrame
        ``boring_id, p_atm, p_atm_source`` with the source one of :data:`REFERENCE_SOURCES`.
        A boring that falls back to the standard atmosphere raises one :class:`Geo3dWarning`
        naming every such boring and the water-level uncertainty.

    References
    ----------
    .. [1] ISO 2533:1975 (standard atmosphere); NIST SP 811 (gamma_w = 9.80665 kPa/m).
    """
    ids = [str(b) for b in borings["boring_id"]]
    if gauge:
        return pd.DataFrame({"boring_id": ids, "p_atm": 0.0, "p_atm_source": "gauge"})
    if given is not None:
        return pd.DataFrame({"boring_id": ids, "p_atm": float(given), "p_atm_source": "given"})
    dates: list[str | None] = [None] * len(ids)
    if "date" in borings and borings["date"].notna().all():
        days = pd.to_datetime(borings["date"], errors="coerce")
        if days.notna().all():
            dates = list(days.dt.strftime("%Y-%m-%d"))
    elevation = borings["ground_elev"].to_numpy(dtype=float)
    by_day: dict[str, list[float]] = {}
    for boring_id, day in zip(ids, dates, strict=True):
        readings = collar.get(boring_id)
        if day is not None and readings is not None and readings.found:
            by_day.setdefault(day, []).append(float(readings.at()))
    values, sources = [], []
    for boring_id, day, elev in zip(ids, dates, elevation, strict=True):
        readings = collar.get(boring_id)
        site_value = _site_file_value(boring_id, day, barometric)
        if readings is not None and readings.found:
            values.append(float(readings.at()))
            sources.append("collar_flow_off")
        elif np.isfinite(site_value):
            values.append(site_value)
            sources.append("site_file")
        elif day is not None and by_day.get(day):
            values.append(float(np.median(by_day[day])))
            sources.append("same_day_logs")
        else:
            values.append(standard_atmosphere_pressure(elev))
            sources.append("standard_atmosphere")
    table = pd.DataFrame({"boring_id": ids, "p_atm": values, "p_atm_source": sources})
    _warn_standard_atmosphere(table)
    logger.info(
        "reference pressure sources: %s",
        ", ".join(f"{k} {v}" for k, v in table["p_atm_source"].value_counts().items()),
    )
    return table
