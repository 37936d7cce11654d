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

__all__ = ["evaluate_sensor_checks", "sensor_check_flags"]

logger = logging.getLogger(__name__)

_COLUMNS = ["boring_id", "sensor", "stage", "measured", "expected", "tolerance"]

#: Unit in which each sensor's check is shown to people (values are held in internal units).
_SHOWN_IN = {"pressure": ("kPa", "pressure"), "flow": ("mL/min", "flow"), "ec": ("mS/m", "ec")}


def evaluate_sensor_checks(checks: pd.DataFrame | None) -> pd.DataFrame:
    """Compare each sensor check with its tolerance.

    Parameters
    ----------
    checks
        ``boring_id, sensor, stage, measured, expected, tolerance``; may be None or empty.

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
    for row in out.loc[~out["passed"]].itertuples(index=False):
        unit, quantity = _SHOWN_IN.get(str(row.sensor), ("", ""))
        measured, expected, tolerance = (
            from_internal(float(v), unit, quantity) if unit else float(v)
            for v in (row.measured, row.expected, row.tolerance)
        )
        suffix = f" {unit}" if unit else ""
        warnings.warn(
            f"boring {row.boring_id}: {row.stage}-log {row.sensor} check failed (measured "
            f"{measured:.4g}{suffix}, expected {expected:.4g} +- {tolerance:.4g}{suffix}); its "
            "log is flagged sensor_check_failed",
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
