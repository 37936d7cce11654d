"""Readers for the site's tables: borings, dissipation tests, slug tests, sensor checks.

Each reader checks the columns, parses every cell, converts the declared units to internal
units (m, kPa, m3/s, mS/m, m/s) and refuses bad input with a :class:`TableFormatError` whose
message names the file, the line, the column and what was expected. Line numbers count the
header line: the first data row of a CSV is line 2.
"""

from __future__ import annotations

import difflib
import logging
from collections.abc import Callable, Sequence
from os import PathLike
from pathlib import Path

import numpy as np
import pandas as pd
import pyproj

from geo3d.errors import TableFormatError, where
from geo3d.units import to_internal

__all__ = [
    "read_table",
    "numeric_column",
    "read_borings",
    "read_dissipation",
    "read_slug_tests",
    "read_sensor_checks",
    "SENSORS",
    "STAGES",
]

logger = logging.getLogger(__name__)

#: Sensors a sensor check may name, with the quantity of their unit.
SENSORS = {"pressure": "pressure", "flow": "flow", "ec": "ec"}
#: Stages of a sensor check.
STAGES = ("pre", "post")

_MAX_LISTED = 5


def _lines(rows: Sequence[int] | np.ndarray, first_line: int) -> str:
    """Describe data rows (0-based positions) as file lines."""
    shown = [str(int(r) + first_line) for r in rows[:_MAX_LISTED]]
    more = f" and {len(rows) - _MAX_LISTED} more" if len(rows) > _MAX_LISTED else ""
    label = "line" if len(rows) == 1 else "lines"
    return f"{label} {', '.join(shown)}{more}"


def _place(
    path: str | PathLike, rows: Sequence[int] | np.ndarray, first_line: int, column: str
) -> str:
    """Name the file, the lines of the bad rows and the column."""
    return f"{path}, {_lines(rows, first_line)}, column '{column}'"


def _read_csv_text(
    file: Path, required: Sequence[str], delimiter: str, skip_rows: int, error: type[Exception]
) -> pd.DataFrame:
    """Read a CSV with every cell as text; ``attrs["first_line"]`` is its first data line."""
    if file.stat().st_size == 0:
        msg = f"{file}: the file is empty; expected a header line with {', '.join(required)}"
        raise error(msg)
    try:
        frame = pd.read_csv(
            file,
            sep=delimiter,
            skiprows=skip_rows,
            dtype=str,
            keep_default_na=False,
            skipinitialspace=True,
        )
    except pd.errors.EmptyDataError:
        msg = f"{file}: the file is empty; expected a header line with {', '.join(required)}"
        raise error(msg) from None
    except (pd.errors.ParserError, UnicodeDecodeError) as exc:
        msg = f"{file}: cannot parse the table ({exc}); expected {delimiter!r}-separated text"
        raise error(msg) from None
    frame.attrs["first_line"] = skip_rows + 2
    return frame


def read_table(
    path: str | PathLike,
    *,
    required: Sequence[str],
    optional: Sequence[str] = (),
    delimiter: str = ",",
    skip_rows: int = 0,
    error: type[Exception] = TableFormatError,
) -> pd.DataFrame:
    """Read a CSV (or a GeoPackage layer) and check that its columns are there.

    Parameters
    ----------
    path
        CSV file, or GeoPackage (``.gpkg``) whose first layer is read as a table.
    required
        Columns that must be present (case-sensitive, surrounding spaces ignored).
    optional
        Columns that may be present. Other columns are kept but not checked.
    delimiter
        CSV field delimiter.
    skip_rows
        Lines to skip before the column-name line.
    error
        Error class to raise.

    Returns
    -------
    pandas.DataFrame
        All cells as strings (CSV) or as stored (GeoPackage), column names stripped, with the
        attribute ``attrs["first_line"]`` = file line of the first data row.

    Raises
    ------
    TableFormatError
        File missing or empty, or a required column missing (with the closest name found).
    """
    file = Path(path)
    if not file.is_file():
        msg = f"{file}: file not found; expected the file named in site.toml [files]"
        raise error(msg)
    if file.suffix.lower() == ".gpkg":
        import geopandas as gpd

        frame = pd.DataFrame(gpd.read_file(file))
        frame.attrs["first_line"] = 1
    else:
        frame = _read_csv_text(file, required, delimiter, skip_rows, error)

    def missing_columns(missing: list[str]) -> str:
        parts = []
        for name in missing:
            close = difflib.get_close_matches(
                name, [c for c in frame.columns if c not in required], n=1, cutoff=0.6
            )
            hint = f" (found {close[0]!r}: misspelled?)" if close else ""
            parts.append(f"{name!r}{hint}")
        return (
            f"{where(file, line=skip_rows + 1)}: missing column{'s' if len(missing) > 1 else ''} "
            f"{', '.join(parts)}; expected columns {', '.join(required)}"
            + (f" [, {', '.join(optional)}]" if optional else "")
            + f"; found {', '.join(map(str, frame.columns)) or 'none'}"
        )

    empty = f"{file}: the table has a header but no data rows; expected at least one row"
    return _checked_table(frame, required, missing_columns, empty, error)


