"""Plausibility of the injection logs: physical ranges, dead sensors, nulls, units, truncation.

Typical values are those of direct-push injection logging, all common practice: a probe
injects roughly 50 to 800 mL/min of water, and pushes rarely go beyond 30 to 40 m.
"""

from __future__ import annotations

import os
from pathlib import Path
from typing import Any

import numpy as np

from geo3d.checks.findings import Finding
from geo3d.errors import where
from geo3d.units import from_internal

__all__ = ["check_log_values", "check_log_files", "check_depths", "NULL_MARKERS"]

#: Values that logging programs write for "no reading" (the LAS 2.0 default NULL is -999.25;
#: -9999 and -999 are common elsewhere; common practice).
NULL_MARKERS = (-999.25, -999.0, -9999.0, -99999.0, 9999.0, 99999.0)
#: Plausible median injection flow of a direct-push probe, m3/s: 1 mL/min to 10 L/min, a wide
#: band around the usual 50 to 800 mL/min (common practice).
FLOW_RANGE = (1e-6 / 60.0, 10e-3 / 60.0)
#: Depth (m) beyond which a direct-push log is unusual (common practice).
TYPICAL_MAX_PUSH = 60.0

_QUANTITY = {"depth": "length", "pressure": "pressure", "flow": "flow", "ec": "ec"}


def _header_info(path: Path, header_rows: int) -> tuple[int, str | None]:
    """Return the line of the first data row of a log and, for LAS, its declared NULL."""
    if path.suffix.lower() != ".las":
        return header_rows + 2, None
    null = None
    with path.open(encoding="utf-8", errors="replace") as handle:
        for number, text in enumerate(handle, start=1):
            stripped = text.strip()
            if stripped.upper().startswith("NULL") and ":" in stripped:
                value = stripped.split(":", 1)[0].split(".", 1)[-1].strip()
                null = value or null
            if stripped.upper().startswith("~A"):
                return number + 1, null
    return 1, null


def _declared(site: Any, key: str, values: np.ndarray) -> np.ndarray:
    if key == "time_s":
        return values
    unit = getattr(site.config.units, key if key != "depth" else "length")
    return np.asarray(from_internal(values, unit, _QUANTITY[key]), float)


def _names(site: Any) -> dict[str, str]:
    logs = site.config.logs
    names = {"depth": logs.depth, "pressure": logs.pressure, "flow": logs.flow, "ec": logs.ec}
    if logs.time:
        names["time_s"] = logs.time
    return names


def _per_log(site: Any):
    """Yield ``(boring_id, file, first data line, LAS NULL or None, samples)`` per log."""
    samples = site.samples
    files = getattr(site, "log_files", {}) or {}
    for boring_id, group in samples.groupby("boring_id", sort=True):
        path = Path(files.get(boring_id, f"log of boring {boring_id}"))
        first, null = (2, None)
        if path.is_file():
            first, null = _header_info(path, site.config.logs.header_rows)
        yield boring_id, path, first, null, group


def check_log_values(site: Any) -> list[Finding]:
    """Non-finite, negative, constant or null-marker values, zero flow, implausible flows."""
    findings: list[Finding] = []
    names = _names(site)
    noise = float(site.config.probe.sensor_noise)
    for _, path, first, null, group in _per_log(site):

        def add(
            level, check, column, row, found, expected, *, path=path, first=first, out=findings
        ):
            line = None if row is None or path.suffix.lower() == ".las" else first + row
            place = where(path, line=line, column=column)
            if row is not None and line is None:
                place += f", data row {row + 1}"
            out.append(Finding(level, check, place, found, expected))

        for key, column in names.items():
            if key not in group:
                continue
            values = group[key].to_numpy(float)
            declared = _declared(site, key, values)
            marker = np.isin(np.round(declared, 6), NULL_MARKERS)
            if marker.any():
                row = int(np.flatnonzero(marker)[0])
                what = f"the file declares NULL {null}" if null else "no NULL is declared"
                found = (
                    f"{int(marker.sum())} values equal to {declared[row]:g}, a common null marker"
                )
                expected = f"real readings or empty cells ({what}: declare the null value used)"
                add("error", "null-marker", column, row, found, expected)
                continue
            infinite = np.isinf(values)
            if infinite.any():
                row = int(np.flatnonzero(infinite)[0])
                add("error", "non-finite-number", column, row, f"{values[row]}", "finite readings")
        _range_findings(site, group, names, noise, add)
    return findings


