"""Injection plans for treatment zones: design volume, point layout and per-point schedules.

For a treatment zone (a polygon with a top and a bottom) and a target material (the zone's
transmissive material, all material, or a depth range), the plan gives

* the effective pore volume of the target, ``V_pe = A b n_e`` (A the zone area, b the mean
  target thickness, n_e the mean effective porosity, all from the voxel model);
* the design volume ``V = A b n_e f`` for a design fraction ``f`` of that pore volume;
* injection points on a triangular lattice of spacing ``sqrt(3) r`` for a radius of influence
  ``r`` (the spacing at which the circles of radius r leave no gap), clipped to the polygon, plus
  points added where the clipped lattice leaves part of the polygon farther than ``r`` from every
  point;
* the volume of each point, its share of the design volume (or ``pi r^2 b n_e f`` per point);
* per point a vertical schedule: the target intervals of the model column at that point, with the
  point's volume shared among them in proportion to K times thickness (transmissivity).

Given a volume per point instead of a radius, the radius is ``r = sqrt(V_p / (pi b n_e f))``.
"""

from __future__ import annotations

import logging
import math
import warnings
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely
import xarray as xr
from scipy.spatial import Voronoi, cKDTree

from geo3d.analysis.fields import (
    effective_porosity_of,
    facies_codes,
    probability_stack,
    realization_fields,
    require_model,
)
from geo3d.analysis.volumes import Region, ZoneLike, region_weights
from geo3d.errors import Geo3dWarning, GeometryError, ModelError
from geo3d.units import from_internal

__all__ = [
    "InjectionPlan",
    "triangular_layout",
    "design_volume",
    "radius_for_volume",
    "injection_plan",
]

logger = logging.getLogger(__name__)


def design_volume(
    area: float, thickness: float, effective_porosity: float, design_fraction: float
) -> float:
    """Design injection volume ``V = A b n_e f`` (m3).

    The design fraction of the effective (mobile) pore volume of the treated interval is the
    usual way to size an in-situ injection (common practice).

    Examples
    --------
    >>> design_volume(100.0, 2.0, 0.25, 0.2)
    10.0
    """
    return area * thickness * effective_porosity * design_fraction


def radius_for_volume(
    volume_per_point: float, *, thickness: float, effective_porosity: float, design_fraction: float
) -> float:
    """Radius of influence of a point receiving a given volume, ``r = sqrt(V / (pi b n_e f))``.

    Examples
    --------
    >>> round(radius_for_volume(math.pi * 9 * 2 * 0.25 * 0.2, thickness=2, effective_porosity=0.25,
    ...                         design_fraction=0.2), 12)
    3.0
    """
    denominator = math.pi * thickness * effective_porosity * design_fraction
    if volume_per_point <= 0 or denominator <= 0:
        msg = (
            "injection: need volume_per_point > 0 and a positive thickness, effective porosity "
            f"and design fraction (got V={volume_per_point}, b={thickness}, "
            f"n_e={effective_porosity}, f={design_fraction})"
        )
        raise ModelError(msg)
    return math.sqrt(volume_per_point / denominator)


