"""Split the recorded injection pressure into its parts.

The pressure recorded while injecting is the sum of the atmospheric pressure (zero when the
logger records gauge pressure), the hydrostatic pressure of the water column above the probe,
a tool loss (friction in the line and screen, measured by injecting into open water) and the
net injection pressure that drives water into the soil::

    P_total = P_atm + gamma_w * max(0, depth - depth_to_water) + P_tool(Q) + P_net

All pressures in kPa, depths in m, flows in m3/s.

References
----------
.. [1] Hvorslev, M.J. (1951) Time lag and soil permeability in ground-water observations.
   US Army Corps of Engineers, Waterways Experiment Station, Bulletin 36.
.. [2] Thompson, A., Taylor, B.N. (2008) NIST Special Publication 811 (g = 9.80665 m/s2).
"""

from __future__ import annotations

import logging
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from geo3d.errors import LogFormatError
from geo3d.logs.hydraulic import GAMMA_W

__all__ = [
    "STANDARD_ATMOSPHERE",
    "ToolLoss",
    "hydrostatic_pressure",
    "fit_tool_loss",
    "net_pressure",
]

logger = logging.getLogger(__name__)

#: Standard atmosphere at sea level, kPa (ISO 2533; NIST SP 811: 1 atm = 101.325 kPa).  The
#: reference pressure of each log is found by :mod:`geo3d.logs.reference`.
STANDARD_ATMOSPHERE: float = 101.325


def hydrostatic_pressure(depth, depth_to_water):
    """Hydrostatic pressure of the water column above the probe, kPa.

    ``gamma_w * max(0, depth - depth_to_water)`` with ``gamma_w = 9.80665 kPa/m``.

    Parameters
    ----------
    depth
        Probe depth, m.
    depth_to_water
        Depth to the water table at the same place, m.

    Returns
    -------
    float or ndarray
        kPa; zero above the water table.

    References
    ----------
    .. [1] NIST SP 811 (standard gravity); water density 1000 kg/m3.

    Examples
    --------
    >>> round(hydrostatic_pressure(15.0, 5.0), 4)
    98.0665
    """
    d = np.asarray(depth, dtype=float)
    w = np.asarray(depth_to_water, dtype=float)
    p = GAMMA_W * np.maximum(0.0, d - w)
    return float(p) if p.ndim == 0 else p


@dataclass(frozen=True)
class ToolLoss:
    """Pressure lost in the tool as a function of flow, ``P = c1*Q + c2*Q**2``.

    The linear term is laminar friction, the quadratic one turbulent and entrance losses; the
    curve passes through zero at zero flow.

    Attributes
    ----------
    c1
        kPa per (m3/s).
    c2
        kPa per (m3/s)**2.
    """

    c1: float = 0.0
    c2: float = 0.0

    def __call__(self, flow):
        """Tool loss in kPa at ``flow`` (m3/s)."""
        q = np.asarray(flow, dtype=float)
        p = self.c1 * q + self.c2 * q**2
        return float(p) if p.ndim == 0 else p


def fit_tool_loss(points: Sequence[Sequence[float]] | np.ndarray) -> ToolLoss:
    """Fit the tool loss from a flow-vs-pressure check made with the probe in open water.

    Parameters
    ----------
    points
        ``[[flow, pressure], ...]`` with flow in m3/s and the pressure above hydrostatic in kPa.
        One point fits a line through zero; two or more a quadratic through zero (least
        squares); an empty sequence means no loss.

    Returns
    -------
    ToolLoss

    Raises
    ------
    LogFormatError
        If points are not pairs of finite numbers or a flow is negative.
    """
    arr = np.asarray(points, dtype=float)
    if arr.size == 0:
        return ToolLoss()
    if arr.ndim != 2 or arr.shape[1] != 2 or not np.isfinite(arr).all():
        msg = f"[probe] tool_loss: expected a list of [flow, pressure] pairs, got {points!r}"
        raise LogFormatError(msg)
    q, p = arr[:, 0], arr[:, 1]
    if (q < 0).any():
        msg = "[probe] tool_loss: flows must be >= 0"
        raise LogFormatError(msg)
    if len(np.unique(q[q > 0])) >= 2:
        design = np.column_stack([q, q**2])
        (c1, c2), *_ = np.linalg.lstsq(design, p, rcond=None)
        return ToolLoss(float(c1), float(c2))
    qq = q[q > 0]
    if qq.size == 0:
        return ToolLoss()
    c1 = float(np.sum(qq * p[q > 0]) / np.sum(qq**2))
    return ToolLoss(c1, 0.0)


def net_pressure(
    pressure,
    *,
    depth,
    depth_to_water,
    p_atm,
    flow=None,
    tool_loss: ToolLoss | None = None,
):
    """Net injection pressure, ``P_net = P_total - P_atm - P_hydrostatic - P_tool(Q)``.

    Parameters
    ----------
    pressure
        Recorded pressure, kPa (absolute, or gauge with ``p_atm = 0``).
    depth, depth_to_water
        Probe depth and depth to water, m.
    p_atm
        Atmospheric pressure, kPa (0 for gauge records).
    flow
        Injection flow, m3/s; needed only with a tool loss.
    tool_loss
        Tool loss curve from :func:`fit_tool_loss`.

    Returns
    -------
    ndarray
        Net injection pressure, kPa (may be <= 0 where the probe cannot resolve it).

    Examples
    --------
    >>> p = net_pressure(101.325 + 98.0665 + 20.0, depth=15.0, depth_to_water=5.0, p_atm=101.325)
    >>> round(p, 6)
    20.0
    """
    p = np.asarray(pressure, dtype=float)
    result = p - np.asarray(p_atm, dtype=float) - hydrostatic_pressure(depth, depth_to_water)
    if tool_loss is not None and flow is not None:
        result = result - tool_loss(flow)
    result = np.asarray(result, dtype=float)
    return float(result) if result.ndim == 0 else result
