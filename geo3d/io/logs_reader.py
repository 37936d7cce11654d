"""Readers for injection logs: one CSV per boring, or LAS 2.0 files.

Both readers return the same tidy table (``boring_id, depth, pressure, flow, ec [, time_s]``
in internal units, sorted by depth), so a log stored as LAS reads exactly like the same log
stored as CSV. Columns (or LAS curve mnemonics, matched case-insensitively) are named in the
``[logs]`` section of ``site.toml``; units are those declared in ``[units]``.
"""

from __future__ import annotations

import glob
import logging
import warnings
from collections.abc import Sequence
from os import PathLike
from pathlib import Path

import numpy as np
import pandas as pd

from geo3d.config import LogsSection, UnitsSection
from geo3d.errors import Geo3dWarning, LogFormatError, SiteValidationError, where
from geo3d.io.readers import numeric_column, read_table
from geo3d.units import to_internal

__all__ = ["read_log", "read_logs", "find_log_files", "LOG_COLUMNS"]

logger = logging.getLogger(__name__)

#: Columns of the log table, in order (``time_s`` only when ``[logs] time`` is set).
LOG_COLUMNS = ("boring_id", "depth", "pressure", "flow", "ec")

_LAS_LENGTH = {"m": "m", "meter": "m", "meters": "m", "metre": "m", "f": "ft", "ft": "ft"}


def find_log_files(patterns: str | Sequence[str], *, root: str | PathLike) -> list[Path]:
    """Expand the ``[files] logs`` glob(s) relative to the site folder.

    Parameters
    ----------
    patterns
        One glob or a list of globs.
    root
        The site folder.

    Returns
    -------
    list of pathlib.Path
        Matching files, sorted, without duplicates.
    """
    base = Path(root)
    found: set[Path] = set()
    for pattern in [patterns] if isinstance(patterns, str) else patterns:
        full = pattern if Path(pattern).is_absolute() else str(base / pattern)
        found.update(Path(p) for p in glob.glob(full, recursive=True) if Path(p).is_file())
    return sorted(found)


def _check_depth(depth: np.ndarray, *, path: Path, column: str, first_line: int) -> None:
    negative = np.flatnonzero(depth < 0)
    if negative.size:
        msg = (
            f"{where(path, line=int(negative[0]) + first_line, column=column)}: negative depth "
            f"{depth[negative[0]]:g}; expected depth >= 0, measured down from the collar"
        )
        raise LogFormatError(msg)
    steps = np.flatnonzero(np.diff(depth) <= 0)
    if steps.size:
        row = int(steps[0]) + 1
        msg = (
            f"{where(path, line=row + first_line, column=column)}: depth {depth[row]:g} does not "
            f"increase (previous {depth[row - 1]:g}); expected strictly increasing depth"
        )
        raise LogFormatError(msg)


def _finish(
    values: dict[str, np.ndarray],
    *,
    boring_id: str,
    path: Path,
    names: dict[str, str],
    units: UnitsSection,
    first_line: int,
) -> pd.DataFrame:
    _check_depth(values["depth"], path=path, column=names["depth"], first_line=first_line)
    out = pd.DataFrame({"boring_id": np.full(len(values["depth"]), boring_id, dtype=object)})
    out["depth"] = to_internal(values["depth"], units.length, "length")
    out["pressure"] = to_internal(values["pressure"], units.pressure, "pressure")
    out["flow"] = to_internal(values["flow"], units.flow, "flow")
    out["ec"] = to_internal(values["ec"], units.ec, "ec")
    if "time_s" in values:
        out["time_s"] = values["time_s"]
    out["boring_id"] = out["boring_id"].astype(str)
    return out


def _mapping(logs: LogsSection) -> dict[str, str]:
    names = {"depth": logs.depth, "pressure": logs.pressure, "flow": logs.flow, "ec": logs.ec}
    if logs.time:
        names["time_s"] = logs.time
    return names


