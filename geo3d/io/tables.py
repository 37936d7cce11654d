"""CSV and JSON tables for people and spreadsheets, in the user's output units.

Internal lengths are m and volumes m3; a table written for people uses the output units of the
site file (``[units] output_length`` and ``output_volume``), converted with :mod:`geo3d.units`,
and every column holding a length or a volume says its unit in its name (``top_ft``,
``volume_gal``).  Columns named ``<something>_m3`` are volumes; the lengths are the columns
listed in :data:`LENGTH_COLUMNS` (coordinates, depths, elevations, thicknesses, radii);
names with a unit token (``_m3``, ``_m2``, a final ``_m``) are converted by that token.
Quantities kept in SI (K, EC, pressures, flow) get their unit appended (:data:`SI_COLUMNS`).
"""

from __future__ import annotations

import json
import logging
import math
import re
from collections.abc import Mapping
from os import PathLike
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from geo3d.geostats.crossval import CrossValidation
from geo3d.io.output_frame import OutputFrame
from geo3d.units import from_internal

__all__ = [
    "LENGTH_COLUMNS",
    "SI_COLUMNS",
    "unit_label",
    "output_name",
    "to_output_units",
    "mapping_to_output_units",
    "write_csv",
    "write_json",
    "write_tables",
]

logger = logging.getLogger(__name__)

#: Columns that hold a length in m (coordinates, depths, elevations, thicknesses, distances).
LENGTH_COLUMNS: frozenset[str] = frozenset(
    {
        "x",
        "y",
        "z",
        "depth",
        "top",
        "bottom",
        "z_mid",
        "elev",
        "ground_elev",
        "depth_to_water",
        "wt_elev",
        "top_depth",
        "bottom_depth",
        "top_elev",
        "bottom_elev",
        "thickness",
        "total_depth",
        "transmissive_thickness",
        "storage_thickness",
        "target_thickness",
        "radius_of_influence",
        "spacing",
        "point_spacing",
        "head",
    }
)

#: Columns kept in internal units, renamed to carry their unit.
SI_COLUMNS: dict[str, str] = {
    "k": "m_s",
    "k_log": "m_s",
    "transmissivity": "m2_s",
    "ec": "mS_m",
    "ec_var": "mS2_m2",
    "pressure": "kPa",
    "p_atm": "kPa",
    "p_hydrostatic": "kPa",
    "p_net": "kPa",
    "p_static": "kPa",
    "flow": "m3_s",
    "q_over_p": "m3_s_kPa",
}

_LABELS = {"us_survey_ft": "usft", "m**3": "m3", "ft**3": "ft3", "gal/min": "gpm"}
_VOLUME_TOKEN = re.compile(r"(?<![A-Za-z0-9])m3(?=_|$)")
_AREA_TOKEN = re.compile(r"(?<![A-Za-z0-9])m2(?=_|$)")
_LENGTH_SUFFIX = re.compile(r"_m$")


def unit_label(unit: str) -> str:
    """Return a unit as a column-name suffix.

    Examples
    --------
    >>> unit_label("ft"), unit_label("m3"), unit_label("us_survey_ft")
    ('ft', 'm3', 'usft')
    """
    text = _LABELS.get(unit.strip(), unit.strip())
    return "".join(ch if ch.isalnum() else "_" for ch in text)


def _quantity_of(name: str, lengths: frozenset[str] | set[str]) -> str | None:
    if name in lengths:
        return "length"
    if _VOLUME_TOKEN.search(name):
        return "volume"
    if _AREA_TOKEN.search(name):
        return "area"
    if _LENGTH_SUFFIX.search(name):
        return "length"
    return None


def output_name(
    name: str,
    *,
    length_unit: str = "m",
    volume_unit: str = "m3",
    lengths: frozenset[str] | set[str] = LENGTH_COLUMNS,
) -> tuple[str, str | None, str | None]:
    """Name a quantity in output units and say how to convert it.

    Parameters
    ----------
    name
        Column or key name in internal units: a length column (``top``) or a name carrying
        its SI unit as a token (``volume_m3``, ``bulk_volume_m3_p10``, ``area_m2``,
        ``spacing_m``).
    length_unit, volume_unit
        Output units.
    lengths
        Names of the length columns that carry no unit token.

    Returns
    -------
    (new_name, quantity, unit)
        ``quantity`` is ``"length"``, ``"volume"``, ``"area"`` or None (left as it is, but
        renamed with its SI unit when listed in :data:`SI_COLUMNS`); ``unit`` is the pint
        unit to convert to.

    Examples
    --------
    >>> output_name("bulk_volume_m3_p10", volume_unit="gal")
    ('bulk_volume_gal_p10', 'volume', 'gal')
    >>> output_name("area_m2", length_unit="ft")
    ('area_ft2', 'area', 'ft**2')
    >>> output_name("top", length_unit="ft")
    ('top_ft', 'length', 'ft')
    """
    length_label = unit_label(length_unit)
    quantity = _quantity_of(name, lengths)
    if quantity == "length":
        if name in lengths:
            return f"{name}_{length_label}", "length", length_unit
        return _LENGTH_SUFFIX.sub(f"_{length_label}", name), "length", length_unit
    if quantity == "volume":
        return _VOLUME_TOKEN.sub(unit_label(volume_unit), name), "volume", volume_unit
    if quantity == "area":
        unit = f"{_canonical_length(length_unit)}**2"
        return _AREA_TOKEN.sub(f"{length_label}2", name), "area", unit
    if name in SI_COLUMNS:
        return f"{name}_{SI_COLUMNS[name]}", None, None
    return name, None, None


