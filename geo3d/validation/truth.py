"""Random synthetic-truth sites: a known ground, its field records and its true volumes.

:func:`draw_site` draws, from a seed, everything about a site in SI units and local
coordinates: the geology (:mod:`geo3d.validation.geology`), the true log10 K and EC fields, a
ground surface, a water table, boring locations with a random spacing and layout, the probe
and its settings, the injection logs, dissipation tests and slug tests
(:mod:`geo3d.validation.forward`), the site boundary, treatment zones and the units the files
are to be written in.  :func:`truth_volumes` integrates the true facies over each region on the
fine truth lattice; :func:`geo3d.validation.sitefolder.write_site` writes the folder.

The true facies of a point is the common-practice threshold class of its true log10 K
(storage < -7 <= transitional < -5 <= transmissive, log10 m/s), the same definition the tool
estimates.  True log10 K is the lithology's mean plus its standard deviation times a
stationary Gaussian random field (white noise smoothed by an anisotropic Gaussian kernel).

Everything is invented.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd
import shapely
from scipy.interpolate import RegularGridInterpolator
from scipy.ndimage import gaussian_filter

from geo3d.validation.forward import (
    ProbeSettings,
    dissipation_record,
    injection_log,
    slug_test_k,
)
from geo3d.validation.geology import Geology, random_geology

__all__ = [
    "FACIES",
    "THRESHOLDS",
    "Materials",
    "Zone",
    "TruthSite",
    "draw_site",
    "truth_volumes",
    "height_fraction",
]

#: Facies names in code order and their log10 K upper bounds (common practice thresholds).
FACIES: tuple[str, ...] = ("storage", "transitional", "transmissive")
THRESHOLDS: tuple[float, ...] = (-7.0, -5.0)

#: Fine truth lattice steps (m).
LATTICE_STEP = (1.0, 1.0, 0.05)
#: Depth step of the true profiles along borings (m).
PROFILE_STEP = 0.01


@dataclass(frozen=True)
class Materials:
    """Hydraulic and electrical properties of each lithology (clay, silt, sand, gravel).

    Attributes
    ----------
    log10_k_mean, log10_k_sd
        log10 K (m/s) mean and standard deviation.
    ec_mean
        Saturated bulk EC (mS/m); ranges after Palacky (1987), from memory.
    unsaturated_ec
        Factor on EC above the water table (fine soils hold their water by capillarity).
    """

    log10_k_mean: np.ndarray
    log10_k_sd: np.ndarray
    ec_mean: np.ndarray
    unsaturated_ec: np.ndarray

    @classmethod
    def random(cls, rng: np.random.Generator) -> Materials:
        """Draw the properties of a site's lithologies."""
        mean = np.array(
            [rng.uniform(-8.8, -7.9), rng.uniform(-6.4, -5.7), rng.uniform(-4.5, -3.8),
             rng.uniform(-3.2, -2.6)]
        )  # fmt: skip
        sd = rng.uniform(0.15, 0.35, 4)
        ec = np.array(
            [rng.uniform(60, 150), rng.uniform(20, 50), rng.uniform(5, 15), rng.uniform(2, 8)]
        )
        unsat = np.array(
            [rng.uniform(0.85, 1.0), rng.uniform(0.6, 0.9), rng.uniform(0.3, 0.6),
             rng.uniform(0.2, 0.5)]
        )  # fmt: skip
        return cls(mean, sd, ec, unsat)


@dataclass(frozen=True)
class Zone:
    """A treatment zone (local coordinates).

    ``top``/``bottom`` are depths below ground (``reference='depth'``) or elevations.
    """

    name: str
    polygon: Any
    top: float
    bottom: float
    reference: str


