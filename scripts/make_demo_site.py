"""Build the invented geo3d demo site from a seeded synthetic truth.

The site ("Quillbrook Yard", an invented place) is a made-up former depot with a silt cap over
a connected sand-and-gravel aquifer, a silty-sand transitional unit, a silty-clay storage unit
with thin sand lenses, and a lower sand.  The script draws a random but reproducible "true"
subsurface (unit surfaces and a 3D anisotropic log10 K field from gstools), a planar water
table, and then forward-models what
a direct-push injection logging crew would have recorded: injection logs (pressure, flow and
bulk EC every ~1.5 cm at the 2 cm/s push of ASTM D8037 section 1.1), dissipation tests, slug
tests and sensor checks.  Two anomalies are planted: a dense brine layer pooled at the base of
the sand and gravel in four adjacent borings (bulk EC above the site's EC-K trend while K stays
that of a clean sand) and a logger dropout (a run of missing EC readings in one boring).  The
truth is saved under ``<out>/truth/`` so that tests can measure how close geo3d gets.

The site lies in the open Baltic Sea (about 16.48 E, 55.60 N in WGS 84 / UTM zone 33N), far
from any coast: its coordinates point at no real property.

Usage::

    python scripts/make_demo_site.py --out demo_site --seed 20261202

The output is deterministic for a given seed.  Everything in ``<out>`` except ``README.md`` is
rewritten; stale log files are removed.

Physics (see ``geo3d/logs/hydraulic.py``): total pressure = atmospheric + hydrostatic below the
water table + net injection pressure ``P_net = Q * gamma_w / (F * K)`` with F the Hvorslev (1951)
shape factor of the probe screen.  Where the needed pressure would exceed the sensor's full scale
the pump is held near the limit and the flow drops in proportion (steady Darcy flow is linear in
pressure).  Bulk EC ranges per material follow Palacky (1987) (from memory): sand and gravel
about 1-20 mS/m, silt 10-50 mS/m, clay 30-300 mS/m; a silty sand lies between sand and silt.
K ranges follow Freeze & Cherry (1979) Table 2.2 (from memory): silty sand 1e-7 to 1e-3 m/s.

References
----------
.. [1] Hvorslev, M.J. (1951) Time lag and soil permeability in ground-water observations.
   US Army Corps of Engineers, Waterways Experiment Station, Bulletin 36.
.. [2] Palacky, G.J. (1987) Resistivity characteristics of geologic targets. In Nabighian, M.N.
   (ed.) Electromagnetic Methods in Applied Geophysics, Vol. 1, SEG, 53-129.
.. [3] Freeze, R.A., Cherry, J.A. (1979) Groundwater. Prentice-Hall, Table 2.2 (K ranges).
.. [4] ASTM D8037/D8037M, Standard practice for direct push hydraulic logging for profiling
   variations of permeability in soils. ASTM International, section 1.1 (push at 2 cm/s).
"""

from __future__ import annotations

import argparse
import json
import shutil
import sys
import time
from dataclasses import dataclass
from pathlib import Path

import geopandas as gpd
import gstools as gs
import lasio
import numpy as np
import pandas as pd
import xarray as xr
from pyproj import CRS
from shapely.geometry import Point, Polygon

from geo3d.logs.hydraulic import GAMMA_W, net_pressure_for_k, shape_factor

DEFAULT_SEED = 20261202
EPSG = 32633  # WGS 84 / UTM zone 33N (projected, metres)
# world coordinates of the local (0, 0) corner: open water of the Baltic Sea (about 16.48 E,
# 55.60 N), some 65 km from the nearest coast, so that the invented site is at no property
ORIGIN = (593_000.0, 6_162_000.0)
SITE_NAME = "Quillbrook Yard (invented demo site)"
N_BORINGS = 25
EXTENT = (200.0, 150.0)  # local x, y extent of the boring area, m
CELL = (2.0, 2.0, 0.25)  # truth grid cell size dx, dy, dz, m
MODE_NO = 400  # randomization-method modes of the gstools fields

# Probe and sensors (all in the site-file units: m, kPa absolute, mL/min, mS/m).
PROBE = {
    "shape": "cylinder",
    "screen_length": 0.02,
    "screen_diameter": 0.01,
    "pressure_limit": 1500.0,
    "pressure_noise": 0.5,  # kPa, 1 SD
    "flow_noise": 1.5,  # mL/min, 1 SD
    "ec_noise_relative": 0.03,
    "ec_noise_absolute": 0.3,  # mS/m
    "push_speed": 0.02,  # m/s: 2 cm/s, ASTM D8037 section 1.1
    "sample_interval": 0.75,  # s, so ~1.5 cm between samples at 2 cm/s
    "rod_length": 1.2,  # m; the push pauses at each rod change
    "pump_hold_fraction": 0.97,  # the pump is held at this fraction of the limit
}

# Geological units: code, name, mean and SD of log10 K (m/s), base bulk EC (mS/m, saturated).
UNITS = [
    {"code": 0, "name": "silt_cap", "log10_k_mean": -6.3, "log10_k_sd": 0.45, "ec": 28.0},
    {"code": 1, "name": "sand_gravel", "log10_k_mean": -3.9, "log10_k_sd": 0.35, "ec": 7.0},
    {"code": 2, "name": "silty_clay", "log10_k_mean": -7.6, "log10_k_sd": 0.45, "ec": 95.0},
    {"code": 3, "name": "sand_lens", "log10_k_mean": -5.0, "log10_k_sd": 0.30, "ec": 14.0},
    {"code": 4, "name": "lower_sand", "log10_k_mean": -4.4, "log10_k_sd": 0.30, "ec": 9.0},
    # between the sand and gravel and the silty clay (code 5 so that the older codes keep their
    # meaning); its K stays inside the transitional class (1e-7..1e-5 m/s) and above the
    # probe's resolution limit (~4e-7 m/s at the pressure limit), so the logs resolve it, and
    # below 10**-5.5 m/s up to the lens threshold (-5.8 + 0.2 * 1.5 = -5.5), so that no
    # dissipation test is placed in it
    {"code": 5, "name": "silty_sand", "log10_k_mean": -5.8, "log10_k_sd": 0.2, "ec": 30.0},
]
LENS_THRESHOLD = 1.5  # the field above this, in the silty sand or silty clay, is a sand lens
EC_K_SLOPE = 0.25  # within a unit, EC * 10**(-slope * field): finer = more conductive
# ... with the field clipped to +-EC_FIELD_LIMIT for EC, so that a unit's EC stays within a
# factor 10**(0.25 * 2) ~ 3.2 of its base (sand and gravel 2.2-22 mS/m, near Palacky's
# 1-20 mS/m for sand): the tightest tail of a sand has the K of a silty sand but not the EC of
# a silt or clay
EC_FIELD_LIMIT = 2.0

# Horizontal correlation: major axis azimuth (degrees clockwise from north) and gstools length
# scales (exponential model, correlation exp(-h / len_scale)).
FIELD = {"model": "Exponential", "len_major": 40.0, "len_minor": 20.0, "len_vertical": 1.0}
FIELD_AZIMUTH = 60.0

# Water table: a plane falling 0.005 m/m towards FLOW_AZIMUTH (clockwise from north).
WT_GRADIENT = 0.005
FLOW_AZIMUTH = 120.0
WT_AT_CENTRE = 97.1  # m, elevation at the local centre of the boring area