def _range_findings(site: Any, group: Any, names: dict[str, str], noise: float, add) -> None:
    pressure = group["pressure"].to_numpy(float)
    flow = group["flow"].to_numpy(float)
    ec = group["ec"].to_numpy(float)
    n = len(group)
    finite_p = pressure[np.isfinite(pressure)]
    if n >= 5 and finite_p.size and np.ptp(finite_p) == 0:
        found = f"the pressure is {finite_p[0]:g} kPa at every one of {n} depths"
        add("error", "constant-pressure", names["pressure"], None, found, "a working sensor")
    if site.config.units.pressure_reference == "gauge":
        low = pressure < -(3.0 * noise + 5.0)
        if low.any():
            row = int(np.flatnonzero(low)[0])
            found = f"gauge pressure {pressure[row]:g} kPa, below zero by more than the noise"
            add("error", "negative-pressure", names["pressure"], row, found, "pressure >= 0")
    if np.all(flow[np.isfinite(flow)] == 0):
        found = f"the flow is zero at every one of {n} depths"
        expected = "an injection flow (no K can be computed without one)"
        add("error", "zero-flow", names["flow"], None, found, expected)
    else:
        findings_flow(site, flow, names, add)
    negative = ec < 0
    if negative.any():
        row = int(np.flatnonzero(negative)[0])
        add("error", "negative-ec", names["ec"], row, f"EC {ec[row]:g} mS/m", "EC >= 0")
    finite_ec = ec[np.isfinite(ec)]
    if n >= 5 and finite_ec.size == n and np.ptp(finite_ec) == 0 and finite_ec[0] != 0:
        found = f"the EC is {finite_ec[0]:g} mS/m at every one of {n} depths"
        add("warning", "constant-ec", names["ec"], None, found, "a working EC sensor")


def findings_flow(site: Any, flow: np.ndarray, names: dict[str, str], add) -> None:
    """Flag a median flow outside what a probe injects (a L/min vs mL/min mix-up)."""
    positive = flow[np.isfinite(flow) & (flow > 0)]
    if positive.size == 0:
        return
    median = float(np.median(positive))
    unit = site.config.units.flow
    shown = float(from_internal(median, unit, "flow"))
    per_min = median * 60e6
    low, high = FLOW_RANGE
    if median > high:
        found = (
            f"median flow {shown:g} {unit} = {per_min / 1000:g} L/min, more than a direct-push "
            "probe injects"
        )
        expected = (
            f"about 0.05 to 0.8 L/min (common practice); if the logger records mL/min, set "
            f'[units] flow = "mL/min" (K would be {median / high:.0f} times too high)'
        )
        add("error", "flow-units", names["flow"], None, found, expected)
    elif median < low:
        found = f"median flow {shown:g} {unit} = {per_min:.3g} mL/min, less than a probe injects"
        expected = "about 50 to 800 mL/min (common practice): check [units] flow"
        add("warning", "flow-units", names["flow"], None, found, expected)


def _tail_lines(path: Path, size: int = 4096) -> tuple[list[str], bool]:
    with path.open("rb") as handle:
        handle.seek(0, os.SEEK_END)
        end = handle.tell()
        handle.seek(max(0, end - size))
        data = handle.read()
    text = data.decode("utf-8", errors="replace")
    lines = [line for line in text.splitlines() if line.strip()]
    if end > size:
        lines = lines[1:]  # the first line read may be partial
    return lines, text.endswith(("\n", "\r"))