@dataclass
class TruthSite:
    """A drawn synthetic site, SI units, local coordinates (m from the south-west corner).

    Attributes
    ----------
    seed, name
        Seed and site name.
    units
        Declared units for the files: ``length``, ``pressure``, ``pressure_reference``,
        ``flow``, ``ec``, ``k``.
    crs, origin
        EPSG code of the projected CRS, and the offset ``(x0, y0)`` (m) of the local origin in
        its metre-axis version.
    geology, materials
        The ground.
    ground, water_table
        Planes ``(z0, gx, gy)``: ``z = z0 + gx x + gy y``.
    base
        Base elevation of the model (m).
    lattice
        ``x``, ``y``, ``z`` cell centres of the truth lattice and ``facies`` (int8, ``(nz, ny,
        nx)``), ``log10_k`` (float32).
    borings
        ``boring_id``, ``x``, ``y``, ``ground_elev``, ``date``, ``total_depth``.
    logs
        Boring id -> injection log (SI).
    dissipation, slug_tests
        Tables in SI (``boring_id, test_id, depth, time_s, pressure``; ``boring_id,
        top_depth, bottom_depth, k``).
    boundary
        Site polygon.
    zones
        Treatment zones.
    probe
        Probe settings.
    p_atm
        Barometric pressure (kPa) of each logging day (``date`` of the borings).
    info
        Drawn parameters worth reporting (styles, spacing, noise, skin).
    """

    seed: int
    name: str
    units: dict[str, str]
    crs: int
    origin: tuple[float, float]
    geology: Geology
    materials: Materials
    ground: tuple[float, float, float]
    water_table: tuple[float, float, float]
    base: float
    lattice: dict[str, np.ndarray]
    borings: pd.DataFrame
    logs: dict[str, pd.DataFrame]
    dissipation: pd.DataFrame
    slug_tests: pd.DataFrame
    boundary: Any
    zones: list[Zone]
    probe: ProbeSettings
    p_atm: dict[str, float] = field(default_factory=dict)
    info: dict[str, Any] = field(default_factory=dict)

    def plane(self, which: str, x, y) -> np.ndarray:
        """Elevation of the ``'ground'`` or ``'water_table'`` plane at local ``(x, y)``."""
        z0, gx, gy = getattr(self, which)
        return z0 + gx * np.asarray(x, float) + gy * np.asarray(y, float)


def classify(log10_k: np.ndarray) -> np.ndarray:
    """Facies code of true log10 K values (threshold classes)."""
    return np.searchsorted(np.asarray(THRESHOLDS), log10_k, side="right").astype(np.int8)


def _layout(rng: np.random.Generator, n_borings: int | None) -> tuple[np.ndarray, float, str]:
    """Boring locations (local m), the nominal spacing and the layout name."""
    n = int(rng.integers(20, 41))
    n = n if n_borings is None else int(n_borings)
    spacing = rng.uniform(10.0, 20.0)
    aspect = rng.uniform(0.6, 1.6)
    cols = max(3, round(math.sqrt(n * aspect)))
    rows = math.ceil(n / cols)
    if rng.random() < 0.6:
        ii, jj = np.meshgrid(np.arange(cols), np.arange(rows))
        pts = np.column_stack([ii.ravel(), jj.ravel()]) + 0.5
        pts = (pts + rng.uniform(-0.35, 0.35, pts.shape)) * spacing
        pts = pts[rng.choice(len(pts), n, replace=False)]
        return pts, spacing, "jittered grid"
    size = np.array([cols, rows]) * spacing
    chosen: list[np.ndarray] = []
    while len(chosen) < n:
        p = rng.uniform(0, 1, 2) * size
        if all(np.hypot(*(p - q)) >= 0.55 * spacing for q in chosen):
            chosen.append(p)
    return np.array(chosen), spacing, "random"


def _lattice(bounds: tuple[float, ...], base: float, top: float) -> dict[str, np.ndarray]:
    dx, dy, dz = LATTICE_STEP
    x0, y0, x1, y1 = bounds
    x = np.arange(math.floor(x0) - 1 + dx / 2, x1 + 1, dx)
    y = np.arange(math.floor(y0) - 1 + dy / 2, y1 + 1, dy)
    z = np.arange(base - 1.5 + dz / 2, top + 0.3, dz)
    return {"x": x, "y": y, "z": z}


def _gaussian_field(shape: tuple[int, ...], sigma_cells: tuple[float, ...], rng) -> np.ndarray:
    noise = gaussian_filter(rng.standard_normal(shape), sigma_cells, mode="wrap")
    return ((noise - noise.mean()) / noise.std()).astype(np.float32)