def _numeric_values(
    table: pd.DataFrame, names: dict[str, str], *, path: Path
) -> dict[str, np.ndarray]:
    """Read the mapped columns as numbers (EC and time may be empty; flow must be >= 0)."""
    return {
        key: numeric_column(
            table,
            column,
            path=path,
            allow_empty=key in ("ec", "time_s"),
            minimum=0.0 if key == "flow" else None,
            error=LogFormatError,
        )
        for key, column in names.items()
    }


def _read_csv_log(path: Path, *, logs: LogsSection, units: UnitsSection) -> pd.DataFrame:
    names = _mapping(logs)
    required = list(names.values())
    if logs.boring_id != "filename":
        required.append(logs.boring_id)
    frame = read_table(
        path,
        required=required,
        delimiter=logs.delimiter,
        skip_rows=logs.header_rows,
        error=LogFormatError,
    )
    first = frame.attrs["first_line"]
    values = _numeric_values(frame, names, path=path)
    if logs.boring_id == "filename":
        boring_id = path.stem
    else:
        ids = frame[logs.boring_id].astype(str).str.strip().unique()
        if len(ids) != 1 or not ids[0]:
            msg = (
                f"{where(path, column=logs.boring_id)}: found boring ids {list(ids)[:5]}; "
                "expected one boring per log file"
            )
            raise LogFormatError(msg)
        boring_id = ids[0]
    return _finish(
        values, boring_id=boring_id, path=path, names=names, units=units, first_line=first
    )


def _read_las_log(path: Path, *, logs: LogsSection, units: UnitsSection) -> pd.DataFrame:
    import lasio

    if path.stat().st_size == 0:
        msg = f"{path}: the file is empty; expected a LAS 2.0 file with ~Version, ~Well, ~Curve"
        raise LogFormatError(msg)
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            las = lasio.read(str(path), ignore_header_errors=False)
    except Exception as exc:  # lasio raises many kinds for malformed files
        msg = f"{path}: cannot read as LAS 2.0 ({type(exc).__name__}: {exc})"
        raise LogFormatError(msg) from None
    version = las.version.get("VERS")
    if version is not None and str(version.value).strip() not in ("", "2", "2.0", "2.00"):
        msg = f"{path}, ~Version VERS: LAS version {version.value}; expected 2.0"
        raise LogFormatError(msg)
    mnemonics = {c.mnemonic.strip().lower(): c.mnemonic for c in las.curves}
    if not mnemonics or len(las.index) == 0:
        msg = f"{path}: no curves or no data in ~ASCII; expected depth, pressure, flow and ec"
        raise LogFormatError(msg)
    names = _mapping(logs)
    missing = [c for c in names.values() if c.lower() not in mnemonics]
    if missing:
        msg = (
            f"{path}, ~Curve: missing curve{'s' if len(missing) > 1 else ''} "
            f"{', '.join(map(repr, missing))}; expected curves "
            f"{', '.join(names.values())} (names set in site.toml [logs]); found "
            f"{', '.join(c.mnemonic for c in las.curves)}"
        )
        raise LogFormatError(msg)
    depth_curve = las.curves[mnemonics[names["depth"].lower()]]
    las_unit = _LAS_LENGTH.get(str(depth_curve.unit).strip().lower())
    declared = "ft" if "ft" in units.length.lower() else units.length.lower()
    if las_unit is not None and las_unit != declared:
        msg = (
            f"{path}, ~Curve {depth_curve.mnemonic}: depth unit {depth_curve.unit!r} differs "
            f"from [units] length = {units.length!r}; the declared unit is used"
        )
        warnings.warn(msg, Geo3dWarning, stacklevel=3)
    table = las.df().reset_index()
    # Line of the first data row: lasio does not keep it, so find the ~A line.
    first_line = 1
    with path.open(encoding="utf-8", errors="replace") as handle:
        for number, text in enumerate(handle, start=1):
            if text.lstrip().upper().startswith("~A"):
                first_line = number + 1
                break
    table.columns = [str(c).strip().lower() for c in table.columns]
    table.attrs["first_line"] = first_line
    values = _numeric_values(table, {k: c.lower() for k, c in names.items()}, path=path)
    if logs.boring_id == "filename":
        boring_id = path.stem
    else:
        item = las.well.get(logs.boring_id) or las.well.get("WELL")
        boring_id = str(item.value).strip() if item is not None else ""
        if not boring_id:
            msg = (
                f"{path}, ~Well: no {logs.boring_id!r} or WELL value; expected the boring id "
                '(or set [logs] boring_id = "filename")'
            )
            raise LogFormatError(msg)
    return _finish(
        values, boring_id=boring_id, path=path, names=names, units=units, first_line=first_line
    )