HYDROFACIES = [  # geo3d's default thresholds (storage < -7 <= transitional < -5 <= transmissive)
    ("storage", -7.0),
    ("transitional", -5.0),
    ("transmissive", np.inf),
]


class Surfaces:
    """Smooth 2D surfaces of the synthetic truth, callable at any local (x, y)."""

    def __init__(self, seed: int) -> None:
        self.seed = seed
        self._srfs = {
            name: gs.SRF(
                gs.Gaussian(dim=2, var=1.0, len_scale=len_scale),
                seed=seed + offset,
                mode_no=MODE_NO,
            )
            for name, offset, len_scale in [
                ("ground", 11, 70.0),
                ("cap", 12, 55.0),
                ("sand", 13, 65.0),
                ("clay", 14, 75.0),
                ("silty_sand", 15, 60.0),
            ]
        }

    def _field(self, name: str, x, y) -> np.ndarray:
        return self._srfs[name].unstructured((x, y))

    def all(self, x, y) -> dict[str, np.ndarray]:
        """Elevations (m) of ground, unit bases and water table at local ``(x, y)``."""
        x = np.atleast_1d(np.asarray(x, float))
        y = np.atleast_1d(np.asarray(y, float))
        ground = (
            101.0 - 0.006 * (x - 100.0) + 0.003 * (y - 75.0) + 0.45 * self._field("ground", x, y)
        )
        cap_thickness = np.clip(2.3 + 0.45 * self._field("cap", x, y), 1.2, 3.6)
        cap_base = ground - cap_thickness
        sand_base = np.minimum(91.6 + 0.9 * self._field("sand", x, y), cap_base - 2.5)
        silty_sand_thickness = np.clip(2.3 + 0.35 * self._field("silty_sand", x, y), 1.5, 3.0)
        silty_sand_base = sand_base - silty_sand_thickness
        clay_base = np.minimum(84.2 + 0.8 * self._field("clay", x, y), silty_sand_base - 3.5)
        return {
            "ground": ground,
            "cap_base": cap_base,
            "sand_base": sand_base,
            "silty_sand_base": silty_sand_base,
            "clay_base": clay_base,
            "water_table": water_table(x, y),
        }


def water_table(x, y) -> np.ndarray:
    """Return the true water-table elevation (m) at local ``(x, y)``: a plane."""
    az = np.deg2rad(FLOW_AZIMUTH)
    along = (np.asarray(x) - EXTENT[0] / 2) * np.sin(az) + (np.asarray(y) - EXTENT[1] / 2) * np.cos(
        az
    )
    return WT_AT_CENTRE - WT_GRADIENT * along


def water_table_plane_world() -> dict[str, float]:
    """Coefficients of ``wt_elev = a * x + b * y + c`` in world (CRS) coordinates."""
    az = np.deg2rad(FLOW_AZIMUTH)
    a = -WT_GRADIENT * np.sin(az)
    b = -WT_GRADIENT * np.cos(az)
    xc, yc = ORIGIN[0] + EXTENT[0] / 2, ORIGIN[1] + EXTENT[1] / 2
    c = WT_AT_CENTRE - a * xc - b * yc
    return {"a": float(a), "b": float(b), "c": float(c)}


class Truth:
    """The synthetic subsurface: units, log10 K and bulk EC at any local ``(x, y, z)``."""

    def __init__(self, seed: int) -> None:
        self.seed = seed
        self.surfaces = Surfaces(seed)
        math_angle = np.deg2rad(90.0 - FIELD_AZIMUTH)  # gstools: counter-clockwise from x
        model = gs.Exponential(
            dim=3,
            var=1.0,
            len_scale=[FIELD["len_major"], FIELD["len_minor"], FIELD["len_vertical"]],
            angles=[math_angle],
        )
        self._srf = gs.SRF(model, seed=seed + 21, mode_no=MODE_NO)

    def field(self, x, y, z) -> np.ndarray:
        """Return the standard normal random field at local ``(x, y, z)`` (z = elevation)."""
        return self._srf.unstructured((np.asarray(x, float), np.asarray(y, float), z))

    def evaluate(self, x, y, z, surf: dict[str, np.ndarray] | None = None):
        """Return unit code, log10 K and saturated bulk EC at points (``surf`` per point)."""
        x = np.asarray(x, float)
        y = np.asarray(y, float)
        z = np.asarray(z, float)
        if surf is None:
            surf = self.surfaces.all(x, y)
        r = self.field(x, y, z)
        unit = np.full(z.shape, 4, dtype=np.int8)
        unit[z > surf["clay_base"]] = 2
        unit[z > surf["silty_sand_base"]] = 5
        unit[((unit == 2) | (unit == 5)) & (r > LENS_THRESHOLD)] = 3
        unit[z > surf["sand_base"]] = 1
        unit[z > surf["cap_base"]] = 0
        mean = np.array([u["log10_k_mean"] for u in UNITS])[unit]
        sd = np.array([u["log10_k_sd"] for u in UNITS])[unit]
        centred = np.where(unit == 3, r - (LENS_THRESHOLD + 0.5), r)
        log10_k = mean + sd * centred
        ec_field = np.clip(centred, -EC_FIELD_LIMIT, EC_FIELD_LIMIT)
        ec = np.array([u["ec"] for u in UNITS])[unit] * 10.0 ** (-EC_K_SLOPE * ec_field)
        above_ground = z > surf["ground"]
        unit[above_ground] = -1
        log10_k[above_ground] = np.nan
        ec[above_ground] = np.nan
        return unit, log10_k, ec


def hydrofacies_code(log10_k: np.ndarray) -> np.ndarray:
    """Hydrofacies code by geo3d's default thresholds (0 = storage); -1 where NaN."""
    bounds = [b for _, b in HYDROFACIES[:-1]]
    code = np.digitize(log10_k, bounds).astype(np.int8)
    code[~np.isfinite(log10_k)] = -1
    return code


# --------------------------------------------------------------------------------------------
# layout
# --------------------------------------------------------------------------------------------


def boring_layout(rng: np.random.Generator) -> np.ndarray:
    """Irregular boring positions (local m): random sequential placement with a min spacing."""
    points: list[tuple[float, float]] = []
    min_spacing = 24.0
    while len(points) < N_BORINGS:
        candidate = rng.uniform([6.0, 6.0], [EXTENT[0] - 6.0, EXTENT[1] - 6.0])
        if all(np.hypot(*(candidate - p)) >= min_spacing for p in points):
            points.append((float(candidate[0]), float(candidate[1])))
        if len(points) < N_BORINGS and rng.random() < 0.002:
            min_spacing *= 0.97  # relax if the area is nearly full
    xy = np.array(points)
    order = np.lexsort((xy[:, 0], -np.round(xy[:, 1] / 30.0)))  # north to south, west to east
    return np.round(xy[order], 2)


BOUNDARY_LOCAL = [
    (-9.0, -8.0),
    (150.0, -12.0),
    (211.0, -4.0),
    (214.0, 118.0),
    (188.0, 161.0),
    (70.0, 158.0),
    (-12.0, 152.0),
    (-14.0, 60.0),
]