def _canonical_length(unit: str) -> str:
    return "survey_foot" if unit.strip().lower() in ("us_survey_ft", "ftus") else unit


def to_output_units(
    df: pd.DataFrame,
    *,
    length_unit: str = "m",
    volume_unit: str = "m3",
    lengths: frozenset[str] | set[str] = LENGTH_COLUMNS,
    frame: OutputFrame | None = None,
) -> pd.DataFrame:
    """Convert length, area and volume columns from internal units; put units in the names.

    Parameters
    ----------
    df
        Table in internal units (m, m2, m3).
    length_unit
        Output length unit (``m``, ``ft``, ``us_survey_ft``); areas follow it squared.
    volume_unit
        Output volume unit (``m3``, ``L``, ``gal``, ``ft3``).
    lengths
        Names of the length columns without a unit token.
    frame
        The output frame; when given, its units replace ``length_unit`` and ``volume_unit``
        and the coordinate columns ``x`` and ``y`` are converted to its CRS (named with the
        CRS's axis unit, e.g. ``x_usft``).

    Returns
    -------
    pandas.DataFrame
        A copy, renamed and converted as :func:`output_name` says.

    Examples
    --------
    >>> t = to_output_units(pd.DataFrame({"top": [3.048], "volume_m3": [1.0]}),
    ...                     length_unit="ft", volume_unit="L")
    >>> list(t.columns), round(float(t["top_ft"][0]), 6), round(float(t["volume_L"][0]), 6)
    (['top_ft', 'volume_L'], 10.0, 1000.0)
    """
    out = df.copy()
    renames: dict[str, str] = {}
    skip: set[str] = set()
    if frame is not None:
        length_unit, volume_unit = frame.length_unit, frame.volume_unit
        if {"x", "y"} <= set(map(str, df.columns)):
            out["x"], out["y"] = frame.xy(df["x"].to_numpy(float), df["y"].to_numpy(float))
            label = unit_label(frame.coordinate_unit)
            renames.update(x=f"x_{label}", y=f"y_{label}")
            skip = {"x", "y"}
    for column in df.columns:
        name = str(column)
        if name in skip:
            continue
        new, quantity, unit = output_name(
            name, length_unit=length_unit, volume_unit=volume_unit, lengths=lengths
        )
        numeric = pd.api.types.is_numeric_dtype(df[column])
        if quantity is not None and numeric and not pd.api.types.is_bool_dtype(df[column]):
            out[column] = from_internal(df[column].to_numpy(float), str(unit), quantity)
        elif quantity is not None:
            continue
        if new != name:
            renames[column] = new
    return out.rename(columns=renames)


def mapping_to_output_units(
    data: Mapping, *, length_unit: str = "m", volume_unit: str = "m3"
) -> dict:
    """Convert the numeric entries of a (nested) dict whose keys carry an SI unit token.

    Keys are treated as in :func:`output_name` (but only unit tokens count, not the bare
    length names); other entries are kept.

    Examples
    --------
    >>> mapping_to_output_units({"spacing_m": 0.3048, "n": 2}, length_unit="ft")
    {'spacing_ft': 1.0, 'n': 2}
    """
    out: dict = {}
    for key, value in data.items():
        if isinstance(value, Mapping):
            out[key] = mapping_to_output_units(
                value, length_unit=length_unit, volume_unit=volume_unit
            )
            continue
        new, quantity, unit = output_name(
            str(key), length_unit=length_unit, volume_unit=volume_unit, lengths=frozenset()
        )
        number = isinstance(value, int | float | np.number) and not isinstance(value, bool)
        if quantity is not None and number:
            out[new] = round(float(from_internal(float(value), str(unit), quantity)), 12)
        else:
            out[key] = value
    return out


def write_csv(
    df: pd.DataFrame,
    path: str | PathLike,
    *,
    length_unit: str = "m",
    volume_unit: str = "m3",
    float_format: str = "%.10g",
    frame: OutputFrame | None = None,
) -> Path:
    """Write a table as CSV in output units and CRS (see :func:`to_output_units`).

    Returns
    -------
    Path
        The file written.
    """
    path = Path(path)
    table = to_output_units(df, length_unit=length_unit, volume_unit=volume_unit, frame=frame)
    if "geometry" in table.columns:
        table = pd.DataFrame(table.drop(columns="geometry"))
    table.to_csv(path, index=False, float_format=float_format)
    logger.debug("wrote %s (%d rows)", path, len(table))
    return path


