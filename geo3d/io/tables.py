"""CSV and JSON tables for people and spreadsheets, in the user's output units.

Internal lengths are m and volumes m3; a table written for people uses the output units of the
site file (``[units] output_length`` and ``output_volume``), converted with :mod:`geo3d.units`,
and every column holding a length or a volume says its unit in its name (``top_ft``,
``volume_gal``).  Columns named ``<something>_m3`` are volumes; the lengths are the columns
listed in :data:`LENGTH_COLUMNS` (coordinates, depths, elevations, thicknesses, radii).
"""

from __future__ import annotations

import json
import logging
import math
from collections.abc import Mapping
from os import PathLike
from pathlib import Path

import numpy as np
import pandas as pd

from geo3d.units import from_internal

__all__ = [
    "LENGTH_COLUMNS",
    "unit_label",
    "to_output_units",
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
        "radius_of_influence",
        "spacing",
        "point_spacing",
        "head",
    }
)

_LABELS = {"us_survey_ft": "usft", "m**3": "m3", "ft**3": "ft3", "gal/min": "gpm"}


def unit_label(unit: str) -> str:
    """Return a unit as a column-name suffix.

    Examples
    --------
    >>> unit_label("ft"), unit_label("m3"), unit_label("us_survey_ft")
    ('ft', 'm3', 'usft')
    """
    text = _LABELS.get(unit.strip(), unit.strip())
    return "".join(ch if ch.isalnum() else "_" for ch in text)


def to_output_units(
    df: pd.DataFrame,
    *,
    length_unit: str = "m",
    volume_unit: str = "m3",
    lengths: frozenset[str] | set[str] = LENGTH_COLUMNS,
) -> pd.DataFrame:
    """Convert length and volume columns from internal units and put the unit in the names.

    Parameters
    ----------
    df
        Table in internal units (m, m3).
    length_unit
        Output length unit (``m``, ``ft``, ``us_survey_ft``).
    volume_unit
        Output volume unit (``m3``, ``L``, ``gal``, ``ft3``).
    lengths
        Names of the length columns.

    Returns
    -------
    pandas.DataFrame
        A copy: length column ``top`` becomes ``top_<unit>``; a volume column ``pore_m3``
        becomes ``pore_<unit>``; other columns are unchanged.

    Examples
    --------
    >>> t = to_output_units(pd.DataFrame({"top": [3.048], "volume_m3": [1.0]}),
    ...                     length_unit="ft", volume_unit="L")
    >>> list(t.columns), round(t["top_ft"][0], 6), round(t["volume_L"][0], 6)
    (['top_ft', 'volume_L'], 10.0, 1000.0)
    """
    out = df.copy()
    renames: dict[str, str] = {}
    length_suffix = unit_label(length_unit)
    volume_suffix = unit_label(volume_unit)
    for column in df.columns:
        name = str(column)
        if name in lengths and pd.api.types.is_numeric_dtype(df[column]):
            out[column] = from_internal(df[column].to_numpy(float), length_unit, "length")
            renames[column] = f"{name}_{length_suffix}"
        elif name.endswith("_m3") and pd.api.types.is_numeric_dtype(df[column]):
            out[column] = from_internal(df[column].to_numpy(float), volume_unit, "volume")
            renames[column] = f"{name[: -len('_m3')]}_{volume_suffix}"
    return out.rename(columns=renames)


def write_csv(
    df: pd.DataFrame,
    path: str | PathLike,
    *,
    length_unit: str = "m",
    volume_unit: str = "m3",
    float_format: str = "%.6g",
) -> Path:
    """Write a table as CSV in output units (see :func:`to_output_units`).

    Returns
    -------
    Path
        The file written.
    """
    path = Path(path)
    table = to_output_units(df, length_unit=length_unit, volume_unit=volume_unit)
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
    crossval: Mapping[str, object] | None = None,
    water_levels: pd.DataFrame | None = None,
    calibration: Mapping | None = None,
) -> list[Path]:
    """Write the standard result tables of a run into a folder.

    Parameters
    ----------
    out_dir
        Folder (created when missing).
    length_unit, volume_unit
        Output units.
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
    units = {"length_unit": length_unit, "volume_unit": volume_unit}
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
        payload = {"summary": injection_summary or {}, "schedule": schedule}
        written.append(write_json(payload, out_dir / "injection_plan.json"))
    if crossval:
        samples, per_group, summaries = [], [], {}
        for variable, result in crossval.items():
            if getattr(result, "samples", None) is not None:
                samples.append(result.samples.assign(variable=variable))
            if getattr(result, "per_group", None) is not None:
                per_group.append(result.per_group.assign(variable=variable))
            summaries[variable] = getattr(result, "summary", {})
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