def read_log(
    path: str | PathLike,
    *,
    logs: LogsSection | None = None,
    units: UnitsSection | None = None,
) -> pd.DataFrame:
    """Read one injection log (CSV, or LAS 2.0 when the suffix is ``.las``).

    Parameters
    ----------
    path
        The log file.
    logs
        Column mapping (``[logs]``); defaults to the template's.
    units
        Declared units (``[units]``); defaults to the template's.

    Returns
    -------
    pandas.DataFrame
        ``boring_id`` (str), ``depth`` (m), ``pressure`` (kPa, as recorded), ``flow`` (m3/s),
        ``ec`` (mS/m) [, ``time_s``]; depth strictly increasing.

    Raises
    ------
    LogFormatError
        Empty file, missing column or curve, non-numeric cell, negative or non-increasing
        depth; the message names the file, line and column.
    """
    file = Path(path)
    logs = logs or LogsSection()
    units = units or UnitsSection()
    if not file.is_file():
        msg = f"{file}: log file not found"
        raise LogFormatError(msg)
    if file.suffix.lower() == ".las":
        table = _read_las_log(file, logs=logs, units=units)
    else:
        table = _read_csv_log(file, logs=logs, units=units)
    logger.debug("read %d samples from %s", len(table), file)
    return table


def read_logs(
    patterns: str | Sequence[str],
    *,
    root: str | PathLike,
    logs: LogsSection | None = None,
    units: UnitsSection | None = None,
) -> tuple[pd.DataFrame, dict[str, Path]]:
    """Read every log file matched by the ``[files] logs`` glob(s).

    Parameters
    ----------
    patterns
        One glob or a list of globs, relative to ``root``.
    root
        The site folder.
    logs, units
        As in :func:`read_log`.

    Returns
    -------
    samples : pandas.DataFrame
        All logs, sorted by boring then depth.
    sources : dict
        Boring id -> the file it came from.

    Raises
    ------
    LogFormatError
        No file matches, two files hold the same boring, or one file is bad (see
        :func:`read_log`).
    SiteValidationError
        Several files are bad; ``.problems`` lists every message.
    """
    files = find_log_files(patterns, root=root)
    if not files:
        shown = patterns if isinstance(patterns, str) else ", ".join(patterns)
        msg = f"{Path(root)}: no log file matches {shown!r}; expected one log file per boring"
        raise LogFormatError(msg)
    tables = []
    sources: dict[str, Path] = {}
    problems: list[LogFormatError] = []
    for file in files:
        try:
            table = read_log(file, logs=logs, units=units)
        except LogFormatError as exc:
            problems.append(exc)
            continue
        boring_id = str(table["boring_id"].iloc[0])
        if boring_id in sources:
            msg = (
                f"{file}: boring {boring_id!r} already read from {sources[boring_id]}; "
                "expected one log file per boring"
            )
            problems.append(LogFormatError(msg))
            continue
        sources[boring_id] = file
        tables.append(table)
    if len(problems) == 1:
        raise problems[0]
    if problems:
        raise SiteValidationError(str(p) for p in problems)
    samples = pd.concat(tables, ignore_index=True)
    samples = samples.sort_values(["boring_id", "depth"], kind="stable").reset_index(drop=True)
    return samples, sources