def _checked_table(
    frame: pd.DataFrame,
    required: Sequence[str],
    missing_columns: Callable[[list[str]], str],
    empty: str,
    error: type[Exception],
) -> pd.DataFrame:
    """Strip the column names, then refuse a table without a required column or without rows.

    ``missing_columns`` words the error from the missing names; ``empty`` is the error of a
    table without rows.
    """
    frame.columns = [str(c).strip() for c in frame.columns]
    missing = [c for c in required if c not in frame.columns]
    if missing:
        raise error(missing_columns(missing))
    if frame.empty:
        raise error(empty)
    return frame


def numeric_column(
    frame: pd.DataFrame,
    column: str,
    *,
    path: str | PathLike,
    allow_empty: bool = False,
    minimum: float | None = None,
    exclusive_minimum: bool = False,
    error: type[Exception] = TableFormatError,
) -> np.ndarray:
    """Parse one column as floats, naming the lines of bad cells.

    Parameters
    ----------
    frame
        Table from :func:`read_table`.
    column
        Column to parse.
    path
        The file, for messages.
    allow_empty
        Empty cells become NaN instead of an error.
    minimum
        Smallest value allowed (``None`` = no limit).
    exclusive_minimum
        The minimum itself is not allowed.
    error
        Error class to raise.

    Returns
    -------
    numpy.ndarray
        float64 values.

    Raises
    ------
    TableFormatError
        A cell is not a number, is empty (unless allowed) or is below the minimum.
    """
    first = frame.attrs.get("first_line", 2)
    raw = frame[column]
    if raw.dtype == object or pd.api.types.is_string_dtype(raw):
        text = raw.astype(str).str.strip()
        empty = (text == "") | raw.isna().to_numpy()
        values = pd.to_numeric(text.where(~empty, None), errors="coerce").to_numpy(float)
        bad = np.flatnonzero(np.isnan(values) & ~empty)
        if bad.size:
            sample = ", ".join(repr(str(raw.iloc[i])) for i in bad[:3])
            msg = f"{_place(path, bad, first, column)}: not a number ({sample}); expected a number"
            raise error(msg)
    else:
        values = pd.to_numeric(raw, errors="coerce").to_numpy(float)
        empty = np.isnan(values)
    if not allow_empty and np.any(np.isnan(values)):
        bad = np.flatnonzero(np.isnan(values))
        msg = f"{_place(path, bad, first, column)}: empty cell; expected a number"
        raise error(msg)
    if minimum is not None:
        low = values <= minimum if exclusive_minimum else values < minimum
        bad = np.flatnonzero(low & ~np.isnan(values))
        if bad.size:
            sign = ">" if exclusive_minimum else ">="
            msg = (
                f"{_place(path, bad, first, column)}: value "
                f"{values[bad[0]]:g} out of range; expected a number {sign} {minimum:g}"
            )
            raise error(msg)
    return values


def _id_column(frame: pd.DataFrame, column: str, *, path: str | PathLike) -> pd.Series:
    first = frame.attrs.get("first_line", 2)
    ids = frame[column].astype(str).str.strip()
    empty = np.flatnonzero((ids == "").to_numpy() | frame[column].isna().to_numpy())
    if empty.size:
        msg = f"{_place(path, empty, first, column)}: empty cell; expected an id"
        raise TableFormatError(msg)
    return ids


def _borings_layer(file: Path, crs: pyproj.CRS | None) -> pd.DataFrame:
    """Read a GeoPackage point layer of borings as a table (x, y from the points if needed)."""
    import geopandas as gpd

    layer = gpd.read_file(file)
    if "x" not in layer.columns and layer.geometry is not None and len(layer):
        if not all(layer.geometry.geom_type == "Point"):
            msg = f"{where(file, column='geometry')}: expected point geometries for borings"
            raise TableFormatError(msg)
        if crs is not None and layer.crs is not None and not layer.crs.equals(crs):
            layer = layer.to_crs(crs)
        layer["x"] = layer.geometry.x
        layer["y"] = layer.geometry.y
    frame = pd.DataFrame(layer.drop(columns=layer.geometry.name, errors="ignore"))
    frame.attrs["first_line"] = 1

    def missing_columns(missing: list[str]) -> str:
        return (
            f"{file}: missing column {', '.join(map(repr, missing))}; expected attributes "
            f"boring_id, ground_elev and point geometry (or x, y); found "
            f"{', '.join(frame.columns)}"
        )

    empty = f"{file}: the layer has no features; expected at least one boring"
    required = ("boring_id", "x", "y", "ground_elev")
    return _checked_table(frame, required, missing_columns, empty, TableFormatError)