def zone_polygons(xy: np.ndarray, brine_index: int) -> list[Polygon]:
    """Two treatment-zone polygons (local m): one around the central brine boring, one elsewhere."""
    cx, cy = xy[brine_index]
    zone_a = Polygon(
        [(cx - 26, cy - 20), (cx + 24, cy - 23), (cx + 28, cy + 18), (cx - 22, cy + 22)]
    )
    # zone B: in the half of the site away from zone A
    bx = 150.0 if cx < EXTENT[0] / 2 else 50.0
    by = 40.0 if cy > EXTENT[1] / 2 else 110.0
    zone_b = Polygon(
        [(bx - 32, by - 18), (bx + 30, by - 20), (bx + 34, by + 20), (bx - 28, by + 22)]
    )
    return [zone_a, zone_b]


# --------------------------------------------------------------------------------------------
# forward model of one log
# --------------------------------------------------------------------------------------------


@dataclass
class BoringPlan:
    """What happens in one boring (chosen before the log is simulated)."""

    boring_id: str
    x: float
    y: float
    ground: float
    depth_to_water: float
    total_depth: float
    start: pd.Timestamp
    set_flow: float
    test_depths: list[float]
    brine: tuple[float, float] | None = None  # top and bottom depth of the brine layer
    dropout: tuple[float, float] | None = None  # depths between which the EC logger drops out
    flow_drift: float = 0.0  # recorded flow reads low by this fraction at the end of the log


#: Bulk EC added by the brine (mS/m): from its top to its base, where the densest brine pools.
BRINE_EC = (45.0, 95.0)
BRINE_TAPER = 0.15  # m, over which the brine's EC fades in at its top and out at its base


def brine_ec(depth: np.ndarray, top: float, bottom: float) -> np.ndarray:
    """Bulk EC added by a dense brine layer between two depths (more saline towards its base)."""
    depth = np.asarray(depth, dtype=float)
    towards_base = np.clip((depth - top) / (bottom - top), 0.0, 1.0)
    added = BRINE_EC[0] + (BRINE_EC[1] - BRINE_EC[0]) * towards_base
    taper = np.clip(np.minimum(depth - top, bottom - depth) / BRINE_TAPER + 0.5, 0.0, 1.0)
    return added * taper


def atmospheric_pressure(timestamp: pd.Timestamp, day_levels: dict[str, float]) -> float:
    """Barometric pressure (kPa): a level per day plus a small semi-diurnal tide."""
    hours = timestamp.hour + timestamp.minute / 60 + timestamp.second / 3600
    return day_levels[str(timestamp.date())] + 0.12 * np.sin(2 * np.pi * hours / 12.0)


def _vadose_fraction(depth: np.ndarray, depth_to_water: float) -> np.ndarray:
    """Share of the saturated net pressure felt above the water table (dry soil takes water)."""
    # the screen is at the surface for the first few centimetres: water runs off freely
    in_soil = np.clip((depth - 0.04) / 0.3, 0.0, 1.0)
    return 0.03 * in_soil + 0.25 * (np.clip(depth / depth_to_water, 0.0, 1.0)) ** 2


def simulate_log(
    plan: BoringPlan,
    truth: Truth,
    rng: np.random.Generator,
    *,
    f_shape: float,
    day_levels: dict[str, float],
) -> tuple[pd.DataFrame, list[dict], list[dict], dict]:
    """Forward-model one injection log and its dissipation tests.

    Returns the log table (site-file units), the dissipation records and per-boring truth.
    """
    dt = PROBE["sample_interval"]
    n_max = int(plan.total_depth / (PROBE["push_speed"] * dt * 0.8)) + 10
    # push speed wanders by a few percent around 2 cm/s
    wander = np.convolve(rng.normal(0, 1, n_max + 20), np.ones(20) / np.sqrt(20), "same")[:n_max]
    step = PROBE["push_speed"] * dt * (1 + 0.05 * wander)
    depth = 0.01 + np.concatenate([[0.0], np.cumsum(step[:-1])])
    depth = depth[depth <= plan.total_depth]
    n = depth.size
    # time: steady sampling, plus pauses at rod changes and during dissipation tests
    elapsed = np.arange(n) * dt
    rods = np.floor(depth / PROBE["rod_length"]).astype(int)
    pauses = np.zeros(n)
    rod_change = np.flatnonzero(np.diff(rods) > 0) + 1
    pauses[rod_change] = rng.uniform(20.0, 45.0, rod_change.size)
    test_index = [int(np.searchsorted(depth, d)) for d in plan.test_depths]

    # truth along the boring
    elev = plan.ground - depth
    surf = truth.surfaces.all(np.full(n, plan.x), np.full(n, plan.y))
    # every sample is below the surveyed collar: keep the rounding of the collar elevation from
    # marking the first samples as above ground
    surf["ground"] = np.full(n, plan.ground + 1.0)
    unit, log10_k, ec_sat = truth.evaluate(np.full(n, plan.x), np.full(n, plan.y), elev, surf)
    k = 10.0**log10_k

    # flow set by the pump (mL/min), with a slow wander
    flow_true = plan.set_flow * (
        1 + 0.01 * np.convolve(rng.normal(0, 1, n + 40), np.ones(40) / np.sqrt(40), "same")[:n]
    )
    q = flow_true * 1e-6 / 60.0  # m3/s
    p_net = net_pressure_for_k(q, k, f_shape)
    saturated = depth > plan.depth_to_water
    p_net = np.where(saturated, p_net, p_net * _vadose_fraction(depth, plan.depth_to_water))
    p_hyd = GAMMA_W * np.clip(depth - plan.depth_to_water, 0.0, None)

    records: list[dict] = []
    truth_tests: list[dict] = []
    # dissipation test pauses (durations decided below, before the time axis is final)
    durations = {}
    for i, d in zip(test_index, plan.test_depths, strict=True):
        # time constant: longer in tighter soil (Hvorslev's basic time lag is ~ 1/K; softened
        # here to ~ 1/sqrt(K) to keep records of a few minutes)
        t0 = float(np.clip(12.0 * np.sqrt(1e-4 / k[i]) * rng.lognormal(0.0, 0.3), 5.0, 600.0))
        # some records stop early (only where there is a clear excess pressure to watch)
        complete = bool(rng.random() > 0.3 or p_net[i] < 10.0)
        if complete:
            # the crew waits until the excess pressure is far below the sensor noise
            settle = 1.25 * np.log(max(p_net[i], 1.0) / 0.01)
            duration = float(np.ceil(max(60.0, settle * t0) / 10.0) * 10.0)
        else:
            duration = float(np.round(t0 * rng.uniform(1.0, 2.0)))
        durations[i] = (d, t0, duration, complete)
        pauses[i] += duration + 15.0
    time_s = elapsed + np.cumsum(pauses)
    clock = plan.start + pd.to_timedelta(time_s, unit="s")
    p_atm = np.array([atmospheric_pressure(c, day_levels) for c in clock])

    p_hold = PROBE["pump_hold_fraction"] * PROBE["pressure_limit"]
    pressure = p_atm + p_hyd + p_net
    capped = pressure > p_hold
    held = p_hold - rng.uniform(0.0, 3.0, n)
    # steady flow is linear in net pressure: Q_actual = Q * available / needed
    available = np.clip(held - p_atm - p_hyd, 0.0, None)
    flow_actual = np.where(capped, flow_true * available / p_net, flow_true)
    pressure = np.where(capped, held, pressure)

    # dissipation records: exponential approach to static pressure (Hvorslev 1951 time lag)
    for i, (d, t0, duration, complete) in durations.items():
        p_static = p_atm[i] + GAMMA_W * (depth[i] - plan.depth_to_water)
        p0 = pressure[i]
        t = np.arange(0.0, duration + 0.5, 1.0 if duration <= 300 else 2.0)
        values = p_static + (p0 - p_static) * np.exp(-t / t0)
        values = values + rng.normal(0.0, PROBE["pressure_noise"], t.size)
        records.append(
            {"depth": float(np.round(depth[i], 3)), "time_s": t, "pressure": np.round(values, 2)}
        )
        truth_tests.append(
            {
                "boring_id": plan.boring_id,
                "depth": float(np.round(depth[i], 3)),
                "depth_requested": d,
                "true_depth_to_water": round(plan.depth_to_water, 4),
                "p_atm": round(float(p_atm[i]), 4),
                "p_static": round(float(p_static), 4),
                "p_start": round(float(p0), 4),
                "time_constant_s": round(t0, 3),
                "duration_s": duration,
                "complete": bool(complete),
                "fraction_dissipated": round(float(1 - np.exp(-duration / t0)), 4),
            }
        )

    # recorded values: sensor noise; flow-sensor drift in the boring that fails its post check
    drift = 1.0 - plan.flow_drift * time_s / time_s[-1]
    flow_rec = np.clip(flow_actual * drift + rng.normal(0, PROBE["flow_noise"], n), 0.0, None)
    pressure_rec = pressure + rng.normal(0.0, PROBE["pressure_noise"], n)
    # bulk EC: drier above the water table; sensor noise
    moisture = np.where(saturated, 1.0, 0.55 + 0.45 * _vadose_fraction(depth, plan.depth_to_water))
    ec = ec_sat * moisture
    truth_boring: dict = {}
    if plan.brine is not None:
        ec = ec + brine_ec(depth, *plan.brine)
    ec = ec * (1 + rng.normal(0, PROBE["ec_noise_relative"], n))
    ec = ec + rng.normal(0, PROBE["ec_noise_absolute"], n)
    ec = np.clip(ec, 0.1, None)
    if plan.dropout is not None:
        lost = (depth >= plan.dropout[0]) & (depth <= plan.dropout[1])
        ec[lost] = np.nan  # the EC logger recorded nothing: empty cells in the file
        truth_boring["dropout_samples"] = int(lost.sum())

    log = pd.DataFrame(
        {
            "depth": np.round(depth, 3),
            "pressure": np.round(pressure_rec, 2),
            "flow": np.round(flow_rec, 1),
            "ec": np.round(ec, 2),
            "time": np.round(time_s, 2),
        }
    )
    truth_boring.update(
        {
            "n_samples": int(n),
            "n_capped": int(capped.sum()),
            "p_atm_first": round(float(p_atm[0]), 4),
            "log_seconds": round(float(time_s[-1]), 2),
            "end_clock": str(clock[-1].floor("s")),
        }
    )
    return log, [dict(r, boring_id=plan.boring_id) for r in records], truth_tests, truth_boring