def _count_lines(path: Path) -> int:
    count = 0
    with path.open("rb") as handle:
        while chunk := handle.read(1 << 22):
            count += chunk.count(b"\n")
    return count + 1


def _fields(line: str, delimiter: str | None) -> list[str]:
    return [f.strip() for f in (line.split(delimiter) if delimiter else line.split())]


def _decimals(text: str) -> int:
    mantissa = text.lower().split("e")[0]
    return len(mantissa.split(".", 1)[1]) if "." in mantissa else 0


def _cut_field(last: list[str], before: list[list[str]]) -> int | None:
    """Return the index of a last-line field that looks cut short, or None."""
    for j, text in enumerate(last):
        above = [b[j] for b in before if j < len(b) and b[j]]
        if len(above) < 3:
            continue
        decimals = [_decimals(a) for a in above]
        usual = max(set(decimals), key=decimals.count)
        if not text or _decimals(text) < usual or len(text) < min(len(a) for a in above):
            return j
    return None


def check_log_files(site: Any) -> list[Finding]:
    """Flag a last line cut short (fewer fields or digits than its neighbours, no final newline).

    A file whose last line lacks its newline was probably cut while being copied; its last
    line then has fewer fields, or a last number with fewer digits than the same column above.
    """
    findings: list[Finding] = []
    for _, path, _, _, _ in _per_log(site):
        if not path.is_file():
            continue
        lines, ends_clean = _tail_lines(path)
        if ends_clean or len(lines) < 4:
            continue
        delimiter = None if path.suffix.lower() == ".las" else site.config.logs.delimiter
        last = _fields(lines[-1], delimiter)
        before = [_fields(line, delimiter) for line in lines[-21:-1]]
        usual = max({len(b) for b in before}, key=[len(b) for b in before].count)
        line = _count_lines(path)
        expected = "complete lines: the file looks cut short (copy it again)"
        if len(last) < usual:
            found = f"the last line has {len(last)} fields, the lines before {usual}"
            place = where(path, line=line)
            findings.append(Finding("error", "truncated-line", place, found, expected))
            continue
        j = _cut_field(last, before)
        if j is not None:
            found = (
                f"the last value {last[j]!r} has fewer digits than the same column above "
                f"({before[-1][j]!r}) and the file has no final newline"
            )
            place = where(path, line=line, column=f"field {j + 1}")
            findings.append(Finding("warning", "truncated-number", place, found, expected))
    return findings


def check_depths(site: Any) -> list[Finding]:
    """Flag a log much deeper than the others (units?) or deeper than direct push usually goes."""
    findings: list[Finding] = []
    samples = site.samples
    if samples.empty:
        return findings
    deepest = samples.groupby("boring_id")["depth"].max()
    files = getattr(site, "log_files", {}) or {}
    column = site.config.logs.depth
    unit = site.config.units.length
    for boring_id, depth in deepest.items():
        place = where(files.get(boring_id, f"log of boring {boring_id}"), column=column)
        others = deepest.drop(boring_id)
        if len(others) >= 2:
            ratio = depth / float(np.median(others))
            if 2.9 <= ratio <= 3.7 or 0.27 <= ratio <= 0.345:
                found = (
                    f"the log reaches {depth:.1f} m, {ratio:.2f} times the median of the other "
                    f"logs ({float(np.median(others)):.1f} m), about the ratio of a metre to a foot"
                )
                expected = f"depths in [units] length = {unit!r} in every log"
                findings.append(Finding("warning", "log-depth-units", place, found, expected))
                continue
        if depth > TYPICAL_MAX_PUSH:
            found = f"the log reaches {depth:.1f} m"
            expected = (
                f"direct-push depths up to about {TYPICAL_MAX_PUSH:g} m (common practice): check "
                f"[units] length = {unit!r}"
            )
            findings.append(Finding("warning", "deep-log", place, found, expected))
    return findings