def read_borings(
    path: str | PathLike, *, length_unit: str = "m", crs: pyproj.CRS | None = None
) -> pd.DataFrame:
    """Read the borings table.

    Parameters
    ----------
    path
        CSV with ``boring_id, x, y, ground_elev [, date]``, or a GeoPackage point layer with
        ``boring_id`` and ``ground_elev`` attributes (``x``, ``y`` from the geometry when the
        columns are absent).
    length_unit
        Unit of x, y and ground_elev.
    crs
        The declared site CRS: a GeoPackage layer in another CRS is reprojected to it before
        x and y are taken from its points (a layer without CRS is taken to be in it).

    Returns
    -------
    pandas.DataFrame
        ``boring_id`` (str), ``x``, ``y``, ``ground_elev`` (m) [, ``date``], one row per boring,
        in file order.

    Raises
    ------
    TableFormatError
        Missing columns, non-numeric cells, empty ids, duplicate boring ids.
    """
    file = Path(path)
    if file.suffix.lower() == ".gpkg" and file.is_file():
        frame = _borings_layer(file, crs)
    else:
        frame = read_table(file, required=["boring_id", "x", "y", "ground_elev"], optional=["date"])
    first = frame.attrs.get("first_line", 2)
    ids = _id_column(frame, "boring_id", path=file)
    duplicated = ids.duplicated(keep=False).to_numpy()
    if duplicated.any():
        rows = np.flatnonzero(duplicated)
        names = sorted(set(ids[duplicated]))
        msg = (
            f"{_place(file, rows, first, 'boring_id')}: duplicate boring id "
            f"{', '.join(map(repr, names))}; expected each boring once"
        )
        raise TableFormatError(msg)
    out = pd.DataFrame({"boring_id": ids.to_numpy(dtype=object).astype(str)})
    for column in ("x", "y", "ground_elev"):
        out[column] = to_internal(numeric_column(frame, column, path=file), length_unit, "length")
    if "date" in frame.columns:
        dates = pd.to_datetime(frame["date"].replace("", None), errors="coerce")
        bad = np.flatnonzero(dates.isna().to_numpy() & (frame["date"].astype(str) != ""))
        if bad.size:
            msg = (
                f"{_place(file, bad, first, 'date')}: not a date "
                f"({frame['date'].iloc[bad[0]]!r}); expected an ISO date such as 2026-05-31"
            )
            raise TableFormatError(msg)
        out["date"] = dates.to_numpy()
    return out


def _assign_test_ids(frame: pd.DataFrame, given: pd.Series | None) -> np.ndarray:
    if given is None:
        keys = list(zip(frame["boring_id"], frame["depth"].round(6), strict=True))
    else:
        keys = list(zip(frame["boring_id"], given.astype(str).str.strip(), strict=True))
    codes, _ = pd.factorize(pd.Series(keys, dtype=object))
    return codes.astype(int) + 1


def read_dissipation(
    path: str | PathLike, *, length_unit: str = "m", pressure_unit: str = "kPa"
) -> pd.DataFrame:
    """Read the dissipation-test table.

    Parameters
    ----------
    path
        CSV with ``boring_id, depth, time_s, pressure [, test_id]``.
    length_unit, pressure_unit
        Declared units of depth and pressure.

    Returns
    -------
    pandas.DataFrame
        ``boring_id``, ``test_id`` (int from 1, unique per site: one per ``(boring_id,
        test_id)`` pair, or per ``(boring_id, depth)`` when there is no test_id column),
        ``depth`` (m), ``time_s`` (s), ``pressure`` (kPa); sorted by test then time.

    Raises
    ------
    TableFormatError
        Missing columns, non-numeric cells, negative depth or time, time not increasing within
        a test.
    """
    file = Path(path)
    frame = read_table(
        file, required=["boring_id", "depth", "time_s", "pressure"], optional=["test_id"]
    )
    first = frame.attrs["first_line"]
    out = pd.DataFrame({"boring_id": _id_column(frame, "boring_id", path=file).to_numpy()})
    out["depth"] = to_internal(
        numeric_column(frame, "depth", path=file, minimum=0.0), length_unit, "length"
    )
    out["time_s"] = numeric_column(frame, "time_s", path=file, minimum=0.0)
    out["pressure"] = to_internal(
        numeric_column(frame, "pressure", path=file), pressure_unit, "pressure"
    )
    given = frame["test_id"] if "test_id" in frame.columns else None
    out.insert(1, "test_id", _assign_test_ids(out, given))
    out["_line"] = np.arange(len(out)) + first
    for _, test in out.groupby("test_id", sort=False):
        steps = np.diff(test["time_s"].to_numpy())
        bad = np.flatnonzero(steps <= 0)
        if bad.size:
            line = int(test["_line"].iloc[bad[0] + 1])
            msg = (
                f"{where(file, line=line, column='time_s')}: time does not increase within the "
                f"test of boring {test['boring_id'].iloc[0]!r} at depth "
                f"{test['depth'].iloc[0]:g} m; expected increasing time_s in each test"
            )
            raise TableFormatError(msg)
        if np.ptp(test["depth"].to_numpy()) > 1e-6:
            line = int(test["_line"].iloc[0])
            msg = (
                f"{where(file, line=line, column='depth')}: one test_id spans several depths; "
                "expected one depth per dissipation test"
            )
            raise TableFormatError(msg)
    out = out.sort_values(["test_id", "time_s"], kind="stable").drop(columns="_line")
    return out.reset_index(drop=True)