# --------------------------------------------------------------------------------------------
# the site
# --------------------------------------------------------------------------------------------


def _choose_test_depths(
    rng: np.random.Generator, truth: Truth, x: float, y: float, ground: float, dtw: float, td: float
) -> list[float]:
    """1-3 dissipation-test depths in permeable saturated material, >= 1.5 m apart."""
    depths = np.arange(dtw + 0.8, td - 0.5, 0.05)
    if depths.size == 0:
        return []
    _, log10_k, _ = truth.evaluate(
        np.full(depths.size, x), np.full(depths.size, y), ground - depths
    )
    # permeable over +-0.1 m around the test depth (not at the edge of a thin lens)
    window = np.lib.stride_tricks.sliding_window_view(np.pad(log10_k, 2, mode="edge"), 5)
    good = depths[window.min(axis=1) > -5.5]
    n_tests = int(rng.choice([1, 2, 2, 3]))
    chosen: list[float] = []
    for d in rng.permutation(good):
        if all(abs(d - c) >= 1.5 for c in chosen):
            chosen.append(float(np.round(d, 2)))
        if len(chosen) == n_tests:
            break
    return sorted(chosen)


def _slug_tests(
    rng: np.random.Generator, truth: Truth, plans: list[BoringPlan], n_tests: int
) -> tuple[pd.DataFrame, list[dict]]:
    """Slug tests: true arithmetic mean K over the screen times a lognormal error."""
    rows, truths = [], []
    order = rng.permutation(len(plans))
    # (majority unit or "any", lowest and highest mean K): a spread of K for the calibration
    targets = [
        ("sand_gravel", 1e-4, 3e-4),
        ("silty_sand", 8e-7, 4e-6),
        ("lower_sand", 1e-5, 1e-4),
        ("any", 3e-6, 1.5e-5),
        ("sand_gravel", 3e-5, 1e-4),
        ("any", 3e-7, 3e-4),
    ]
    used: set[str] = set()
    for target, k_low, k_high in targets:
        if len(rows) == n_tests:
            break
        found = False
        for idx in order:
            plan = plans[idx]
            if plan.boring_id in used or found:
                continue
            length = float(np.round(rng.uniform(0.5, 1.5) / 0.05) * 0.05)
            tops = np.arange(plan.depth_to_water + 0.5, plan.total_depth - length - 0.2, 0.05)
            for top in np.round(rng.permutation(tops)[:40], 2):
                z = np.arange(top, top + length + 1e-9, 0.01)
                unit, log10_k, _ = truth.evaluate(
                    np.full(z.size, plan.x), np.full(z.size, plan.y), plan.ground - z
                )
                k_mean = float(np.mean(10.0**log10_k))
                majority = UNITS[int(np.bincount(unit).argmax())]["name"]
                if not k_low <= k_mean <= k_high or target not in ("any", majority):
                    continue
                error = float(rng.lognormal(0.0, 0.15))
                rows.append(
                    {
                        "boring_id": plan.boring_id,
                        "top_depth": round(float(top), 2),
                        "bottom_depth": round(float(top + length), 2),
                        "k": float(f"{k_mean * error:.3e}"),
                    }
                )
                truths.append(
                    {
                        "boring_id": plan.boring_id,
                        "top_depth": round(float(top), 2),
                        "bottom_depth": round(float(top + length), 2),
                        "true_mean_k": float(f"{k_mean:.4e}"),
                        "error_factor": round(error, 4),
                        "majority_unit": majority,
                    }
                )
                used.add(plan.boring_id)
                found = True
                break
    return pd.DataFrame(rows), truths


