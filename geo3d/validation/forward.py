"""Forward models of the field records of a direct-push injection probe in a known ground.

Given the true log10 K and bulk EC along a boring (on a fine depth step), these functions make
what a crew would record: the injection log (depth, pressure, flow, EC, time), dissipation
tests and slug tests.  The physics is the steady-injection form of Hvorslev (1951):

``P = P_atm + gamma_w * max(0, depth - depth_to_water) + Q * gamma_w / (F * K_app)``

with ``F`` the shape factor of a cylindrical screen, ``K_app`` the K the probe sees (the true K
averaged over the probe's vertical resolution, times a skin factor for the smearing of the push),
pressure-sensor noise and a sensor limit: where the soil is too tight for the set flow the
pump holds the pressure just under the limit and the flow falls.  Dissipation records follow
the Hvorslev time-lag approach to the static pressure; slug tests give the arithmetic mean of
the true K over their screen (flow parallel to the layering) with a small error.

All quantities are in SI inside (m, kPa, m3/s, mS/m, m/s); conversion to the declared units
happens when the site folder is written.

References
----------
.. [1] Hvorslev, M.J. (1951) Time lag and soil permeability in ground-water observations.
   US Army Corps of Engineers, Waterways Experiment Station, Bulletin 36 (shape factor of a
   cylindrical intake ``F = 2 pi L / ln(L/D + sqrt(1 + (L/D)^2))``; exponential time lag).
.. [2] Thompson, A., Taylor, B.N. (2008) NIST Special Publication 811 (g = 9.80665 m/s2, hence
   gamma_w = 9.80665 kPa/m).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd
from scipy.ndimage import gaussian_filter1d

__all__ = [
    "GAMMA_W",
    "ProbeSettings",
    "cylinder_shape_factor",
    "injection_log",
    "dissipation_record",
    "slug_test_k",
]

#: Unit weight of water, kPa/m (NIST SP 811 standard gravity, 1000 kg/m3).
GAMMA_W = 9.80665


def cylinder_shape_factor(length: float, diameter: float) -> float:
    """Hvorslev (1951) shape factor of a cylindrical screen in uniform soil (m).

    Examples
    --------
    >>> round(cylinder_shape_factor(0.30, 0.05), 6)  # REFERENCES.md worked value 0.756470
    0.75647
    """
    ratio = length / diameter
    return float(2 * np.pi * length / np.log(ratio + np.sqrt(1 + ratio**2)))


@dataclass(frozen=True)
class ProbeSettings:
    """The probe and how it was run (SI units).

    Attributes
    ----------
    screen_length, screen_diameter
        Cylindrical screen (m).
    flow
        Set injection flow (m3/s).
    sensor_noise
        Pressure noise, one standard deviation (kPa).
    pressure_limit
        Sensor full scale (kPa, absolute).
    resolution
        Standard deviation (m) of the Gaussian vertical window over which the probe averages K.
    ec_resolution
        The same for the EC array (m).
    spacing
        Depth step of the records (m).
    push_rate
        m/s.
    """

    screen_length: float = 0.02
    screen_diameter: float = 0.01
    flow: float = 300e-6 / 60
    sensor_noise: float = 0.5
    pressure_limit: float = 1500.0
    resolution: float = 0.04
    ec_resolution: float = 0.02
    spacing: float = 0.02
    push_rate: float = 0.02

    @property
    def shape_factor(self) -> float:
        """Hvorslev shape factor of the screen (m)."""
        return cylinder_shape_factor(self.screen_length, self.screen_diameter)


def _smooth(values: np.ndarray, step: float, sigma: float) -> np.ndarray:
    return gaussian_filter1d(values, max(sigma / step, 1e-6), mode="nearest")


def injection_log(
    depth: np.ndarray,
    log10_k: np.ndarray,
    ec: np.ndarray,
    *,
    total_depth: float,
    depth_to_water: float,
    p_atm: float,
    skin: float,
    unsaturated_factor: float,
    probe: ProbeSettings,
    rng: np.random.Generator,
) -> pd.DataFrame:
    """Record an injection log through a true profile.

    Parameters
    ----------
    depth
        Fine, regular depth step of the true profile (m, increasing, from 0).
    log10_k, ec
        True log10 K (m/s) and bulk EC (mS/m) at ``depth``.
    total_depth
        Depth of the last record (m).
    depth_to_water
        True depth to water at the boring (m).
    p_atm
        Barometric pressure on the day (kPa).
    skin
        Factor (<= 1) on the K the probe sees, from the smearing of the push.
    unsaturated_factor
        Share of the saturated-flow net pressure needed above the water table (the injection
        there does not follow the saturated relation; the tool flags and leaves it out).
    probe
        Probe settings.
    rng
        Random generator.

    Returns
    -------
    pandas.DataFrame
        ``depth`` (m), ``pressure`` (kPa, absolute), ``flow`` (m3/s), ``ec`` (mS/m),
        ``time`` (s).
    """
    step = float(depth[1] - depth[0])
    k_seen = _smooth(10.0 ** np.asarray(log10_k, float), step, probe.resolution)
    ec_seen = _smooth(np.asarray(ec, float), step, probe.ec_resolution)
    d = np.arange(0.01, total_depth, probe.spacing)
    log10_app = np.log10(np.interp(d, depth, k_seen) * skin) + rng.normal(0, 0.03, d.size)
    k_app = 10.0**log10_app
    flow_set = probe.flow * (1 + rng.normal(0, 0.01, d.size))
    hydro = GAMMA_W * np.maximum(0.0, d - depth_to_water)
    p_net = flow_set * GAMMA_W / (probe.shape_factor * k_app)
    p_net = np.where(d < depth_to_water, unsaturated_factor * p_net, p_net)
    available = rng.uniform(0.96, 0.99, d.size) * probe.pressure_limit - p_atm - hydro
    held = p_net > available
    flow = np.where(held, available * probe.shape_factor * k_app / GAMMA_W, flow_set)
    p_net = np.minimum(p_net, available)
    # the flow is started once the screen is in the ground: the first readings are barometric
    off = d < 0.05
    flow = np.where(off, 0.0, np.maximum(flow + rng.normal(0, 0.003 * probe.flow, d.size), 0.0))
    p_net = np.where(off, 0.0, p_net)
    pressure = p_atm + hydro + p_net + rng.normal(0, probe.sensor_noise, d.size)
    pressure = np.minimum(pressure, probe.pressure_limit)
    ec_rec = np.interp(d, depth, ec_seen) * (1 + rng.normal(0, 0.02, d.size))
    n_spikes = int(rng.integers(0, 4))
    if n_spikes:
        at = rng.choice(d.size, n_spikes, replace=False)
        ec_rec[at] *= rng.uniform(3.0, 8.0, n_spikes)
    return pd.DataFrame(
        {"depth": d, "pressure": pressure, "flow": flow, "ec": ec_rec, "time": d / probe.push_rate}
    )


def dissipation_record(
    depth: float,
    *,
    depth_to_water: float,
    p_atm: float,
    noise: float,
    rng: np.random.Generator,
    complete: bool = True,
) -> pd.DataFrame:
    """Record the pressure decay after the flow is shut off at ``depth``.

    ``P(t) = P_static + (P_0 - P_static) exp(-t / T0)`` (Hvorslev 1951 time lag) plus sensor
    noise, with ``P_static = P_atm + gamma_w (depth - depth_to_water)``.

    Parameters
    ----------
    depth
        Probe depth (m, below the water table).
    depth_to_water
        True depth to water (m).
    p_atm
        Barometric pressure (kPa).
    noise
        Sensor noise (kPa).
    rng
        Random generator.
    complete
        Run long enough to dissipate most of the excess (else stop early, as crews sometimes
        do; the tool should refuse or down-weight such a record).

    Returns
    -------
    pandas.DataFrame
        ``time_s``, ``pressure`` (kPa absolute).
    """
    p_static = p_atm + GAMMA_W * (depth - depth_to_water)
    excess = rng.uniform(30.0, 400.0)
    t0 = rng.uniform(3.0, 40.0)
    duration = t0 * (rng.uniform(5.0, 9.0) if complete else rng.uniform(0.3, 0.6))
    dt = 1.0 if duration > 30 else 0.5
    t = np.arange(0.0, duration + dt, dt)
    p = p_static + excess * np.exp(-t / t0) + rng.normal(0, noise, t.size)
    return pd.DataFrame({"time_s": t, "pressure": p})


def slug_test_k(
    depth: np.ndarray,
    log10_k: np.ndarray,
    top: float,
    bottom: float,
    *,
    rng: np.random.Generator,
    error: float = 0.05,
) -> float:
    """K of a slug test over a screen: the arithmetic mean of the true K, with an error.

    Parameters
    ----------
    depth, log10_k
        True profile (m, log10 m/s).
    top, bottom
        Screen depths (m).
    rng
        Random generator.
    error
        Standard deviation of the log10 error.

    Returns
    -------
    float
        K (m/s).
    """
    inside = (depth >= top) & (depth <= bottom)
    mean = float(np.mean(10.0 ** np.asarray(log10_k, float)[inside]))
    return mean * 10.0 ** rng.normal(0.0, error)