def read_slug_tests(
    path: str | PathLike, *, length_unit: str = "m", k_unit: str = "m/s"
) -> pd.DataFrame:
    """Read the slug-test table.

    Parameters
    ----------
    path
        CSV with ``boring_id, top_depth, bottom_depth, k``.
    length_unit, k_unit
        Declared units of depths and of K.

    Returns
    -------
    pandas.DataFrame
        ``boring_id``, ``top_depth``, ``bottom_depth`` (m), ``k`` (m/s).

    Raises
    ------
    TableFormatError
        Missing columns, non-numeric cells, negative depths, top not above bottom, K <= 0.
    """
    file = Path(path)
    frame = read_table(file, required=["boring_id", "top_depth", "bottom_depth", "k"])
    first = frame.attrs["first_line"]
    out = pd.DataFrame({"boring_id": _id_column(frame, "boring_id", path=file).to_numpy()})
    for column in ("top_depth", "bottom_depth"):
        out[column] = to_internal(
            numeric_column(frame, column, path=file, minimum=0.0), length_unit, "length"
        )
    out["k"] = to_internal(
        numeric_column(frame, "k", path=file, minimum=0.0, exclusive_minimum=True), k_unit, "k"
    )
    bad = np.flatnonzero(out["bottom_depth"].to_numpy() <= out["top_depth"].to_numpy())
    if bad.size:
        msg = (
            f"{_place(file, bad, first, 'bottom_depth')}: bottom_depth not "
            "below top_depth; expected top_depth < bottom_depth"
        )
        raise TableFormatError(msg)
    return out


def read_sensor_checks(
    path: str | PathLike,
    *,
    pressure_unit: str = "kPa",
    flow_unit: str = "m3/s",
    ec_unit: str = "mS/m",
) -> pd.DataFrame:
    """Read the sensor-check table.

    Parameters
    ----------
    path
        CSV with ``boring_id, sensor, stage, measured, expected, tolerance``; sensor is one of
        pressure, flow, ec; stage is pre or post; values are in the declared unit of the sensor.
    pressure_unit, flow_unit, ec_unit
        Declared units of each sensor.

    Returns
    -------
    pandas.DataFrame
        The same columns, values in internal units (kPa, m3/s, mS/m).

    Raises
    ------
    TableFormatError
        Missing columns, unknown sensor or stage, non-numeric cells, negative tolerance.
    """
    file = Path(path)
    frame = read_table(
        file, required=["boring_id", "sensor", "stage", "measured", "expected", "tolerance"]
    )
    first = frame.attrs["first_line"]
    out = pd.DataFrame({"boring_id": _id_column(frame, "boring_id", path=file).to_numpy()})
    for column, allowed in (("sensor", tuple(SENSORS)), ("stage", STAGES)):
        values = frame[column].astype(str).str.strip().str.lower()
        bad = np.flatnonzero(~values.isin(allowed).to_numpy())
        if bad.size:
            msg = (
                f"{_place(file, bad, first, column)}: "
                f"{frame[column].iloc[bad[0]]!r} is not a {column}; expected one of "
                f"{', '.join(allowed)}"
            )
            raise TableFormatError(msg)
        out[column] = values.to_numpy()
    units = {"pressure": pressure_unit, "flow": flow_unit, "ec": ec_unit}
    factors = np.array([to_internal(1.0, units[s], SENSORS[s]) for s in out["sensor"]], dtype=float)
    for column in ("measured", "expected"):
        out[column] = numeric_column(frame, column, path=file) * factors
    out["tolerance"] = numeric_column(frame, "tolerance", path=file, minimum=0.0) * factors
    return out