def _sensor_checks(
    rng: np.random.Generator, plans: list[BoringPlan], failed: str, drift: float
) -> pd.DataFrame:
    """Pre/post checks against reference values (kPa, mL/min, mS/m); all pass but one."""
    reference = {  # expected value, tolerance, SD of a healthy sensor's reading
        "pressure": (300.0, 3.0, 0.6),  # calibrator pressure, kPa (common practice)
        "flow": (300.0, 15.0, 2.5),  # calibrated flow, mL/min; 5 % tolerance (common practice)
        "ec": (141.3, 7.0, 1.5),  # 0.01 M KCl at 25 C = 1413 uS/cm (from memory)
    }
    rows = []
    for plan in plans:
        for sensor, (expected, tol, sd) in reference.items():
            for stage in ("pre", "post"):
                measured = expected + float(np.clip(rng.normal(0, sd), -0.6 * tol, 0.6 * tol))
                if plan.boring_id == failed and sensor == "flow" and stage == "post":
                    measured = expected * (1 - drift) + rng.normal(0, 1.0)
                rows.append(
                    {
                        "boring_id": plan.boring_id,
                        "sensor": sensor,
                        "stage": stage,
                        "measured": round(measured, 2),
                        "expected": expected,
                        "tolerance": tol,
                    }
                )
    return pd.DataFrame(rows)


def _write_las(log: pd.DataFrame, boring_id: str, path: Path, plan: BoringPlan) -> None:
    las = lasio.LASFile()
    las.well["WELL"].value = boring_id
    las.well["COMP"].value = "Quillbrook demo crew (invented)"
    las.well["FLD"].value = "Quillbrook Yard"
    las.well["DATE"].value = str(plan.start.date())
    las.well["NULL"].value = -999.25
    las.append_curve("DEPTH", log["depth"].to_numpy(), unit="m", descr="depth below collar")
    las.append_curve("PRESSURE", log["pressure"].to_numpy(), unit="kPa", descr="absolute")
    las.append_curve("FLOW", log["flow"].to_numpy(), unit="mL/min", descr="injection flow")
    las.append_curve("EC", log["ec"].to_numpy(), unit="mS/m", descr="bulk soil EC")
    las.append_curve("TIME", log["time"].to_numpy(), unit="s", descr="since start of log")
    with path.open("w", newline="\n") as fh:
        las.write(fh, version=2.0, wrap=False, fmt="%.3f", STEP=0.0)


def site_toml(*, las_id: str, day_levels: dict[str, float]) -> str:
    """Return the demo's site.toml: the template's keys, with this site's values."""
    barometer = "{ " + ", ".join(f'"{d}" = {v:g}' for d, v in day_levels.items()) + " }"
    return f'''# geo3d site file of the invented demo site "Quillbrook Yard" (made by
# scripts/make_demo_site.py; regenerate rather than edit). Every path is relative to this file's
# folder. Units are declared once, here, and converted to SI when the files are read.

[site]
name = "{SITE_NAME}"
crs = "EPSG:{EPSG}"               # WGS 84 / UTM zone 33N (projected, metres); open water

[units]
length = "m"                      # m | ft | us_survey_ft  (coordinates, elevations, depths)
pressure = "kPa"                  # kPa | psi | Pa | bar
pressure_reference = "absolute"   # absolute | gauge  (what the logger records)
flow = "mL/min"                   # mL/min | L/min | gal/min (US) | m3/s | L/s
ec = "mS/m"                       # mS/m | uS/cm | S/m | mS/cm
k = "m/s"                         # slug-test K: m/s | cm/s | m/d | ft/d
output_length = "m"               # lengths in every output: m | ft | us_survey_ft
output_volume = "m3"              # volumes in every output: m3 | L | gal (US) | ft3

[files]
borings = "borings.csv"           # boring_id, x, y, ground_elev, date
# one CSV per boring, and boring {las_id} as LAS 2.0
logs = ["logs/*.csv", "logs/*.las"]
dissipation = "dissipation.csv"   # boring_id, test_id, depth, time_s, pressure
slug_tests = "slug_tests.csv"     # boring_id, top_depth, bottom_depth, k
sensor_checks = "sensor_checks.csv"  # boring_id, sensor, stage, measured, expected, tolerance
boundary = "boundary.geojson"     # the site boundary polygon
zones = "zones.geojson"           # two treatment zones
dem = ""                          # no ground-surface raster: from boring collars

[logs]
# Column names in the log files (CSV header, LAS curve mnemonics).
depth = "depth"
pressure = "pressure"
flow = "flow"
ec = "ec"
time = "time"                     # seconds since the start of the log
header_rows = 0                   # lines to skip before the column-name line (CSV only)
boring_id = "filename"            # the file stem is the boring id
delimiter = ","
units_row = false                 # CSV only: true if the line under the names gives units
                                  # (checked against [units]; a conflict is refused)

[logs.las]
# LAS curve mnemonics where they differ from the names above; "" = as [logs].
depth = ""
pressure = ""
flow = ""
ec = ""
time = ""

[logs.csv]
# CSV column names where they differ from the names above; "" = as [logs].
depth = ""
pressure = ""
flow = ""
ec = ""
time = ""

[probe]
shape = "{PROBE["shape"]}"                # cylinder | sphere  (Hvorslev 1951 shape factor)
screen_length = {PROBE["screen_length"]}              # m
screen_diameter = {PROBE["screen_diameter"]}            # m
sensor_noise = {PROBE["pressure_noise"]}                # pressure noise, kPa (1 SD)
pressure_limit = {PROBE["pressure_limit"]}            # sensor full scale, kPa
atmospheric_pressure = "auto"     # "auto" = flow-off collar readings, else barometric_pressure
# the logs run with the flow on from the collar: daily readings of the site barometer, kPa
barometric_pressure = {barometer}
tool_loss = [ ]                   # no open-water flow-vs-pressure check was made

[water]
depth_to_water = "auto"           # "auto" = from dissipation tests; or a number (site-wide)
min_fraction_dissipated = 0.5     # records dissipating less than this are refused
surface = "plane"                 # plane | kriging  (site-wide water-table surface)

[flags]
out_of_range_high_factor = 3.0    # P_net within this many times the sensor noise
min_flow_fraction = 0.1           # flow below this fraction of the median flow: out_of_range_low
pressure_limit_fraction = 0.95    # pressure above this fraction of the sensor limit
hampel_window = 0.15              # m, half window of the EC spike filter
hampel_k = 4.0                    # spike threshold in scaled MADs
ec_trend_sigma = 2.5              # EC this many residual SDs above the EC-vs-log10 K trend
ec_min_thickness = 0.2            # m; EC above the trend must hold over this thickness
min_slug_tests = 3                # fewer slug tests than this: physics-only K, with a warning

[composite]
interval = 0.15                   # m, length of composited intervals

[facies]
method = "thresholds"             # thresholds | mixture
min_thickness = 0.3               # m; thinner runs are merged into their neighbours

# Hydrofacies from the lowest K up. log10_k_max of the last class is ignored.
# Thresholds: storage < 1e-7 m/s <= transitional < 1e-5 m/s <= transmissive (common practice);
# porosities after Freeze & Cherry (1979) Table 2.4 and Johnson (1967).
[[facies.classes]]
name = "storage"
log10_k_max = -7.0
porosity = 0.45
effective_porosity = 0.05
[[facies.classes]]
name = "transitional"
log10_k_max = -5.0
porosity = 0.38
effective_porosity = 0.15
[[facies.classes]]
name = "transmissive"
log10_k_max = 0.0
porosity = 0.32
effective_porosity = 0.25

[grid]
cell_size = [2.0, 2.0, 0.25]      # dx, dy, dz in m
base = "auto"                     # "auto" = deepest data; or an elevation
padding = 0.0                     # extend the grid beyond the boundary by this much

[variogram]
model = "auto"                    # auto | exponential | spherical | gaussian
horizontal_range = "auto"         # "auto" = fitted; or a number
vertical_range = "auto"
azimuth = 0.0                     # degrees clockwise from north of the horizontal major axis
anisotropy_minor = 1.0            # minor/major horizontal range ratio
elevation_tolerance = 0.5         # m, pairs between borings must be this close in elevation

[kriging]
neighbors = 32                    # samples per estimate
max_per_boring = 8                # at most this many from one boring (0 = no limit)
drift = "none"                    # none | linear_z
max_distance = "auto"             # in variogram ranges (1 = one range); farther cells are left
                                  # empty (NaN); "auto" = no limit
chunk_size = 20000                # cells per chunk
scheduler = ""                    # "" = local threads; or a dask.distributed address

[simulation]
realizations = 20
seed = 20261202
engine = "gaussian"               # gaussian | facies (facies simulated first, K within facies)

[treatment]
design_fraction = 0.2             # default when a zone gives none (common practice)
radius_of_influence = 3.0         # m; default when a zone gives none
target = "transmissive"           # transmissive | all  (material to treat inside each zone)

[output]
formats = ["vtk", "geotiff", "gpkg", "netcdf", "csv", "report"]
crs = ""                          # "" = every output in [site] crs

[limits]
max_cells = 200000000             # refuse a voxel grid of more cells than this
max_memory = "auto"               # GB; "auto" = the memory available when the run starts
warn_time = 1800                  # s; warn when the model is estimated to take longer
'''


