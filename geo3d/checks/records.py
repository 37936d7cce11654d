"""Plausibility of the dissipation tests and slug tests, and of depth and pressure units.

References
----------
.. [1] NIST SP 811 (2008): standard gravity 9.80665 m/s2; the unit weight of fresh water is
   then 9.80665 kPa/m, the hydrostatic pressure gradient below a water table.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any, Literal

import numpy as np
import pandas as pd

from geo3d.checks.findings import Finding
from geo3d.errors import where
from geo3d.units import factor as unit_factor

__all__ = ["check_dissipation", "check_slug_tests", "check_hydrostatic", "GAMMA_W"]

#: Unit weight of water, kPa/m (NIST SP 811, standard gravity).
GAMMA_W = 9.80665
#: Depth tolerance (m) between a test and the logged depths of its boring.
DEPTH_TOLERANCE = 0.1
#: Unit ratios that betray a mix-up: ft/m and psi/kPa (NIST SP 811).
_UNIT_RATIOS = {"a foot to a metre": 1 / 0.3048, "a kPa to a psi": 6.894757}


def _file(site: Any, name: str) -> Path:
    path = Path(name)
    return path if path.is_absolute() else Path(site.root) / path


def _first_lines(path: Path) -> dict[tuple[str, float], int]:
    """Map (boring id, depth as written) of each dissipation test to its first file line."""
    try:
        raw = pd.read_csv(path, dtype=str, skipinitialspace=True)
    except Exception:  # the reader accepted the file; lines are only a help here
        return {}
    raw.columns = [str(c).strip().lower() for c in raw.columns]
    lines: dict[tuple[str, float], int] = {}
    for i, (boring, depth) in enumerate(
        zip(raw.get("boring_id", []), raw.get("depth", []), strict=False)
    ):
        try:
            key = (str(boring).strip(), round(float(depth), 6))
        except ValueError:
            continue
        lines.setdefault(key, i + 2)
    return lines


def _log_ranges(site: Any) -> pd.DataFrame:
    return site.samples.groupby("boring_id")["depth"].agg(["min", "max"])


def check_dissipation(site: Any) -> list[Finding]:
    """Dissipation records too short, rising, or deeper than the log of their boring."""
    table = site.dissipation
    if table is None or table.empty:
        return []
    path = _file(site, site.config.files.dissipation)
    lines = _first_lines(path)
    ranges = _log_ranges(site)
    noise = float(site.config.probe.sensor_noise)
    scale = unit_factor(site.config.units.length, "length")  # m per declared length unit
    findings = []
    for _, test in table.groupby("test_id", sort=True):
        boring, depth = str(test["boring_id"].iloc[0]), float(test["depth"].iloc[0])
        line = lines.get((boring, round(depth / scale, 6)))
        label = f"the test of boring {boring!r} at {depth:g} m"

        def add(level, check, column, found, expected, *, line=line):
            findings.append(
                Finding(level, check, where(path, line=line, column=column), found, expected)
            )

        pressure = test["pressure"].to_numpy(float)
        if len(test) < 3:
            found = f"{label} has {len(test)} reading{'s' if len(test) != 1 else ''}"
            add("error", "dissipation-too-short", "time_s", found, "at least 3 readings per test")
        elif np.all(np.diff(pressure) >= -noise) and pressure[-1] - pressure[0] > 3 * noise:
            found = f"in {label} the pressure rises from {pressure[0]:g} to {pressure[-1]:g} kPa"
            expected = "pressure falling towards the static value after injection stops"
            add("error", "dissipation-rising", "pressure", found, expected)
        if boring in ranges.index and depth > ranges.loc[boring, "max"] + DEPTH_TOLERANCE:
            found = f"{label} lies below the log, which ends at {ranges.loc[boring, 'max']:g} m"
            expected = "tests at depths the boring's log reached"
            add("error", "dissipation-below-log", "depth", found, expected)
    return findings


def check_slug_tests(site: Any) -> list[Finding]:
    """Slug-test screens outside the logged depths of their boring."""
    table = site.slug_tests
    if table is None or table.empty:
        return []
    path = _file(site, site.config.files.slug_tests)
    ranges = _log_ranges(site)
    findings = []
    for i, row in enumerate(table.itertuples(index=False)):
        if row.boring_id not in ranges.index:
            continue
        low, high = ranges.loc[row.boring_id, "min"], ranges.loc[row.boring_id, "max"]
        place = where(path, line=i + 2, column="top_depth, bottom_depth")
        screen = (
            f"the screen {row.top_depth:g} to {row.bottom_depth:g} m of boring {row.boring_id!r}"
        )
        logged = f"the log covers {low:g} to {high:g} m"
        level: Literal["error", "warning"]
        if row.top_depth >= high + DEPTH_TOLERANCE or row.bottom_depth <= low - DEPTH_TOLERANCE:
            found, level, check = (
                f"{screen} lies outside the log ({logged})",
                "error",
                "slug-outside-log",
            )
        elif row.top_depth < low - DEPTH_TOLERANCE or row.bottom_depth > high + DEPTH_TOLERANCE:
            found, level, check = (
                f"{screen} reaches beyond the log ({logged})",
                "warning",
                "slug-partly-outside-log",
            )
        else:
            continue
        expected = "slug-test screens within the logged depths (K is calibrated against the log)"
        findings.append(Finding(level, check, place, found, expected))
    return findings


def _pooled_slope(last: pd.DataFrame, borings: pd.DataFrame) -> float | None:
    """Return the pressure gradient (kPa/m of depth) of the tests' last readings.

    Within a boring the water table is one depth, so the slope of pressure against depth is
    pooled over borings with tests at several depths; without such a boring, the slope of
    pressure against elevation across borings is used (the water table is nearly flat).
    """
    depth = last["depth"].to_numpy(float)
    pressure = last["pressure"].to_numpy(float)
    groups = last["boring_id"].to_numpy()
    ok = np.isfinite(depth) & np.isfinite(pressure)
    frame = pd.DataFrame({"b": groups[ok], "d": depth[ok], "p": pressure[ok]})
    centred = frame[["d", "p"]] - frame.groupby("b")[["d", "p"]].transform("mean")
    spread = float((centred["d"] ** 2).sum())
    if spread >= 0.25:
        return float((centred["d"] * centred["p"]).sum() / spread)
    collars = borings.set_index("boring_id")["ground_elev"]
    elev = collars.reindex(frame["b"]).to_numpy(float) - frame["d"].to_numpy()
    good = np.isfinite(elev)
    if good.sum() < 2 or np.ptp(elev[good]) < 0.5:
        return None
    return float(-np.polyfit(elev[good], frame["p"].to_numpy()[good], 1)[0])


def check_hydrostatic(site: Any) -> list[Finding]:
    """Compare the end pressures of dissipation tests with the hydrostatic gradient.

    Below the water table the static pressure grows by the unit weight of water per metre of
    depth [1]_. Fitting the last reading of each test against its elevation gives that gradient
    when depths and pressures are in their declared units; a ratio near 3.28 or 6.89 (or their
    inverses) betrays lengths in the wrong one of m and ft, or pressures in kPa and psi.
    """
    table = site.dissipation
    if table is None or table.empty or site.borings is None:
        return []
    last = table.groupby("test_id").tail(1)
    slope = _pooled_slope(last, site.borings)
    if slope is None:
        return []
    n_tests = len(last)
    ratio = slope / GAMMA_W
    path = _file(site, site.config.files.dissipation)
    place = where(path, column="depth, pressure")
    found = (
        f"the last readings of {n_tests} tests rise by {slope:.3g} kPa per m of depth, "
        f"{ratio:.2f} times the hydrostatic {GAMMA_W} kPa/m"
    )
    for what, factor in _UNIT_RATIOS.items():
        if abs(ratio / factor - 1) < 0.2 or abs(ratio * factor - 1) < 0.2:
            expected = (
                f"about {GAMMA_W} kPa/m; the ratio is that of {what}: check [units] length and "
                "[units] pressure against the data"
            )
            return [Finding("error", "units-hydrostatic", place, found, expected)]
    if not 0.5 <= ratio <= 2.0:
        expected = f"about {GAMMA_W} kPa/m (tests not yet at equilibrium, or a unit mix-up)"
        return [Finding("warning", "hydrostatic-gradient", place, found, expected)]
    return []