def _fields(site_lattice: dict[str, np.ndarray], rng: np.random.Generator) -> dict[str, Any]:
    """Random fields of log10 K and EC residuals and their interpolators."""
    x, y, z = site_lattice["x"], site_lattice["y"], site_lattice["z"]
    dx, dy, dz = LATTICE_STEP
    range_h = rng.uniform(4.0, 15.0)
    range_v = rng.uniform(0.2, 0.8)
    sigma = (range_v / dz / 2, range_h / dy / 2, range_h / dx / 2)
    shape = (z.size, y.size, x.size)
    k_field = _gaussian_field(shape, sigma, rng)
    ec_field = _gaussian_field(shape, sigma, rng)
    interp = {
        name: RegularGridInterpolator((z, y, x), values, bounds_error=False, fill_value=None)
        for name, values in (("k", k_field), ("ec", ec_field))
    }
    return {"k": k_field, "ec": ec_field, "interp": interp, "range_h": range_h, "range_v": range_v}


def _properties(lith: np.ndarray, k_res, ec_res, mat: Materials, saturated) -> tuple:
    log10_k = mat.log10_k_mean[lith] + mat.log10_k_sd[lith] * k_res
    ec = mat.ec_mean[lith] * 10.0 ** (0.06 * ec_res - 0.3 * mat.log10_k_sd[lith] * k_res)
    ec = np.where(saturated, ec, ec * mat.unsaturated_ec[lith])
    return log10_k, ec


def _units(rng: np.random.Generator, given: dict[str, str] | None) -> dict[str, str]:
    drawn = {
        "length": str(rng.choice(["m", "ft"])),
        "pressure": str(rng.choice(["kPa", "psi"])),
        "pressure_reference": str(rng.choice(["absolute", "gauge"], p=[0.7, 0.3])),
        "flow": str(rng.choice(["mL/min", "L/min", "gal/min"])),
        "ec": str(rng.choice(["mS/m", "uS/cm"])),
        "k": str(rng.choice(["m/s", "cm/s", "ft/d"])),
    }
    unknown = set(given or {}) - set(drawn)
    if unknown:
        msg = f"units: unknown quantities {sorted(unknown)}; expected some of {sorted(drawn)}"
        raise ValueError(msg)
    return {**drawn, **(given or {})}


def _probe(rng: np.random.Generator) -> ProbeSettings:
    return ProbeSettings(
        screen_length=float(rng.choice([0.015, 0.02, 0.025])),
        screen_diameter=float(rng.choice([0.008, 0.01, 0.012])),
        flow=rng.uniform(150.0, 400.0) * 1e-6 / 60,
        sensor_noise=rng.uniform(0.3, 1.0),
        pressure_limit=float(rng.choice([1000.0, 1500.0, 2000.0])),
        resolution=rng.uniform(0.02, 0.08),
        ec_resolution=rng.uniform(0.01, 0.04),
        spacing=rng.uniform(0.015, 0.03),
        push_rate=rng.uniform(0.015, 0.025),
    )


def _zones(rng, boundary, points, ground_mean: float, depth: float, dtw: float) -> list[Zone]:
    zones = []
    for i in range(int(rng.integers(2, 4))):
        cx, cy = points[rng.integers(len(points))]
        half = rng.uniform(8.0, 22.0), rng.uniform(6.0, 16.0)
        rect = shapely.box(cx - half[0], cy - half[1], cx + half[0], cy + half[1])
        rect = shapely.affinity.rotate(rect, rng.uniform(0, 90), origin=(cx, cy))
        polygon = shapely.intersection(rect, boundary)
        polygon = shapely.set_precision(polygon, 0.01)
        if polygon.is_empty or polygon.area < 50 or polygon.geom_type != "Polygon":
            continue
        top = round(rng.uniform(max(0.5, dtw - 1.0), max(1.0, depth / 2)), 2)
        bottom = round(min(top + rng.uniform(2.0, 6.0), depth - 0.3), 2)
        if bottom - top < 1.0:
            continue
        name = f"Zone {chr(ord('A') + i)}"
        if rng.random() < 0.3:
            zones.append(Zone(name, polygon, round(ground_mean - top, 2),
                              round(ground_mean - bottom, 2), "elevation"))  # fmt: skip
        else:
            zones.append(Zone(name, polygon, top, bottom, "depth"))
    return zones


def height_fraction(z: np.ndarray, dz: float, lower, upper) -> np.ndarray:
    """Fraction of each cell ``[z - dz/2, z + dz/2]`` between ``lower`` and ``upper``.

    Examples
    --------
    >>> height_fraction(np.array([0.5, 1.5]), 1.0, 0.25, 1.5).tolist()
    [0.75, 0.5]
    """
    covered = np.minimum(z + dz / 2, upper) - np.maximum(z - dz / 2, lower)
    return np.clip(covered / dz, 0.0, 1.0)