def truth_grid_axes(
    truth: Truth, plans: list[BoringPlan], boundary: Polygon
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Cell-centre coordinates (local x, y; elevation z) of the truth grid."""
    dx, dy, dz = CELL
    minx, miny, maxx, maxy = boundary.bounds
    x = np.arange(np.floor(minx / dx) * dx + dx / 2, maxx, dx)
    y = np.arange(np.floor(miny / dy) * dy + dy / 2, maxy, dy)
    bottom = min(p.ground - p.total_depth for p in plans) - 1.0
    xx2, yy2 = np.meshgrid(x, y)
    top = float(np.max(truth.surfaces.all(xx2.ravel(), yy2.ravel())["ground"]))
    z = np.arange(np.floor(bottom / dz) * dz + dz / 2, top + dz, dz)
    return x, y, z


def _truth_grid(truth: Truth, x: np.ndarray, y: np.ndarray, z: np.ndarray) -> xr.Dataset:
    """Evaluate the truth on a regular grid of cell centres (world x, y in the dataset)."""
    xx2, yy2 = np.meshgrid(x, y)
    surf2 = truth.surfaces.all(xx2.ravel(), yy2.ravel())
    shape = (z.size, y.size, x.size)
    zz = np.broadcast_to(z[:, None, None], shape)
    below = zz <= surf2["ground"].reshape(y.size, x.size)[None]
    cols = np.broadcast_to(np.arange(x.size * y.size).reshape(y.size, x.size)[None], shape)
    idx = cols[below]
    surf_pts = {k: v[idx] for k, v in surf2.items()}
    xs = np.broadcast_to(xx2[None], shape)[below]
    ys = np.broadcast_to(yy2[None], shape)[below]
    unit, log10_k, _ = truth.evaluate(xs, ys, zz[below], surf_pts)

    def full(values, fill, dtype):
        out = np.full(shape, fill, dtype=dtype)
        out[below] = values
        return out

    log10_k_grid = full(log10_k, np.nan, np.float32)
    wt = surf2["water_table"].reshape(y.size, x.size)
    saturated = below & (zz < wt[None])
    ds = xr.Dataset(
        {
            "log10_k": (("z", "y", "x"), log10_k_grid),
            "facies_code": (("z", "y", "x"), full(unit, -1, np.int8)),
            "hydrofacies_code": (("z", "y", "x"), hydrofacies_code(log10_k_grid)),
            "saturated": (("z", "y", "x"), saturated.astype(np.int8)),
        },
        coords={"z": z, "y": y + ORIGIN[1], "x": x + ORIGIN[0]},
    )
    for name, key in [
        ("ground_elev", "ground"),
        ("cap_base_elev", "cap_base"),
        ("sand_base_elev", "sand_base"),
        ("silty_sand_base_elev", "silty_sand_base"),
        ("clay_base_elev", "clay_base"),
        ("wt_elev", "water_table"),
    ]:
        ds[name] = (("y", "x"), surf2[key].reshape(y.size, x.size).astype(np.float32))
    crs = CRS.from_epsg(EPSG)
    ds["spatial_ref"] = xr.DataArray(np.int32(0), attrs=crs.to_cf())
    ds.x.attrs = {"standard_name": "projection_x_coordinate", "units": "m", "axis": "X"}
    ds.y.attrs = {"standard_name": "projection_y_coordinate", "units": "m", "axis": "Y"}
    ds.z.attrs = {
        "standard_name": "height_above_reference_ellipsoid",
        "long_name": "elevation of the cell centre (site datum)",
        "units": "m",
        "positive": "up",
        "axis": "Z",
    }
    codes = ", ".join(f"{u['code']} {u['name']}" for u in UNITS)
    ds.log10_k.attrs = {"long_name": "true log10 of hydraulic conductivity K (m/s)", "units": "1"}
    ds.facies_code.attrs = {"long_name": f"geological unit: -1 above ground, {codes}"}
    ds.hydrofacies_code.attrs = {
        "long_name": "hydrofacies by default thresholds: -1 above ground, 0 storage "
        "(log10 K < -7), 1 transitional (-7 <= log10 K < -5), 2 transmissive (>= -5)"
    }
    ds.saturated.attrs = {"long_name": "1 below the true water table and below ground"}
    for name in ds.data_vars:
        if name != "spatial_ref":
            ds[name].attrs["grid_mapping"] = "spatial_ref"
    surfaces = ["ground_elev", "cap_base_elev", "sand_base_elev", "silty_sand_base_elev"]
    for name in [*surfaces, "clay_base_elev", "wt_elev"]:
        ds[name].attrs.update({"units": "m", "long_name": f"true {name.replace('_', ' ')}"})
    ds.attrs = {
        "title": "Synthetic truth of the invented geo3d demo site",
        "Conventions": "CF-1.8",
        "source": "scripts/make_demo_site.py",
        "crs": crs.to_wkt(),
        "cell_size": list(CELL),
        "seed": truth.seed,
    }
    return ds


def build_demo_site(out: Path, *, seed: int = DEFAULT_SEED, write_truth_grid: bool = True) -> dict:
    """Write the demo site folder ``out`` and its truth; return the truth dictionary.

    ``write_truth_grid=False`` skips ``truth/truth.nc`` (the slow part) and writes the rest,
    identical to a full run.
    """
    rng = np.random.default_rng(seed)
    streams = rng.spawn(6)
    layout_rng, plan_rng, log_rng, slug_rng, check_rng, _ = streams
    truth = Truth(seed)
    f_shape = shape_factor(
        PROBE["shape"], length=PROBE["screen_length"], diameter=PROBE["screen_diameter"]
    )

    xy = boring_layout(layout_rng)
    surf = truth.surfaces.all(xy[:, 0], xy[:, 1])
    ground = np.round(surf["ground"], 2)
    dtw = ground - surf["water_table"]
    ids = [f"DP-{i + 1:02d}" for i in range(N_BORINGS)]
    days = ["2026-05-11", "2026-05-12", "2026-05-13"]
    day_levels = {d: float(v) for d, v in zip(days, [101.62, 100.94, 101.31], strict=True)}

    # special borings
    centre = np.array(EXTENT) / 2
    order_from_centre = np.argsort(np.hypot(*(xy - centre).T))
    brine_idx = int(order_from_centre[3])
    # the brine borings: the central one and its three nearest neighbours
    nearest = np.argsort(np.hypot(*(xy - xy[brine_idx]).T))
    brine_set = [int(i) for i in nearest[:4]]
    dropout_idx = int(order_from_centre[9])
    failed_idx = int(order_from_centre[14])
    las_idx = int(order_from_centre[6])
    assert dropout_idx not in brine_set and las_idx != dropout_idx
    no_test = set(plan_rng.choice(np.delete(np.arange(N_BORINGS), brine_idx), 4, replace=False))

    plans: list[BoringPlan] = []
    for i, bid in enumerate(ids):
        day = days[min(i // 9, 2)]
        start = pd.Timestamp(f"{day} 07:40") + pd.Timedelta(minutes=52 * (i % 9))
        start += pd.Timedelta(seconds=int(plan_rng.integers(0, 600)))
        total_depth = float(np.round(plan_rng.uniform(15.0, 25.0), 2))
        x, y = float(xy[i, 0]), float(xy[i, 1])
        tests = (
            []
            if i in no_test
            else _choose_test_depths(plan_rng, truth, x, y, ground[i], dtw[i], total_depth)
        )
        plan = BoringPlan(
            boring_id=bid,
            x=x,
            y=y,
            ground=float(ground[i]),
            depth_to_water=float(dtw[i]),
            total_depth=total_depth,
            start=start,
            set_flow=float(np.round(plan_rng.uniform(250, 350) / 5) * 5),
            test_depths=tests,
        )
        if i in brine_set:
            # pooled on the silty sand: thickest at the central boring, thinner away from it
            sand_base_depth = float(ground[i] - surf["sand_base"][i])
            distance = float(np.hypot(*(xy[i] - xy[brine_idx])))
            thickness = float(np.round(np.clip(1.4 - 0.012 * distance, 0.8, 1.4), 1))
            # its EC fades out over the last BRINE_TAPER / 2 above the silty sand, which the
            # brine does not enter
            bottom = float(np.round(sand_base_depth - BRINE_TAPER / 2, 2))
            plan.brine = (round(bottom - thickness, 2), bottom)
            assert plan.brine[0] > dtw[i] + 1.0, "the brine layer must lie below the water table"
        if i == dropout_idx:
            # about 1 m without EC in the saturated sand and gravel
            sand_base_depth = ground[i] - surf["sand_base"][i]
            start = float(np.round((dtw[i] + sand_base_depth) / 2 - 0.5, 2))
            plan.dropout = (start, round(start + 1.0, 2))
        if i == failed_idx:
            plan.flow_drift = 0.12
        plans.append(plan)

    # write
    out = Path(out)
    out.mkdir(parents=True, exist_ok=True)
    if (out / "logs").exists():
        shutil.rmtree(out / "logs")  # no stale log files
    (out / "logs").mkdir()
    (out / "truth").mkdir(exist_ok=True)
    crs = CRS.from_epsg(EPSG)

    boring_rows, dissipation_rows, truth_tests, truth_borings = [], [], [], {}
    for i, plan in enumerate(plans):
        log, records, ttests, tboring = simulate_log(
            plan, truth, log_rng, f_shape=f_shape, day_levels=day_levels
        )
        if i == las_idx:
            _write_las(log, plan.boring_id, out / "logs" / f"{plan.boring_id}.las", plan)
        else:
            log.to_csv(out / "logs" / f"{plan.boring_id}.csv", index=False, lineterminator="\n")
        for rec in records:
            dissipation_rows.append(
                pd.DataFrame(
                    {
                        "boring_id": rec["boring_id"],
                        "depth": rec["depth"],
                        "time_s": rec["time_s"],
                        "pressure": rec["pressure"],
                    }
                )
            )
        truth_tests.extend(ttests)
        truth_borings[plan.boring_id] = {
            "x": round(plan.x + ORIGIN[0], 2),
            "y": round(plan.y + ORIGIN[1], 2),
            "ground_elev": plan.ground,
            "true_depth_to_water": round(plan.depth_to_water, 4),
            "true_wt_elev": round(plan.ground - plan.depth_to_water, 4),
            "total_depth": plan.total_depth,
            "set_flow_ml_min": plan.set_flow,
            "cap_base_depth": round(float(plan.ground - surf["cap_base"][i]), 3),
            "sand_base_depth": round(float(plan.ground - surf["sand_base"][i]), 3),
            "silty_sand_base_depth": round(float(plan.ground - surf["silty_sand_base"][i]), 3),
            "clay_base_depth": round(float(plan.ground - surf["clay_base"][i]), 3),
            "log_file": f"logs/{plan.boring_id}.{'las' if i == las_idx else 'csv'}",
            **tboring,
        }
        boring_rows.append(
            {
                "boring_id": plan.boring_id,
                "x": round(plan.x + ORIGIN[0], 2),
                "y": round(plan.y + ORIGIN[1], 2),
                "ground_elev": plan.ground,
                "date": str(plan.start.date()),
            }
        )
    pd.DataFrame(boring_rows).to_csv(out / "borings.csv", index=False, lineterminator="\n")

    dissipation = pd.concat(dissipation_rows, ignore_index=True)
    test_id = dissipation.groupby(["boring_id", "depth"], sort=False).ngroup() + 1
    dissipation.insert(1, "test_id", test_id)
    dissipation.to_csv(out / "dissipation.csv", index=False, lineterminator="\n")
    for n, t in enumerate(truth_tests, start=1):
        t["test_id"] = n

    slug, slug_truth = _slug_tests(slug_rng, truth, plans, n_tests=5)
    slug.to_csv(out / "slug_tests.csv", index=False, lineterminator="\n")

    failed_id = plans[failed_idx].boring_id
    checks = _sensor_checks(check_rng, plans, failed_id, plans[failed_idx].flow_drift)
    checks.to_csv(out / "sensor_checks.csv", index=False, lineterminator="\n")

    shift = np.array(ORIGIN)
    boundary_local = Polygon(BOUNDARY_LOCAL)
    assert all(boundary_local.contains(Point(p)) for p in xy), "a boring is outside the boundary"
    boundary = Polygon(np.array(BOUNDARY_LOCAL) + shift)
    gpd.GeoDataFrame({"name": ["Quillbrook Yard boundary"]}, geometry=[boundary], crs=crs).to_file(
        out / "boundary.geojson", driver="GeoJSON", COORDINATE_PRECISION=2
    )
    zones_local = zone_polygons(xy, brine_idx)
    zones = gpd.GeoDataFrame(
        {
            "name": ["Tansy Lane source area", "Brookside plume"],
            "top": [4.0, 93.0],
            "bottom": [11.0, 86.0],
            "reference": ["depth", "elevation"],
            "design_fraction": [0.2, 0.15],
            "radius_of_influence": [3.0, 2.5],
        },
        geometry=[Polygon(np.asarray(z.exterior.coords) + shift) for z in zones_local],
        crs=crs,
    )
    for z in zones_local:
        assert boundary_local.contains(z), "a treatment zone leaves the boundary"
    zones.to_file(out / "zones.geojson", driver="GeoJSON", COORDINATE_PRECISION=2)

    toml = site_toml(las_id=plans[las_idx].boring_id, day_levels=day_levels)
    (out / "site.toml").write_text(toml, newline="\n")

    gx, gy, gz = truth_grid_axes(truth, plans, boundary_local)
    if write_truth_grid:
        grid = _truth_grid(truth, gx, gy, gz)
        encoding = {
            "log10_k": {
                "zlib": True,
                "complevel": 6,
                "shuffle": True,
                "least_significant_digit": 2,
            },
            "facies_code": {"zlib": True, "complevel": 6},
            "hydrofacies_code": {"zlib": True, "complevel": 6},
            "saturated": {"zlib": True, "complevel": 6},
        }
        grid.to_netcdf(out / "truth" / "truth.nc", engine="netcdf4", encoding=encoding)

    plane = water_table_plane_world()
    ranges = {}
    for u in UNITS:
        low = u["log10_k_mean"] - 5 * u["log10_k_sd"]
        high = u["log10_k_mean"] + 5 * u["log10_k_sd"]
        if u["name"] == "sand_lens":  # the field exceeds LENS_THRESHOLD inside a lens
            low = u["log10_k_mean"] - 0.5 * u["log10_k_sd"]
        if u["name"] in ("silty_sand", "silty_clay"):  # ... and stays below it outside
            high = u["log10_k_mean"] + LENS_THRESHOLD * u["log10_k_sd"]
        ranges[u["name"]] = {
            "code": u["code"],
            "log10_k_mean": u["log10_k_mean"],
            "log10_k_sd": u["log10_k_sd"],
            "log10_k_range": [round(low, 3), round(high, 3)],
            "ec_saturated_base_mS_m": u["ec"],
        }
    dropout = plans[dropout_idx]
    result = {
        "site": SITE_NAME,
        "crs": f"EPSG:{EPSG}",
        "seed": seed,
        "generator": "scripts/make_demo_site.py",
        "units": {"length": "m", "pressure": "kPa absolute", "flow": "mL/min", "ec": "mS/m"},
        "water_table": {
            "model": "plane wt_elev = a*x + b*y + c (world coordinates, m); hydrostatic, "
            "no vertical gradient",
            **plane,
            "gradient": WT_GRADIENT,
            "flow_direction_deg": FLOW_AZIMUTH,
            "flow_direction_convention": "azimuth clockwise from north, down-gradient",
            "elevation_at_centre": WT_AT_CENTRE,
            "centre": [ORIGIN[0] + EXTENT[0] / 2, ORIGIN[1] + EXTENT[1] / 2],
        },
        "atmospheric_pressure_kpa": {
            "day_levels": day_levels,
            "semi_diurnal_amplitude": 0.12,
        },
        "facies": ranges,
        "ec_model": f"saturated bulk EC = ec_saturated_base * 10**(-{EC_K_SLOPE} * clip(r, "
        f"-{EC_FIELD_LIMIT}, {EC_FIELD_LIMIT})) of the unit, r = (log10_k - log10_k_mean) / "
        "log10_k_sd (in a sand lens r = field - lens_threshold - 0.5); above the water table "
        "times a moisture factor 0.55 + 0.45 * vadose_fraction(depth) (see the generator); plus "
        "the brine's EC in the brine layers; sensor noise 3 % + 0.3 mS/m",
        "hydrofacies": {
            "codes": {"storage": 0, "transitional": 1, "transmissive": 2},
            "thresholds_log10_k": [-7.0, -5.0],
        },
        "random_field": {
            "library": "gstools",
            **FIELD,
            "azimuth_major_deg": FIELD_AZIMUTH,
            "mode_no": MODE_NO,
            "lens_threshold": LENS_THRESHOLD,
        },
        "probe": {**PROBE, "shape_factor_m": round(f_shape, 6)},
        "dissipation_tests": truth_tests,
        "slug_tests": slug_truth,
        "brine": {
            "description": "dense brine pooled at the base of the sand and gravel: bulk EC "
            "above the site's EC-K trend, K unchanged",
            "borings": {
                plans[i].boring_id: {
                    "top_depth": plans[i].brine[0],
                    "bottom_depth": plans[i].brine[1],
                }
                for i in brine_set
            },
            "central_boring": plans[brine_idx].boring_id,
            "ec_added_mS_m_top_to_base": list(BRINE_EC),
            "taper_m": BRINE_TAPER,
        },
        "ec_dropout": {
            "boring_id": dropout.boring_id,
            "top_depth": dropout.dropout[0],
            "bottom_depth": dropout.dropout[1],
            "n_samples": truth_borings[dropout.boring_id]["dropout_samples"],
        },
        "sensor_check_failed": {
            "boring_id": failed_id,
            "sensor": "flow",
            "stage": "post",
            "flow_sensor_drift_at_end": plans[failed_idx].flow_drift,
        },
        "las_boring": plans[las_idx].boring_id,
        "borings_without_dissipation_test": sorted(ids[i] for i in no_test),
        "borings": truth_borings,
        "truth_grid": {
            "file": "truth/truth.nc",
            "cell_size": list(CELL),
            "shape_zyx": [gz.size, gy.size, gx.size],
            "x0": float(gx[0] + ORIGIN[0]),
            "y0": float(gy[0] + ORIGIN[1]),
            "z0": float(gz[0]),
        },
        "counts": {
            "borings": N_BORINGS,
            "log_files_csv": N_BORINGS - 1,
            "log_files_las": 1,
            "samples": int(sum(b["n_samples"] for b in truth_borings.values())),
            "dissipation_tests": len(truth_tests),
            "dissipation_rows": int(len(dissipation)),
            "slug_tests": int(len(slug)),
            "sensor_checks": int(len(checks)),
            "zones": 2,
        },
    }
    (out / "truth" / "truth.json").write_text(
        json.dumps(result, indent=1, default=_json_default) + "\n", newline="\n"
    )
    return result


def _json_default(value):
    if isinstance(value, np.generic):
        return value.item()
    raise TypeError(f"cannot serialize {type(value).__name__}")


def main(argv: list[str] | None = None) -> int:
    """Command-line entry point."""
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--out", type=Path, default=Path("demo_site"), help="output folder")
    parser.add_argument("--seed", type=int, default=DEFAULT_SEED, help="random seed")
    parser.add_argument(
        "--skip-truth-grid",
        action="store_true",
        help="do not write truth/truth.nc (quick run; every other file is identical)",
    )
    args = parser.parse_args(argv)
    started = time.perf_counter()
    result = build_demo_site(args.out, seed=args.seed, write_truth_grid=not args.skip_truth_grid)
    counts = ", ".join(f"{k} {v}" for k, v in result["counts"].items())
    elapsed = time.perf_counter() - started
    print(f"wrote {args.out} ({counts}) in {elapsed:.1f} s")
    return 0


if __name__ == "__main__":
    sys.exit(main())
