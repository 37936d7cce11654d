"""Plausibility of where things are: boring coordinates, boundary, treatment zones, layout.

References
----------
.. [1] EPSG Geodetic Parameter Dataset, "area of use" of each coordinate reference system
   (read through :attr:`pyproj.CRS.area_of_use`).
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import numpy as np
import pyproj
from shapely.geometry import Point

from geo3d.checks.findings import Finding
from geo3d.errors import where

__all__ = ["check_coordinates", "check_zones", "check_layout", "area_of_use"]

#: Margin (degrees) around a CRS's area of use within which coordinates are still accepted;
#: projected zones are routinely used a little beyond their nominal edges (common practice).
AREA_MARGIN_DEG = 1.0
#: A boring farther outside the boundary than this many times the boundary's size is refused.
FAR_FACTOR = 10.0
#: Metres per international foot (exact, NIST SP 811).
FOOT = 0.3048


def _file(site: Any, name: str) -> Path:
    path = Path(name)
    return path if path.is_absolute() else Path(site.root) / path


def area_of_use(site: Any) -> tuple[float, float, float, float] | None:
    """Return ``(west, south, east, north)`` in degrees of the site CRS's area of use."""
    for crs in (site.crs, pyproj.CRS.from_user_input(site.config.site.crs)):
        area = getattr(crs, "area_of_use", None)
        if area is not None:
            return (area.west, area.south, area.east, area.north)
    return None


def _inside(lon: np.ndarray, lat: np.ndarray, area: tuple[float, ...]) -> np.ndarray:
    west, south, east, north = area
    m = AREA_MARGIN_DEG
    with np.errstate(invalid="ignore"):
        ok = (lat >= south - m) & (lat <= north + m) & np.isfinite(lon) & np.isfinite(lat)
        if west <= east:
            ok &= (lon >= west - m) & (lon <= east + m)
        else:  # the area crosses the antimeridian
            ok &= (lon >= west - m) | (lon <= east + m)
    return ok