def _planes(rng: np.random.Generator, boundary, centre) -> tuple[tuple, tuple, float, float]:
    """Ground and water-table planes, model depth and mean depth to water."""
    z0 = round(rng.uniform(20.0, 300.0), 1)
    ground = (z0, rng.uniform(-0.01, 0.01), rng.uniform(-0.01, 0.01))
    depth = rng.uniform(9.0, 15.0)
    dtw = rng.uniform(1.2, 5.0)
    gradient, direction = rng.uniform(0.002, 0.01), rng.uniform(0, 2 * np.pi)
    wgx, wgy = gradient * np.cos(direction), gradient * np.sin(direction)
    cx, cy = centre
    g_centre = z0 + ground[1] * cx + ground[2] * cy
    w0 = g_centre - dtw - wgx * cx - wgy * cy
    vx, vy = np.asarray(boundary.exterior.coords).T
    margin = np.max((w0 + wgx * vx + wgy * vy) - (z0 + ground[1] * vx + ground[2] * vy))
    if margin > -0.5:
        w0 -= margin + 0.5
    return ground, (w0, wgx, wgy), depth, dtw


def _lattice_truth(
    site_lattice, geology, materials, ground, water, rng
) -> tuple[dict[str, Any], dict[str, Any]]:
    fields = _fields(site_lattice, rng)
    x, y, z = site_lattice["x"], site_lattice["y"], site_lattice["z"]
    xx, yy = np.meshgrid(x, y)
    g = ground[0] + ground[1] * xx + ground[2] * yy
    w = water[0] + water[1] * xx + water[2] * yy
    zz = z[:, None, None]
    lith = geology.lithology_at(xx[None], yy[None], zz)
    log10_k, _ = _properties(lith, fields["k"], fields["ec"], materials, zz <= w[None])
    # a cell partly below the ground has a facies (its covered share is counted in volumes)
    below = zz - LATTICE_STEP[2] / 2 < g[None]
    facies = np.where(below, classify(log10_k), -1).astype(np.int8)
    out = dict(site_lattice)
    out.update(facies=facies, log10_k=log10_k.astype(np.float32))
    return out, fields


def _boring_records(site: dict[str, Any], rng: np.random.Generator) -> None:
    """Injection logs, dissipation tests and slug tests of every boring (fills ``site``)."""
    borings, fields, probe = site["borings"], site["fields"], site["probe"]
    mat, geology = site["materials"], site["geology"]
    days = site["days"]
    skin_bias = rng.uniform(-0.3, 0.0)
    logs, profiles, tests, slugs = {}, {}, [], []
    for row in borings.itertuples(index=False):
        depth = np.arange(0.0, row.total_depth + 0.5, PROFILE_STEP)
        z = row.ground_elev - depth
        wt = site["plane"]("water_table", row.x, row.y)
        pts = np.column_stack([z, np.full_like(z, row.y), np.full_like(z, row.x)])
        lith = geology.lithology_at(row.x, row.y, z)
        k_res, ec_res = fields["interp"]["k"](pts), fields["interp"]["ec"](pts)
        log10_k, ec = _properties(lith, k_res, ec_res, mat, z <= wt)
        profiles[row.boring_id] = (depth, log10_k)
        skin = min(1.0, 10.0 ** (skin_bias + rng.normal(0.0, 0.08)))
        logs[row.boring_id] = injection_log(
            depth, log10_k, ec, total_depth=row.total_depth, depth_to_water=row.ground_elev - wt,
            p_atm=days[row.date], skin=skin, unsaturated_factor=rng.uniform(0.2, 0.6),
            probe=probe, rng=rng,
        )  # fmt: skip
    ids = list(borings["boring_id"])
    tested = rng.choice(ids, max(4, int(len(ids) * rng.uniform(0.3, 0.6))), replace=False)
    test_id = 0
    for boring_id in tested:
        row = borings.set_index("boring_id").loc[boring_id]
        dtw = row.ground_elev - site["plane"]("water_table", row.x, row.y)
        for _ in range(int(rng.integers(1, 3))):
            test_id += 1
            test_depth = round(float(rng.uniform(dtw + 1.0, row.total_depth - 0.3)), 3)
            record = dissipation_record(
                test_depth, depth_to_water=float(dtw), p_atm=days[row.date],
                noise=probe.sensor_noise, rng=rng, complete=test_id <= 3 or rng.random() < 0.9,
            )  # fmt: skip
            tests.append(record.assign(boring_id=boring_id, test_id=test_id, depth=test_depth))
    for boring_id in rng.choice(ids, int(rng.integers(3, 7)), replace=False):
        row = borings.set_index("boring_id").loc[boring_id]
        dtw = row.ground_elev - site["plane"]("water_table", row.x, row.y)
        length = rng.uniform(0.6, 1.5)
        top = round(rng.uniform(dtw + 0.5, row.total_depth - length - 0.2), 2)
        depth, log10_k = profiles[boring_id]
        k = slug_test_k(depth, log10_k, top, top + length, rng=rng)
        slugs.append({"boring_id": boring_id, "top_depth": top,
                      "bottom_depth": round(top + length, 2), "k": k})  # fmt: skip
    site["logs"] = logs
    site["dissipation"] = pd.concat(tests, ignore_index=True)[
        ["boring_id", "test_id", "depth", "time_s", "pressure"]
    ]
    site["slug_tests"] = pd.DataFrame(slugs)
    site["info"].update(skin_log10_bias=skin_bias, n_dissipation_tests=test_id,
                        n_slug_tests=len(slugs))  # fmt: skip


