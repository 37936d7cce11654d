"""Sensor checks made before and after each log.

Before and after a push the operator checks each sensor (pressure, flow, EC) against a known
value.  A check passes when ``|measured - expected| <= tolerance`` (all in the declared units of
that sensor).  A failed check does not drop data: every sample of that boring is flagged
``sensor_check_failed`` and the failure is reported.
"""

from __future__ import annotations

import logging
import warnings

import numpy as np
import pandas as pd

from geo3d.errors import Geo3dWarning, TableFormatError
from geo3d.units import from_internal

__all__ = ["evaluate_sensor_checks", "sensor_check_flags", "declared_units", "in_declared_units"]

logger = logging.getLogger(__name__)

_COLUMNS = ["boring_id", "sensor", "stage", "measured", "expected", "tolerance"]

#: Quantity of each sensor (values are held in its internal unit).
_QUANTITY = {"pressure": "pressure", "flow": "flow", "ec": "ec"}
_VALUES = ("measured", "expected", "tolerance", "deviation")


def declared_units(units=None) -> dict[str, str]:
    """Return the unit each sensor's checks are shown in: the units the site file declares.

    Parameters
    ----------
    units
        ``[units]`` of the site file (anything with ``pressure``, ``flow`` and ``ec``
        attributes); None gives the defaults of the site file (kPa, mL/min, mS/m).

    Returns
    -------
    dict
        Sensor name -> unit string.
    """
    return {
        sensor: str(getattr(units, sensor, default))
        for sensor, default in (("pressure", "kPa"), ("flow", "mL/min"), ("ec", "mS/m"))
    }


def in_declared_units(evaluated: pd.DataFrame, units=None) -> pd.DataFrame:
    """Return evaluated checks with their values in the declared units and a ``unit`` column.

    Parameters
    ----------
    evaluated
        Result of :func:`evaluate_sensor_checks` (internal units).
    units
        ``[units]`` of the site file (see :func:`declared_units`).

    Returns
    -------
    pandas.DataFrame
        A copy; ``measured``, ``expected``, ``tolerance`` and ``deviation`` converted per row to
        the unit of its sensor, named in ``unit``.

    Examples
    --------
    >>> checks = pd.DataFrame({"sensor": ["flow"], "measured": [5e-6], "expected": [5e-6],
    ...                        "tolerance": [2.5e-7], "deviation": [0.0]})
    >>> row = in_declared_units(checks).iloc[0]  # 1 mL/min = 1e-6/60 m3/s (SI prefixes)
    >>> round(float(row["measured"]), 6), round(float(row["tolerance"]), 6), row["unit"]
    (300.0, 15.0, 'mL/min')
    """
    shown = declared_units(units)
    out = evaluated.copy()
    out["unit"] = [shown.get(str(sensor), "") for sensor in out["sensor"]]
    for column in _VALUES:
        if column not in out:
            continue
        values = out[column].to_numpy(dtype=float).copy()
        for i, sensor in enumerate(out["sensor"].astype(str)):
            if sensor in _QUANTITY:
                values[i] = from_internal(float(values[i]), shown[sensor], _QUANTITY[sensor])
        out[column] = values
    return out


def evaluate_sensor_checks(checks: pd.DataFrame | None, units=None) -> pd.DataFrame:
    """Compare each sensor check with its tolerance.

    Parameters
    ----------
    checks
        ``boring_id, sensor, stage, measured, expected, tolerance`` in internal units; may be
        None or empty.
    units
        ``[units]`` of the site file: failures are reported in the declared units of each
        sensor (see :func:`declared_units`).

    Returns
    -------
    DataFrame
        The checks plus ``deviation`` (measured - expected) and ``passed`` (bool).

    Raises
    ------
    TableFormatError
        If a column is missing or a tolerance is negative.
    """
    if checks is None or len(checks) == 0:
        return pd.DataFrame(columns=[*_COLUMNS, "deviation", "passed"])
    missing = [c for c in _COLUMNS if c not in checks.columns]
    if missing:
        msg = f"sensor checks: missing column(s) {missing}; expected {_COLUMNS}"
        raise TableFormatError(msg)
    out = checks.copy()
    tolerance = out["tolerance"].to_numpy(dtype=float)
    if (tolerance < 0).any():
        row = int(np.flatnonzero(tolerance < 0)[0]) + 1
        msg = f"sensor checks, row {row}, column 'tolerance': expected a value >= 0"
        raise TableFormatError(msg)
    out["deviation"] = out["measured"].astype(float) - out["expected"].astype(float)
    out["passed"] = np.abs(out["deviation"].to_numpy()) <= tolerance
    for row in in_declared_units(out.loc[~out["passed"]], units).itertuples(index=False):
        suffix = f" {row.unit}" if row.unit else ""
        warnings.warn(
            f"boring {row.boring_id}: {row.stage}-log {row.sensor} check failed (measured "
            f"{row.measured:.4g}{suffix}, expected {row.expected:.4g} +- {row.tolerance:.4g}"
            f"{suffix}); its log is flagged sensor_check_failed",
            Geo3dWarning,
            stacklevel=2,
        )
    return out


def sensor_check_flags(boring_ids, evaluated: pd.DataFrame) -> np.ndarray:
    """Boolean flag per sample: True where the sample's boring failed any sensor check."""
    ids = np.asarray(boring_ids)
    if evaluated is None or len(evaluated) == 0:
        return np.zeros(ids.size, dtype=bool)
    failed = evaluated.loc[~evaluated["passed"].astype(bool), "boring_id"].astype(str).unique()
    return np.isin(ids.astype(str), failed)