def _to_lonlat(site: Any, x: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    transformer = pyproj.Transformer.from_crs(site.crs, "EPSG:4326", always_xy=True)
    with np.errstate(all="ignore"):
        lon, lat = transformer.transform(x, y, errcheck=False)
    return np.asarray(lon, float), np.asarray(lat, float)


def _finite_rows(site: Any, path: Path) -> tuple[list[Finding], np.ndarray]:
    borings = site.borings
    findings = []
    finite = np.ones(len(borings), bool)
    for column in ("x", "y", "ground_elev"):
        values = borings[column].to_numpy(float)
        bad = ~np.isfinite(values)
        finite &= ~bad
        for i in np.flatnonzero(bad)[:3]:
            findings.append(
                Finding(
                    "error",
                    "non-finite-number",
                    where(path, line=int(i) + 2, column=column),
                    f"{values[i]} for boring {borings['boring_id'].iloc[i]!r}",
                    "a finite number",
                )
            )
    return findings, finite


def check_coordinates(site: Any) -> list[Finding]:
    """Coordinates in degrees, outside the CRS's area of use, swapped, or outside the boundary.

    Also flags one ground elevation far off the others (a collar in feet among metres).
    """
    path = _file(site, site.config.files.borings)
    findings, finite = _finite_rows(site, path)
    borings = site.borings[finite]
    if borings.empty:
        return findings
    x, y = borings["x"].to_numpy(float), borings["y"].to_numpy(float)
    first = where(path, line=int(np.flatnonzero(finite)[0]) + 2, column="x, y")
    crs_name = site.crs.name
    area = area_of_use(site)
    if np.all(np.abs(x) <= 180) and np.all(np.abs(y) <= 90) and not site.crs.is_geographic:
        found = f"every boring has |x| <= 180 and |y| <= 90 (first {x[0]:g}, {y[0]:g})"
        expected = (
            f"coordinates in the projected site CRS {crs_name} ([site] crs); these look like "
            "longitude and latitude in degrees: project them first"
        )
        return [*findings, Finding("error", "coordinates-geographic", first, found, expected)]
    if area is not None:
        lon, lat = _to_lonlat(site, x, y)
        out = ~_inside(lon, lat, area)
        if out.any():
            lon_s, lat_s = _to_lonlat(site, y, x)
            swapped = bool(_inside(lon_s, lat_s, area).all())
            i = int(np.flatnonzero(out)[0])
            place = where(path, line=int(np.flatnonzero(finite)[i]) + 2, column="x, y")
            found = (
                f"{int(out.sum())} of {out.size} borings outside the area of use of {crs_name} "
                f"(first {borings['boring_id'].iloc[i]!r} at {x[i]:.1f}, {y[i]:.1f}; area "
                f"{area[0]:g} to {area[2]:g} degrees east, {area[1]:g} to {area[3]:g} north)"
            )
            if swapped:
                check, expected = "xy-swapped", "x (easting) and y (northing) in their columns"
                expected += "; with x and y swapped every boring falls inside: swap the columns"
            else:
                check = "outside-crs-area"
                expected = "coordinates in the declared [site] crs; check the CRS and the units"
            return [*findings, Finding("error", check, place, found, expected)]
    findings += _boundary_findings(site, path, borings)
    findings += _ground_outliers(path, borings, np.flatnonzero(finite))
    return findings


def _boundary_findings(site: Any, path: Path, borings: Any) -> list[Finding]:
    boundary = site.boundary
    if boundary is None or not site.config.files.boundary.strip():
        return []
    points = [Point(x, y) for x, y in zip(borings["x"], borings["y"], strict=True)]
    inside = np.array([boundary.covers(p) for p in points])
    minx, miny, maxx, maxy = boundary.bounds
    size = max(maxx - minx, maxy - miny, 1.0)
    # a boring a little outside is only warned about when the site is read; one more than ten
    # times the boundary's size away is a typing or CRS mistake
    far = np.array([boundary.distance(p) > FAR_FACTOR * size for p in points])
    boundary_file = _file(site, site.config.files.boundary)
    if inside.any() and not far.any():
        return []
    if inside.any():
        name = borings["boring_id"].iloc[int(np.flatnonzero(far)[0])]
        what = f"boring {name!r} lies far outside"
    else:
        what = "no boring lies inside"
    found = (
        f"{what} the boundary ({boundary_file.name}, {minx:.1f} to {maxx:.1f} east, {miny:.1f} to "
        f"{maxy:.1f} north)"
    )
    expected = (
        "borings inside or near the site boundary: check that the boundary and the borings "
        "are in the same CRS and that x and y are not swapped"
    )
    first = int(np.flatnonzero(far if inside.any() else ~inside)[0])
    place = where(path, line=int(borings.index[first]) + 2, column="x, y")
    return [Finding("error", "borings-outside-boundary", place, found, expected)]


def _ground_outliers(path: Path, borings: Any, rows: np.ndarray) -> list[Finding]:
    z = borings["ground_elev"].to_numpy(float)
    if z.size < 3:
        return []
    findings = []
    for i in range(z.size):
        others = np.delete(z, i)
        median = float(np.median(others))
        spread = 1.4826 * float(np.median(np.abs(others - median)))
        if abs(z[i] - median) <= max(10.0, 10.0 * spread):
            continue
        ratio = z[i] / median if abs(median) > 3.0 else np.nan
        feet = abs(ratio - 1 / FOOT) < 0.1 / FOOT or abs(ratio - FOOT) < 0.1 * FOOT
        place = where(path, line=int(rows[i]) + 2, column="ground_elev")
        found = (
            f"ground elevation {z[i]:g} m of boring {borings['boring_id'].iloc[i]!r} is far from "
            f"the others (median {median:g} m)"
        )
        if feet:
            found += f", {ratio:.2f} times the median, the ratio of a foot to a metre"
            expected = "every ground elevation in [units] length: convert this one"
            findings.append(Finding("error", "ground-elev-units", place, found, expected))
        else:
            expected = "ground elevations within a few metres of each other on one site"
            findings.append(Finding("warning", "ground-elev-outlier", place, found, expected))
    return findings


def _layer_crs(path: Path) -> pyproj.CRS | None:
    try:
        import pyogrio

        info = pyogrio.read_info(path)
        return pyproj.CRS.from_user_input(info["crs"]) if info.get("crs") else None
    except Exception:  # the reader already accepted the file; its CRS is only a hint here
        return None


def check_zones(site: Any) -> list[Finding]:
    """Treatment zones outside the site, barely overlapping it, or declared in another CRS."""
    zones = site.zones
    if zones is None or len(zones) == 0 or site.boundary is None:
        return []
    path = _file(site, site.config.files.zones)
    declared = pyproj.CRS.from_user_input(site.config.site.crs)
    layer_crs = _layer_crs(path)
    other_crs = layer_crs is not None and not layer_crs.equals(declared)
    layer_name = layer_crs.name if layer_crs is not None else ""
    findings = []
    if other_crs:
        found = f"the zones are in {layer_name}, the site in {declared.name}"
        expected = "zones in the site CRS; they were reprojected, check that they sit right"
        findings.append(Finding("warning", "zones-crs", where(path), found, expected))
    for row, (name, geometry) in enumerate(zip(zones["name"], zones.geometry, strict=True)):
        if geometry is None or geometry.is_empty or geometry.area <= 0:
            continue
        share = geometry.intersection(site.boundary).area / geometry.area
        place = f"{path}, feature {row + 1} ({name!r})"
        if share <= 0:
            found = "the zone lies outside the site boundary"
            if other_crs:
                found += f" (its layer is in {layer_name}, not the site CRS)"
            expected = "zones inside the site; check the zone layer's CRS and coordinates"
            findings.append(Finding("error", "zone-outside-site", place, found, expected))
        elif share < 0.1:
            found = f"only {100 * share:.1f} % of the zone lies inside the site boundary"
            expected = "zones mostly inside the site (volumes are computed inside it only)"
            findings.append(Finding("warning", "zone-barely-overlaps", place, found, expected))
    return findings


def check_layout(site: Any) -> list[Finding]:
    """Fewer than three borings, all at one point, or all on one line: no 3D model."""
    path = _file(site, site.config.files.borings)
    borings = site.borings
    xy = borings[["x", "y"]].to_numpy(float)
    xy = xy[np.isfinite(xy).all(axis=1)]
    place = where(path, column="x, y")
    n = len(xy)
    if n < 3:
        found = f"{n} boring{'s' if n != 1 else ''}"
        expected = "at least 3 borings, not on one line, for a 3D model"
        return [Finding("error", "too-few-borings", place, found, expected)]
    centred = xy - xy.mean(axis=0)
    singular = np.linalg.svd(centred, compute_uv=False)
    if singular[0] < 1e-6:
        found = f"all {n} borings at one point ({xy[0, 0]:.2f}, {xy[0, 1]:.2f})"
        expected = "borings spread over the site; check the x and y columns"
        return [Finding("error", "coincident-borings", place, found, expected)]
    if singular[1] / singular[0] < 0.01:
        width = 2.0 * singular[1] / np.sqrt(n)
        found = f"all {n} borings lie on one line (spread across it about {width:.2g} m)"
        expected = (
            "borings spread in two horizontal directions: a 3D model cannot be kriged from a "
            "single line of borings (model a 2D section instead)"
        )
        return [Finding("error", "collinear-borings", place, found, expected)]
    return []