def _farthest_candidates(
    polygon: shapely.Geometry, points: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """Places where the distance to the nearest point can peak, with that distance.

    Over a polygon, the distance to the nearest of a set of points is largest at a Voronoi
    vertex inside the polygon, where a Voronoi edge crosses the polygon's boundary, or at a
    polygon vertex (the largest empty circle with its centre constrained to a polygon).
    """
    boundary_vertices = shapely.get_coordinates(polygon.boundary)
    found = [boundary_vertices]
    if len(points) >= 1:
        minx, miny, maxx, maxy = polygon.bounds
        size = max(maxx - minx, maxy - miny, 1.0)
        cx, cy = (minx + maxx) / 2, (miny + maxy) / 2
        # far points bound every cell of the real points; no polygon point is nearer to them
        far = 10.0 * size
        dummies = np.array(
            [[cx - far, cy - far], [cx + far, cy - far], [cx + far, cy + far], [cx - far, cy + far]]
        )
        vor = Voronoi(np.vstack([points, dummies]))
        vertices = vor.vertices
        inside = shapely.intersects_xy(polygon, vertices[:, 0], vertices[:, 1])
        found.append(vertices[inside])
        ridges = np.array([r for r in vor.ridge_vertices if -1 not in r], dtype=int)
        if len(ridges):
            segments = shapely.linestrings(
                np.stack([vertices[ridges[:, 0]], vertices[ridges[:, 1]]], axis=1)
            )
            crossings = shapely.intersection(segments, polygon.boundary)
            crossings = crossings[~shapely.is_empty(crossings)]
            if len(crossings):
                found.append(shapely.get_coordinates(crossings))
    candidates = np.vstack(found)
    if len(points) == 0:
        return candidates, np.full(len(candidates), np.inf)
    distance, _ = cKDTree(points).query(candidates)
    return candidates, distance


def _lattice(
    polygon: shapely.Geometry, radius: float, origin: tuple[float, float] | None
) -> np.ndarray:
    """Nodes of the triangular lattice of spacing ``sqrt(3) r`` inside (or on) the polygon."""
    minx, miny, maxx, maxy = polygon.bounds
    x0, y0 = (minx, miny) if origin is None else origin
    spacing = math.sqrt(3.0) * radius
    row_step = 1.5 * radius
    j0 = math.floor((miny - y0) / row_step) - 1
    j1 = math.ceil((maxy - y0) / row_step) + 1
    i0 = math.floor((minx - x0) / spacing) - 1
    i1 = math.ceil((maxx - x0) / spacing) + 1
    jj, ii = np.meshgrid(np.arange(j0, j1 + 1), np.arange(i0, i1 + 1), indexing="ij")
    xs = x0 + ii * spacing + (jj % 2) * spacing / 2
    ys = y0 + jj * row_step
    # a relative tolerance keeps lattice nodes that sit on the edge up to rounding
    tol = 1e-9 * max(radius, 1.0)
    keep = shapely.intersects_xy(polygon.buffer(tol), xs, ys)
    return np.column_stack([xs[keep], ys[keep]])


def triangular_layout(
    polygon: shapely.Geometry,
    radius: float,
    *,
    origin: tuple[float, float] | None = None,
    max_rounds: int = 200,
) -> tuple[np.ndarray, int]:
    """Injection points on a triangular lattice covering a polygon.

    The lattice has spacing ``s = sqrt(3) r`` along rows and ``1.5 r`` between rows, every other
    row shifted by ``s / 2``: the densest packing for which circles of radius ``r`` around the
    points cover the plane.  Points outside the polygon are dropped (points on its edge are
    kept); where that leaves part of the polygon more than ``r`` from every point, points are
    added inside the gap until none is left.

    Parameters
    ----------
    polygon
        Treatment-zone polygon.
    radius
        Radius of influence r (m).
    origin
        A lattice node; default the lower-left corner of the polygon's bounds.
    max_rounds
        Limit on the gap-filling rounds.

    Returns
    -------
    points, n_added
        ``(n, 2)`` coordinates (lattice points first) and how many were added to fill gaps.

    References
    ----------
    .. [1] Kershner, R. (1939) The number of circles covering a set. American Journal of
       Mathematics 61, 665-671: the hexagonal (triangular-lattice) covering with spacing
       sqrt(3) r is the thinnest covering of the plane by equal circles.
    .. [2] Toussaint, G.T. (1983) Computing largest empty circles with location constraints.
       International Journal of Computer and Information Sciences 12, 347-358.
    """
    if not isinstance(polygon, shapely.Geometry) or polygon.geom_type not in (
        "Polygon",
        "MultiPolygon",
    ):
        msg = f"injection: zone geometry must be a polygon, got {polygon!r}"
        raise GeometryError(msg)
    if not radius > 0:
        msg = f"injection: radius of influence must be > 0, got {radius}"
        raise ModelError(msg)
    points = _lattice(polygon, radius, origin)
    n_lattice = len(points)
    limit = radius * (1 + 1e-9)
    for _ in range(max_rounds):
        candidates, distance = _farthest_candidates(polygon, points)
        order = np.argsort(-distance)
        candidates, distance = candidates[order], distance[order]
        keep = distance > limit
        if not keep.any():
            break
        candidates = candidates[keep]
        added: list[np.ndarray] = []
        # greedy: the farthest uncovered place first, then the next one it leaves uncovered
        for candidate in candidates:
            if added and np.min(np.hypot(*(np.array(added) - candidate).T)) <= radius:
                continue
            added.append(candidate)
        points = np.vstack([points, np.array(added)]) if len(points) else np.array(added)
    else:
        msg = f"injection: gaps remain in the point layout after {max_rounds} rounds"
        warnings.warn(msg, Geo3dWarning, stacklevel=2)
    return points, len(points) - n_lattice


@dataclass
class InjectionPlan:
    """Injection design for one treatment zone.

    Attributes
    ----------
    zone
        Zone name.
    points
        GeoDataFrame, one row per point: ``point_id``, ``x``, ``y``, ``origin`` (``lattice`` or
        ``gap``), ``target_thickness`` (m), ``transmissivity`` (m2/s), ``volume_m3`` (and
        ``volume_<unit>`` when asked), geometry.
    schedule
        DataFrame, one row per point and injection interval: ``point_id``, ``x``, ``y``,
        ``interval``, ``top_depth``, ``bottom_depth``, ``top_elev``, ``bottom_elev``,
        ``facies``, ``transmissivity`` (m2/s), ``share``, ``volume_m3`` (and
        ``volume_<unit>``).
    summary
        Zone figures: area, mean target thickness, mean effective porosity, effective pore and
        design volumes (expected values from the facies probabilities; ``_most_likely`` from
        the most likely facies; ``_p10``/``_p50``/``_p90`` over the realizations when the
        model has them), radius, spacing, number of points, volume per point...
    """

    zone: str
    points: gpd.GeoDataFrame
    schedule: pd.DataFrame
    summary: dict[str, Any] = field(default_factory=dict)


def _runs(flags: np.ndarray) -> list[tuple[int, int]]:
    """Index ranges ``[start, stop)`` of consecutive True values."""
    padded = np.concatenate([[False], flags, [False]]).astype(int)
    change = np.flatnonzero(np.diff(padded))
    return list(zip(change[::2], change[1::2], strict=True))


@dataclass(frozen=True)
class _Target:
    """The material a zone's injection aims at, on the model grid."""

    name: str
    kind: str | tuple[float, float]
    hrange: np.ndarray | None
    transmissive: int

    @classmethod
    def of(
        cls, ds: xr.Dataset, region: Region, target: str | Sequence[float], transmissive: int
    ) -> _Target:
        if isinstance(target, str):
            if target not in ("transmissive", "all"):
                msg = (
                    "injection: target must be 'transmissive', 'all' or (top_depth, "
                    f"bottom_depth), got {target!r}"
                )
                raise ModelError(msg)
            return cls(target, target, None, transmissive)
        top_depth, bottom_depth = (float(v) for v in target)
        if bottom_depth <= top_depth:
            msg = f"injection: target depth range {target!r} has bottom above top"
            raise ModelError(msg)
        hrange = region_weights(ds, Region(region.name, None, top_depth, bottom_depth, "depth"))[2]
        name = f"{top_depth:g}-{bottom_depth:g} m"
        return cls(name, (top_depth, bottom_depth), hrange, transmissive)

    def mask(self, codes: np.ndarray) -> np.ndarray:
        """Share of each cell that is target material, given the facies codes."""
        if self.kind == "transmissive":
            return (codes == self.transmissive).astype(float)
        valid = (codes >= 0).astype(float)
        if self.hrange is not None:
            return valid * self.hrange
        return valid

    def expected_bulk(self, prob: np.ndarray, weight: np.ndarray) -> np.ndarray:
        """Sum the probabilities of each class over the target cells (covered cell counts)."""
        if self.kind == "transmissive":
            prob_bulk = np.zeros(len(prob))
            prob_bulk[self.transmissive] = float((weight * prob[self.transmissive]).sum())
            return prob_bulk
        w_all = weight if self.hrange is None else weight * self.hrange
        return (prob * w_all[None]).reshape(len(prob), -1).sum(axis=1)


def _check_plan(region: Region, design_fraction: float, per_point: str) -> shapely.Geometry:
    if region.geometry is None:
        msg = f"injection: zone {region.name!r} has no polygon"
        raise GeometryError(msg)
    if not design_fraction > 0:
        msg = f"injection: design_fraction must be > 0, got {design_fraction}"
        raise ModelError(msg)
    if per_point not in ("share", "circle"):
        msg = f"injection: per_point must be 'share' or 'circle', got {per_point!r}"
        raise ModelError(msg)
    return region.geometry


def _zone_summary(
    ds: xr.Dataset,
    region: Region,
    target: _Target,
    weights: tuple[np.ndarray, np.ndarray],
    codes: np.ndarray,
    design_fraction: float,
) -> dict[str, Any]:
    """Target volumes and design volume of a zone (expected and most likely)."""
    classes = ds.voxels.facies_classes
    weight, colfrac = weights
    cell_volume = ds.voxels.cell_volume
    dx, dy, _ = ds.voxels.cell_size
    tw = weight * target.mask(codes)
    bulk_likely = float(tw.sum()) * cell_volume
    pore_likely = float((tw * effective_porosity_of(codes, classes)).sum()) * cell_volume
    # expected values from the facies probabilities
    prob_bulk = target.expected_bulk(probability_stack(ds), weight)
    bulk = float(prob_bulk.sum()) * cell_volume
    pore_eff = float(prob_bulk @ classes.effective_porosity) * cell_volume
    assert region.geometry is not None  # checked by _check_plan
    area = float(region.geometry.area)
    thickness = bulk / area if area > 0 else 0.0
    n_e = pore_eff / bulk if bulk > 0 else 0.0
    summary: dict[str, Any] = {
        "zone": region.name,
        "target": target.name,
        "area_m2": area,
        "area_in_model_m2": float((colfrac * ds.voxels.mask.any(axis=0)).sum()) * dx * dy,
        "target_bulk_volume_m3": bulk,
        "mean_target_thickness_m": thickness,
        "mean_effective_porosity": n_e,
        "effective_pore_volume_m3": pore_eff,
        "design_fraction": float(design_fraction),
        "design_volume_m3": design_volume(area, thickness, n_e, design_fraction),
        "target_bulk_volume_m3_most_likely": bulk_likely,
        "effective_pore_volume_m3_most_likely": pore_likely,
        "design_volume_m3_most_likely": pore_likely * design_fraction,
    }
    designs = []
    for realization in realization_fields(ds):
        sim = classes.classify(realization)
        sw = weight * target.mask(sim.astype(int))
        sim_eff = effective_porosity_of(sim, classes)
        designs.append(float((sw * sim_eff).sum()) * cell_volume * design_fraction)
    if designs:
        p10, p50, p90 = np.percentile(designs, [10, 50, 90])
        summary.update(
            design_volume_m3_p10=float(p10),
            design_volume_m3_p50=float(p50),
            design_volume_m3_p90=float(p90),
        )
    if bulk_likely == 0 and bulk == 0:
        msg = f"injection: zone {region.name!r} holds no {target.name} material in the model"
        warnings.warn(msg, Geo3dWarning, stacklevel=3)
    return summary


def _add_layout(summary: dict[str, Any], radius: float, n_points: int, n_added: int) -> None:
    """Add the layout of the points and the volume per point to a zone summary."""
    thickness, n_e = summary["mean_target_thickness_m"], summary["mean_effective_porosity"]
    design_fraction, volume = summary["design_fraction"], summary["design_volume_m3"]
    summary.update(
        radius_of_influence_m=radius,
        spacing_m=math.sqrt(3.0) * radius,
        n_points=n_points,
        n_gap_points=n_added,
        volume_per_point_circle_m3=math.pi * radius**2 * thickness * n_e * design_fraction,
        volume_per_point_share_m3=volume / n_points if n_points else math.nan,
    )


def _radius(
    radius_of_influence: float | None,
    volume_per_point: float | None,
    summary: Mapping[str, Any],
) -> float:
    if radius_of_influence is not None:
        return float(radius_of_influence)
    if volume_per_point is None:
        msg = "injection: give radius_of_influence or volume_per_point"
        raise ModelError(msg)
    return radius_for_volume(
        volume_per_point,
        thickness=summary["mean_target_thickness_m"],
        effective_porosity=summary["mean_effective_porosity"],
        design_fraction=summary["design_fraction"],
    )


#: One injection interval: top and bottom elevation, facies code (-1 = none), transmissivity.
_Interval = tuple[float, float, int, float]


@dataclass(frozen=True)
class _Columns:
    """The model columns under the injection points."""

    z: np.ndarray
    dz: float
    ground: np.ndarray
    log10_k: np.ndarray
    codes: np.ndarray
    eff: np.ndarray
    vertical: np.ndarray
    lower: np.ndarray
    upper: np.ndarray

    @classmethod
    def of(
        cls, ds: xr.Dataset, region: Region, codes: np.ndarray, vertical: np.ndarray
    ) -> _Columns:
        ny, nx = ds.sizes["y"], ds.sizes["x"]
        ground = ds["ground_elev"].values if "ground_elev" in ds else np.full((ny, nx), np.nan)
        lower, upper = region.limits(ground)
        eff = effective_porosity_of(codes, ds.voxels.facies_classes)
        dz = ds.voxels.cell_size[2]
        return cls(
            ds["z"].values, dz, ground, ds["log10_k"].values, codes, eff, vertical, lower, upper
        )

    def intervals(self, i: int, j: int) -> tuple[list[_Interval], float, float, str]:
        """Target intervals of column ``(j, i)``, its target thickness, n_e and a note."""
        z, dz = self.z, self.dz
        # the point is inside the zone: its column counts whole, whatever the cell's share
        column_w = self.vertical[:, j, i]
        log10_k = self.log10_k[:, j, i]
        k_col = np.where(np.isfinite(log10_k), 10.0 ** np.nan_to_num(log10_k), 0)
        b_point = float(column_w.sum() * dz)
        ne_point = (
            float((column_w * self.eff[:, j, i]).sum() * dz / b_point) if b_point > 0 else 0.0
        )
        intervals: list[_Interval] = []
        for start, stop in _runs(column_w > 0):
            # split a run where the facies changes, so each interval is one material
            codes_run = self.codes[start:stop, j, i]
            cuts = np.flatnonzero(np.diff(codes_run)) + 1
            for a, b in zip(
                np.concatenate([[0], cuts]), np.concatenate([cuts, [stop - start]]), strict=True
            ):
                lo, hi = start + a, start + b
                w = column_w[lo:hi]
                bottom_elev = z[lo] + dz / 2 - w[0] * dz
                top_elev = z[hi - 1] - dz / 2 + w[-1] * dz
                trans = float((k_col[lo:hi] * w * dz).sum())
                intervals.append((top_elev, bottom_elev, int(codes_run[a]), trans))
        if intervals:
            return intervals, b_point, ne_point, ""
        # no target material under this point: inject over the zone's interval
        top_elev = self.upper[j, i] if np.isfinite(self.upper[j, i]) else self.ground[j, i]
        bottom_elev = self.lower[j, i] if np.isfinite(self.lower[j, i]) else z[0] - dz / 2
        note = "no target material in the model column; whole zone interval"
        return [(top_elev, bottom_elev, -1, 0.0)], b_point, ne_point, note


def _interval_rows(
    point: dict[str, Any],
    intervals: list[_Interval],
    ground: float,
    names: Sequence[str],
    point_volume: float,
    note: str,
) -> list[dict[str, Any]]:
    """Schedule rows of one point, top interval first, volume shared by transmissivity."""
    total_t = sum(t for *_, t in intervals)
    rows = []
    for n, (top_elev, bottom_elev, code, trans) in enumerate(intervals[::-1], start=1):
        share = trans / total_t if total_t > 0 else 1.0 / len(intervals)
        rows.append(
            {
                **point,
                "interval": n,
                "top_depth": float(ground - top_elev),
                "bottom_depth": float(ground - bottom_elev),
                "top_elev": float(top_elev),
                "bottom_elev": float(bottom_elev),
                "facies": names[code] if code >= 0 else "",
                "transmissivity": trans,
                "share": share,
                "volume_m3": point_volume * share,
                "note": note,
            }
        )
    return rows


def _point_tables(
    ds: xr.Dataset,
    columns: _Columns,
    points: np.ndarray,
    n_added: int,
    *,
    zone: str,
    point_volume: Callable[[float, float], float],
) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Points table and per-point schedule (``point_volume(b, n_e)`` sizes each point)."""
    dx, dy, _ = ds.voxels.cell_size
    x, y = ds["x"].values, ds["y"].values
    ix = np.clip(np.round((points[:, 0] - x[0]) / dx).astype(int), 0, len(x) - 1)
    iy = np.clip(np.round((points[:, 1] - y[0]) / dy).astype(int), 0, len(y) - 1)
    names = ds.voxels.facies_classes.names
    n_points = len(points)
    point_rows, schedule_rows = [], []
    for pid, ((px, py), i, j) in enumerate(zip(points, ix, iy, strict=True), start=1):
        intervals, b_point, ne_point, note = columns.intervals(i, j)
        volume = point_volume(b_point, ne_point)
        point = {"zone": zone, "point_id": pid, "x": float(px), "y": float(py)}
        schedule_rows += _interval_rows(point, intervals, columns.ground[j, i], names, volume, note)
        point_rows.append(
            {
                **point,
                "origin": "lattice" if pid <= n_points - n_added else "gap",
                "target_thickness": b_point,
                "transmissivity": sum(t for *_, t in intervals),
                "volume_m3": volume,
            }
        )
    return pd.DataFrame(point_rows), pd.DataFrame(schedule_rows)


def _add_volume_unit(
    points: pd.DataFrame, schedule: pd.DataFrame, summary: dict[str, Any], unit: str
) -> None:
    """Give the volumes also in ``unit`` (such as US gallons)."""
    for frame in (points, schedule):
        if len(frame):
            frame[f"volume_{unit}"] = from_internal(frame["volume_m3"].to_numpy(), unit, "volume")
    summary[f"design_volume_{unit}"] = float(
        from_internal(np.array([summary["design_volume_m3"]]), unit, "volume")[0]
    )


def injection_plan(
    ds: xr.Dataset,
    zone: ZoneLike,
    *,
    design_fraction: float,
    radius_of_influence: float | None = None,
    volume_per_point: float | None = None,
    target: str | Sequence[float] = "transmissive",
    per_point: str = "share",
    volume_unit: str | None = None,
) -> InjectionPlan:
    """Injection plan of one treatment zone.

    Parameters
    ----------
    ds
        The VoxelModel (its facies classes, with their effective porosities, are read from
        its attributes).
    zone
        Zone row (``name``, ``top``, ``bottom``, ``reference``, ``geometry``) or a
        :class:`~geo3d.analysis.volumes.Region` with a polygon.
    design_fraction
        Fraction f of the effective pore volume to inject (0 < f).
    radius_of_influence
        Radius r (m); or give ``volume_per_point`` and r is computed from it.
    volume_per_point
        Volume per point (m3) when no radius is given.
    target
        ``"transmissive"`` (the zone's transmissive material), ``"all"`` (all material of the
        zone), or ``(top_depth, bottom_depth)`` (all material of the zone in that depth range).
    per_point
        ``"share"``: each point gets the design volume divided by the number of points;
        ``"circle"``: each point gets ``pi r^2 b n_e f`` with its own column's b and n_e.
    volume_unit
        Also give volumes in this unit (such as ``"gal"`` for US gallons).

    Returns
    -------
    InjectionPlan

    References
    ----------
    .. [1] Freeze, R.A., Cherry, J.A. (1979) Groundwater. Prentice-Hall, section 2.6: flow into
       layers of a screened interval in proportion to their transmissivity K b.
    """
    ds = require_model(ds)
    region = Region.from_zone(zone)
    polygon = _check_plan(region, design_fraction, per_point)
    weight, colfrac, hfrac = region_weights(ds, region)
    codes = facies_codes(ds)
    spec = _Target.of(ds, region, target, ds.voxels.facies_classes.transmissive)
    summary = _zone_summary(ds, region, spec, (weight, colfrac), codes, design_fraction)
    volume = summary["design_volume_m3"]
    radius = _radius(radius_of_influence, volume_per_point, summary)
    points, n_added = triangular_layout(polygon, radius)
    n_points = len(points)
    _add_layout(summary, radius, n_points, n_added)

    def point_volume(b_point: float, ne_point: float) -> float:
        if per_point == "share":
            return volume / n_points
        return math.pi * radius**2 * b_point * ne_point * design_fraction

    vertical = ds.voxels.mask * hfrac * spec.mask(codes)
    columns = _Columns.of(ds, region, codes, vertical)
    points_df, schedule = _point_tables(
        ds, columns, points, n_added, zone=region.name, point_volume=point_volume
    )
    summary["planned_volume_m3"] = float(points_df["volume_m3"].sum()) if n_points else 0.0
    if volume_unit:
        _add_volume_unit(points_df, schedule, summary, volume_unit)
    crs = ds.attrs.get("crs") or None
    geometry = gpd.points_from_xy(points_df["x"], points_df["y"]) if n_points else []
    points_gdf = gpd.GeoDataFrame(points_df, geometry=geometry, crs=crs)
    logger.info("zone %s: %d points, design volume %.3g m3", region.name, n_points, volume)
    return InjectionPlan(region.name, points_gdf, schedule, summary)
