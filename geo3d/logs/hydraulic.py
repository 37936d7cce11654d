"""Hydraulic conductivity from steady injection through a probe screen.

A probe that injects water at a steady flow ``Q`` through a screen of shape factor ``F`` into
saturated soil of hydraulic conductivity ``K`` needs a net pressure (above atmospheric and
hydrostatic) of ``P_net = Q * gamma_w / (F * K)``, so ``K = Q * gamma_w / (F * P_net)``.
Units inside geo3d: Q in m3/s, pressures in kPa, F in m, K in m/s, gamma_w in kPa/m.

References
----------
.. [1] Hvorslev, M.J. (1951) Time lag and soil permeability in ground-water observations.
   US Army Corps of Engineers, Waterways Experiment Station, Bulletin 36.
.. [2] Thompson, A., Taylor, B.N. (2008) NIST Special Publication 811 (standard gravity
   g = 9.80665 m/s2, hence gamma_w = 9.80665 kPa/m for water of 1000 kg/m3).
"""

from __future__ import annotations

import numpy as np

__all__ = ["GAMMA_W", "shape_factor", "k_from_injection", "net_pressure_for_k"]

#: Unit weight of water, kPa/m (1000 kg/m3 x 9.80665 m/s2; NIST SP 811).
GAMMA_W: float = 9.80665


def shape_factor(shape: str, *, length: float = 0.0, diameter: float) -> float:
    """Hvorslev (1951) shape factor of a probe screen in uniform, isotropic soil.

    Parameters
    ----------
    shape
        ``"cylinder"`` (a screen of length ``length`` and diameter ``diameter``) or ``"sphere"``
        (a spherical source of diameter ``diameter``).
    length
        Screen length, m (cylinder only).
    diameter
        Screen diameter, m.

    Returns
    -------
    float
        Shape factor F, m.

    Notes
    -----
    Cylinder: ``F = 2*pi*L / ln(L/D + sqrt(1 + (L/D)**2))``; sphere: ``F = 4*pi*r``.

    References
    ----------
    .. [1] Hvorslev (1951), Bulletin 36, shape factors for intake points.

    Examples
    --------
    >>> round(shape_factor("cylinder", length=0.30, diameter=0.05), 6)
    0.75647
    >>> round(shape_factor("sphere", diameter=0.02), 6)
    0.125664
    """
    if diameter <= 0:
        msg = f"screen diameter must be > 0 m, got {diameter}"
        raise ValueError(msg)
    if shape == "sphere":
        return 4.0 * np.pi * (diameter / 2.0)
    if shape == "cylinder":
        if length <= 0:
            msg = f"screen length must be > 0 m for a cylinder, got {length}"
            raise ValueError(msg)
        ratio = length / diameter
        return float(2.0 * np.pi * length / np.log(ratio + np.sqrt(1.0 + ratio**2)))
    msg = f"unknown screen shape {shape!r}; expected 'cylinder' or 'sphere'"
    raise ValueError(msg)


def k_from_injection(flow, p_net, shape_factor_m: float):
    """Hydraulic conductivity from steady injection, ``K = Q * gamma_w / (F * P_net)``.

    Parameters
    ----------
    flow
        Injection flow Q, m3/s.
    p_net
        Net injection pressure, kPa (> 0; zero or negative values give NaN).
    shape_factor_m
        Hvorslev shape factor F, m (see :func:`shape_factor`).

    Returns
    -------
    float or ndarray
        K in m/s.

    References
    ----------
    .. [1] Hvorslev (1951), steady flow form of the time-lag equations.

    Examples
    --------
    Sphere r = 1 cm, Q = 0.25 L/min, P_net = 50 kPa:

    >>> f = shape_factor("sphere", diameter=0.02)
    >>> float(f"{k_from_injection(0.25e-3 / 60, 50.0, f):.4g}")
    6.503e-06
    """
    q = np.asarray(flow, dtype=float)
    p = np.asarray(p_net, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        k = np.where(p > 0, q * GAMMA_W / (shape_factor_m * p), np.nan)
    return float(k) if k.ndim == 0 else k


def net_pressure_for_k(flow, k, shape_factor_m: float):
    """Net injection pressure (kPa) needed to inject ``flow`` into soil of conductivity ``k``.

    The inverse of :func:`k_from_injection`: ``P_net = Q * gamma_w / (F * K)``.

    Examples
    --------
    >>> f = shape_factor("sphere", diameter=0.02)
    >>> round(net_pressure_for_k(0.25e-3 / 60, 6.503e-6, f), 2)
    50.0
    """
    q = np.asarray(flow, dtype=float)
    kk = np.asarray(k, dtype=float)
    p = q * GAMMA_W / (shape_factor_m * kk)
    return float(p) if p.ndim == 0 else p