def _jsonable(value):
    if isinstance(value, Mapping):
        return {str(k): _jsonable(v) for k, v in value.items()}
    if isinstance(value, pd.DataFrame):
        return [_jsonable(r) for r in value.to_dict(orient="records")]
    if isinstance(value, list | tuple | np.ndarray | pd.Series):
        return [_jsonable(v) for v in list(value)]
    if isinstance(value, np.bool_ | bool):
        return bool(value)
    if isinstance(value, np.integer):
        return int(value)
    if isinstance(value, float | np.floating):
        return None if not math.isfinite(float(value)) else float(value)
    if isinstance(value, str | int) or value is None:
        return value
    if isinstance(value, pd.Timestamp):
        return value.isoformat()
    if value is pd.NA or value is pd.NaT:
        return None
    return str(value)


def write_json(data, path: str | PathLike) -> Path:
    """Write nested data (dicts, lists, DataFrames, NumPy scalars) as JSON.

    Non-finite floats become ``null`` so that any JSON reader accepts the file.

    Returns
    -------
    Path
        The file written.
    """
    path = Path(path)
    path.write_text(json.dumps(_jsonable(data), indent=2), encoding="utf-8")
    logger.debug("wrote %s", path)
    return path


def write_tables(
    out_dir: str | PathLike,
    *,
    length_unit: str = "m",
    volume_unit: str = "m3",
    intervals: pd.DataFrame | None = None,
    volumes: pd.DataFrame | None = None,
    injection_schedule: pd.DataFrame | None = None,
    injection_summary: Mapping | None = None,
    crossval: Mapping[str, CrossValidation] | None = None,
    water_levels: pd.DataFrame | None = None,
    calibration: Mapping | None = None,
    frame: OutputFrame | None = None,
) -> list[Path]:
    """Write the standard result tables of a run into a folder.

    Parameters
    ----------
    out_dir
        Folder (created when missing).
    length_unit, volume_unit, frame
        Output units; an output frame (CRS and units) replaces them.
    intervals
        ``intervals.csv``.
    volumes
        ``volumes.csv`` and ``volumes.json``.
    injection_schedule, injection_summary
        ``injection_plan.csv``; ``injection_plan.json`` holds the per-zone summaries and the
        schedule.
    crossval
        Variable name -> cross-validation result (``.samples``, ``.per_group``,
        ``.summary``): ``crossval.csv`` (all samples, with a ``variable`` column),
        ``crossval_borings.csv`` and ``crossval.json`` (summaries).
    water_levels
        ``water_levels.csv``.
    calibration
        ``calibration.json``.

    Returns
    -------
    list of Path
        The files written.
    """
    out_dir = Path(out_dir)
    out_dir.mkdir(parents=True, exist_ok=True)
    if frame is not None:
        length_unit, volume_unit = frame.length_unit, frame.volume_unit
    units: dict[str, Any] = {"length_unit": length_unit, "volume_unit": volume_unit, "frame": frame}
    written: list[Path] = []
    if intervals is not None:
        written.append(write_csv(intervals, out_dir / "intervals.csv", **units))
    if volumes is not None:
        written.append(write_csv(volumes, out_dir / "volumes.csv", **units))
        written.append(write_json(to_output_units(volumes, **units), out_dir / "volumes.json"))
    if injection_schedule is not None:
        written.append(write_csv(injection_schedule, out_dir / "injection_plan.csv", **units))
        schedule = to_output_units(injection_schedule, **units)
        if "geometry" in schedule.columns:
            schedule = pd.DataFrame(schedule.drop(columns="geometry"))
        summary = mapping_to_output_units(
            injection_summary or {}, length_unit=length_unit, volume_unit=volume_unit
        )
        payload = {"summary": summary, "schedule": schedule}
        written.append(write_json(payload, out_dir / "injection_plan.json"))
    if crossval:
        samples = [r.samples.assign(variable=v) for v, r in crossval.items()]
        per_group = [r.per_group.assign(variable=v) for v, r in crossval.items()]
        summaries = {v: r.summary for v, r in crossval.items()}
        if samples:
            table = pd.concat(samples, ignore_index=True)
            written.append(write_csv(table, out_dir / "crossval.csv", **units))
        if per_group:
            table = pd.concat(per_group, ignore_index=True)
            written.append(write_csv(table, out_dir / "crossval_borings.csv", **units))
        written.append(write_json(summaries, out_dir / "crossval.json"))
    if water_levels is not None:
        written.append(write_csv(water_levels, out_dir / "water_levels.csv", **units))
    if calibration is not None:
        written.append(write_json(calibration, out_dir / "calibration.json"))
    return written