def draw_site(
    seed: int, *, n_borings: int | None = None, units: dict[str, str] | None = None
) -> TruthSite:
    """Draw a complete synthetic site from a seed.

    Parameters
    ----------
    seed
        Any non-negative integer; the same seed gives the same site.
    n_borings
        Number of borings (default drawn, 20 to 40).
    units
        Declared units to use instead of drawn ones (keys ``length``, ``pressure``,
        ``pressure_reference``, ``flow``, ``ec``, ``k``; values as in ``site.toml``).

    Returns
    -------
    TruthSite
    """
    rng = np.random.default_rng(seed)
    units = _units(rng, units)
    points, spacing, layout = _layout(rng, n_borings)
    boundary = shapely.MultiPoint(points).convex_hull.buffer(0.35 * spacing, quad_segs=2)
    boundary = shapely.set_precision(boundary, 0.01)
    ground, water, depth, dtw = _planes(rng, boundary, points.mean(axis=0))
    vx, vy = np.asarray(boundary.exterior.coords).T
    g_vertices = ground[0] + ground[1] * vx + ground[2] * vy
    base = round(float(g_vertices.min()) - depth, 2)
    top = float(g_vertices.max())
    lx, ly = points.max(axis=0) + 0.5 * spacing
    geology = random_geology(rng, size=(lx, ly), top=top, base=base)
    materials = Materials.random(rng)
    lattice, fields = _lattice_truth(
        _lattice(boundary.bounds, base, top), geology, materials, ground, water, rng
    )
    n = len(points)
    n_days = int(rng.integers(1, 4))
    day_names = [f"2026-0{rng.integers(3, 10)}-{10 + d:02d}" for d in range(n_days)]
    dates = sorted(rng.choice(day_names, n))
    g_b = ground[0] + ground[1] * points[:, 0] + ground[2] * points[:, 1]
    borings = pd.DataFrame({
        "boring_id": [f"B-{i + 1:02d}" for i in range(n)],
        "x": np.round(points[:, 0], 2), "y": np.round(points[:, 1], 2),
        "ground_elev": np.round(g_b, 2), "date": dates,
        "total_depth": np.round(g_b - base + rng.uniform(0.3, 1.0, n), 2),
    })  # fmt: skip
    probe = _probe(rng)
    site = {
        "borings": borings, "fields": fields, "probe": probe, "materials": materials,
        "geology": geology, "days": {d: rng.uniform(99.0, 103.0) for d in day_names},
        "plane": lambda which, x, y: (water if which == "water_table" else ground)[0]
        + (water if which == "water_table" else ground)[1] * x
        + (water if which == "water_table" else ground)[2] * y,
        "info": {},
    }  # fmt: skip
    _boring_records(site, rng)
    zones = _zones(rng, boundary, points, float(g_b.mean()), depth, dtw)
    info = dict(site["info"])
    info.update(
        styles=geology.styles, layout=layout, spacing_m=round(spacing, 2), n_borings=n,
        depth_m=round(depth, 2), depth_to_water_m=round(dtw, 2),
        k_range_h_m=round(fields["range_h"], 2), k_range_v_m=round(fields["range_v"], 2),
        sensor_noise_kpa=round(probe.sensor_noise, 3), resolution_m=round(probe.resolution, 3),
    )  # fmt: skip
    crs = 32631 + int(rng.integers(0, 3)) if units["length"] == "m" else 2223
    origin = (
        (round(rng.uniform(3e5, 6e5), 0), round(rng.uniform(5.0e6, 5.9e6), 0))
        if units["length"] == "m"
        else (round(rng.uniform(1.8e5, 2.4e5), 0), round(rng.uniform(2.5e5, 3.5e5), 0))
    )
    return TruthSite(
        seed=int(seed), name=f"Synthetic site {seed} (invented)", units=units, crs=crs,
        origin=origin, geology=geology, materials=materials, ground=ground, water_table=water,
        base=base, lattice=lattice, borings=borings, logs=site["logs"],
        dissipation=site["dissipation"], slug_tests=site["slug_tests"], boundary=boundary,
        zones=zones, probe=probe, p_atm=site["days"], info=info,
    )  # fmt: skip


def _column_fraction(x: np.ndarray, y: np.ndarray, polygon) -> np.ndarray:
    dx, dy = x[1] - x[0], y[1] - y[0]
    xx, yy = np.meshgrid(x, y)
    boxes = shapely.box(xx - dx / 2, yy - dy / 2, xx + dx / 2, yy + dy / 2)
    return shapely.area(shapely.intersection(boxes, polygon)) / (dx * dy)


def truth_volumes(site: TruthSite) -> pd.DataFrame:
    """Integrate the true bulk volumes per region, part and facies on the fine truth lattice.

    Regions: ``site`` (inside the boundary, between the base and the ground) and each treatment
    zone (inside its polygon, between its top and bottom, clipped to the site).  Parts:
    ``saturated`` (below the water table), ``unsaturated`` and ``all``.  Each lattice cell
    counts by the exact fraction of its column inside the polygon times the fraction of its
    height inside the limits.

    Returns
    -------
    pandas.DataFrame
        ``zone``, ``part``, ``facies``, ``volume_m3``; one row per facies of :data:`FACIES` and
        ``facies='all'``.
    """
    lat = site.lattice
    x, y, z = lat["x"], lat["y"], lat["z"]
    dz = z[1] - z[0]
    cell = (x[1] - x[0]) * (y[1] - y[0]) * dz
    xx, yy = np.meshgrid(x, y)
    ground = site.plane("ground", xx, yy)
    water = site.plane("water_table", xx, yy)
    codes = lat["facies"].astype(int).ravel() + 1
    regions = [("site", site.boundary, ground, np.full(ground.shape, site.base))]
    for zone in site.zones:
        if zone.reference == "depth":
            upper, lower = ground - zone.top, ground - zone.bottom
        else:
            upper, lower = np.full(ground.shape, zone.top), np.full(ground.shape, zone.bottom)
        regions.append((zone.name, zone.polygon, np.minimum(upper, ground),
                        np.maximum(lower, site.base)))  # fmt: skip
    rows = []
    for name, polygon, upper, lower in regions:
        colf = _column_fraction(x, y, polygon)[None]
        parts = {
            "saturated": (lower, np.minimum(upper, water)),
            "unsaturated": (np.maximum(lower, water), upper),
        }
        totals = np.zeros(len(FACIES) + 1)
        for part, (lo, up) in parts.items():
            weight = height_fraction(z[:, None, None], dz, lo[None], up[None]) * colf
            volume = np.bincount(codes, weights=weight.ravel(), minlength=len(FACIES) + 1) * cell
            totals += volume
            rows += _volume_rows(name, part, volume)
        rows += _volume_rows(name, "all", totals)
    return pd.DataFrame(rows)


def _volume_rows(zone: str, part: str, volume: np.ndarray) -> list[dict[str, Any]]:
    rows = [
        {"zone": zone, "part": part, "facies": f, "volume_m3": float(volume[i + 1])}
        for i, f in enumerate(FACIES)
    ]
    rows.append({"zone": zone, "part": part, "facies": "all", "volume_m3": float(volume[1:].sum())})
    return rows
