"""A table of broken site folders: one mutation of the mini site per case, with its outcome.

Each :class:`Case` changes a fresh copy of the mini site (``tests/conftest.py``) and states
what ``geo3d check`` must do: refuse it (exit code 2) with a message naming the file, the line
or row, and the column, plus the text given; or accept it (exit code 0) with a named warning.
The values planted are invented; the outcomes follow from the checks' documented rules.
"""

from __future__ import annotations

import json
import re
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path

from conftest import MINI_BORINGS, mini_log, polygon_feature, write_geojson

__all__ = ["Case", "CASES", "write_las"]


@dataclass(frozen=True)
class Case:
    """One broken site.

    Attributes
    ----------
    name
        Test id.
    mutate
        Changes the site folder in place.
    outcome
        ``"error"`` (refused by check, exit 2) or ``"warning"`` (accepted, exit 0).
    texts
        Each must appear in the output (for example the check name ``[flow-units]``).
    place
        Text naming the file (refused cases), such as ``"B2.csv"``.
    located
        A refused case's message must also name a line, row or feature and a column.
    """

    name: str
    mutate: Callable[[Path], None]
    outcome: str
    texts: tuple[str, ...] = ()
    place: str = ""
    located: bool = True
    tags: tuple[str, ...] = field(default_factory=tuple)


# --------------------------------------------------------------------------- mutation helpers


def replace(name: str, old: str, new: str, count: int = 1) -> Callable[[Path], None]:
    def mutate(root: Path) -> None:
        path = root / name
        text = path.read_text()
        assert old in text, (name, old)
        path.write_text(text.replace(old, new, count))

    return mutate


def sub(name: str, pattern: str, new: str) -> Callable[[Path], None]:
    def mutate(root: Path) -> None:
        path = root / name
        text, n = re.subn(pattern, new, path.read_text(), flags=re.MULTILINE)
        assert n, (name, pattern)
        path.write_text(text)

    return mutate


def setting(section: str, key: str, value: str) -> Callable[[Path], None]:
    """Set ``key = value`` in ``[section]`` of site.toml (adding the section if needed)."""

    def mutate(root: Path) -> None:
        path = root / "site.toml"
        text = path.read_text()
        line = re.compile(rf"^{re.escape(key)}\s*=.*$", re.MULTILINE)
        header = f"[{section}]"
        if header in text:
            start = text.index(header)
            end = text.find("\n[", start + 1)
            end = len(text) if end < 0 else end
            block = text[start:end]
            block = (
                line.sub(f"{key} = {value}", block)
                if line.search(block)
                else block.rstrip("\n") + f"\n{key} = {value}\n"
            )
            text = text[:start] + block + text[end:]
        else:
            text += f"\n{header}\n{key} = {value}\n"
        path.write_text(text)

    return mutate


def both(*mutations: Callable[[Path], None]) -> Callable[[Path], None]:
    def mutate(root: Path) -> None:
        for m in mutations:
            m(root)

    return mutate


def write(name: str, text: str) -> Callable[[Path], None]:
    def mutate(root: Path) -> None:
        (root / name).parent.mkdir(parents=True, exist_ok=True)
        (root / name).write_text(text)

    return mutate


def delete(name: str) -> Callable[[Path], None]:
    def mutate(root: Path) -> None:
        (root / name).unlink()

    return mutate


def log_column(boring: str, column: str, fn: Callable[[list[str]], list[str]]):
    """Rewrite one column of a mini-site CSV log with ``fn(values as text)``."""

    def mutate(root: Path) -> None:
        path = root / "logs" / f"{boring}.csv"
        lines = path.read_text().splitlines()
        header = lines[0].split(",")
        j = header.index(column)
        rows = [line.split(",") for line in lines[1:]]
        values = fn([r[j] for r in rows])
        for r, v in zip(rows, values, strict=True):
            r[j] = v
        path.write_text("\n".join([lines[0], *(",".join(r) for r in rows)]) + "\n")

    return mutate


def fixed_format_log(boring: str, *, cut: int | None = None, drop_fields: int = 0):
    """Write a log with fixed decimals; optionally cut the last line short (no final newline)."""

    def mutate(root: Path) -> None:
        v = mini_log(boring)
        lines = ["depth,pressure,flow,ec,time"]
        for row in zip(v["depth"], v["pressure"], v["flow"], v["ec"], v["time"], strict=True):
            lines.append(",".join(f"{x:.3f}" for x in row))
        last = lines[-1]
        if drop_fields:
            last = ",".join(last.split(",")[:-drop_fields])
        if cut:
            last = last[:-cut]
        lines[-1] = last
        (root / "logs" / f"{boring}.csv").write_text("\n".join(lines))

    return mutate


def write_las(path: Path, boring: str, *, null: str | None = "-999.25", value=None) -> None:
    """Write a mini-site log as LAS 2.0; ``value(i, row)`` may replace a data row."""
    v = mini_log(boring)
    head = [
        "~Version Information",
        " VERS.   2.0 : CWLS LOG ASCII STANDARD - VERSION 2.0",
        " WRAP.   NO  : ONE LINE PER DEPTH STEP",
        "~Well Information",
        f" WELL.   {boring} : WELL",
    ]
    if null is not None:
        head.append(f" NULL.   {null} : NULL VALUE")
    head += [
        "~Curve Information",
        " DEPTH.m : depth",
        " PRESSURE.kPa : pressure",
        " FLOW.mL/min : flow",
        " EC.mS/m : ec",
        " TIME.s : time",
        "~ASCII",
    ]
    rows = []
    for i, row in enumerate(
        zip(v["depth"], v["pressure"], v["flow"], v["ec"], v["time"], strict=True)
    ):
        values = list(row) if value is None else value(i, list(row))
        rows.append(" ".join(f"{x:.3f}" for x in values))
    path.write_text("\n".join(head + rows) + "\n")


def las_log(boring: str, **kwargs):
    def mutate(root: Path) -> None:
        (root / "logs" / f"{boring}.csv").unlink()
        write_las(root / "logs" / f"{boring}.las", boring, **kwargs)
        setting("files", "logs", '["logs/*.csv", "logs/*.las"]')(root)
        setting("logs", "depth", '"depth"')(root)

    return mutate


def add_dissipation(rows: list[str]) -> Callable[[Path], None]:
    def mutate(root: Path) -> None:
        path = root / "dissipation.csv"
        path.write_text(path.read_text() + "\n".join(rows) + "\n")

    return mutate


def borings(rows: dict[str, tuple[float, float, float]]) -> Callable[[Path], None]:
    def mutate(root: Path) -> None:
        lines = ["boring_id,x,y,ground_elev"]
        lines += [f"{b},{x!r},{y!r},{z!r}" for b, (x, y, z) in rows.items()]
        (root / "borings.csv").write_text("\n".join(lines) + "\n")

    return mutate


def only_borings(*keep: str) -> Callable[[Path], None]:
    """Keep only some borings (their logs, tests and checks too)."""

    def mutate(root: Path) -> None:
        borings({b: MINI_BORINGS[b] for b in keep})(root)
        for b in MINI_BORINGS:
            if b not in keep:
                (root / "logs" / f"{b}.csv").unlink()
        for name in ("dissipation.csv", "slug_tests.csv", "sensor_checks.csv"):
            path = root / name
            lines = path.read_text().splitlines()
            kept = [lines[0]] + [x for x in lines[1:] if x.split(",")[0] in keep]
            path.write_text("\n".join(kept) + "\n")
        if "B1" not in keep and "B2" not in keep:
            setting("water", "depth_to_water", "1.5")(root)

    return mutate


def moved(**xy: tuple[float, float]) -> Callable[[Path], None]:
    rows = dict(MINI_BORINGS)
    for b, (x, y) in xy.items():
        rows[b] = (x, y, MINI_BORINGS[b][2])
    return borings(rows)


def zones(ring: list[list[float]], *, epsg: int = 32631) -> Callable[[Path], None]:
    def mutate(root: Path) -> None:
        feature = polygon_feature(ring, name="Z1", top=1.0, bottom=2.5, reference="depth")
        write_geojson(root / "zones.geojson", [feature], epsg=epsg)

    return mutate


def _square(x0, y0, x1, y1):
    return [[x0, y0], [x1, y0], [x1, y1], [x0, y1], [x0, y0]]


def zones_in_wgs84(root: Path) -> None:
    import pyproj

    to = pyproj.Transformer.from_crs("EPSG:32631", "EPSG:4326", always_xy=True)
    ring = [list(to.transform(x, y)) for x, y in _square(500000, 5000000, 500050, 5000050)]
    feature = polygon_feature(ring, name="Z1", top=1.0, bottom=2.5, reference="depth")
    (root / "zones.geojson").write_text(
        json.dumps({"type": "FeatureCollection", "features": [feature]})
    )


def _scaled(factor: float, offset: float = 0.0):
    return lambda values: [f"{float(v) * factor + offset:.4f}" for v in values]


def _all(value: str):
    return lambda values: [value] * len(values)


def _at(index: int, value: str):
    def fn(values: list[str]) -> list[str]:
        values = list(values)
        values[index] = value
        return values

    return fn


def _swap_xy(root: Path) -> None:
    borings({b: (y, x, z) for b, (x, y, z) in MINI_BORINGS.items()})(root)


def _degrees(root: Path) -> None:
    borings(
        {
            b: (3.0 + i * 1e-4, 45.1 + i * 1e-4, z)
            for i, (b, (_, _, z)) in enumerate(MINI_BORINGS.items())
        }
    )(root)


def _no_boundary(root: Path) -> None:
    setting("files", "boundary", '""')(root)
    setting("files", "zones", '""')(root)


def _dissipation_test(boring: str, depth: float, pressures: list[float]) -> list[str]:
    return [f"{boring},{depth},{30.0 * i},{p:.3f}" for i, p in enumerate(pressures)]


# --------------------------------------------------------------------------- the cases

E, W = "error", "warning"
#: A short, valid log (invented values: kPa absolute, mL/min, mS/m, s).
SHORT_LOG = "depth,pressure,flow,ec,time\n0.5,150,300,20,25\n1.0,151,300,21,50\n"
_B = "borings.csv"
_D = "dissipation.csv"
_S = "slug_tests.csv"
_T = "site.toml"


def refused(name: str, mutate: Callable[[Path], None], place: str, *texts: str) -> Case:
    """A case refused with a message naming ``place``, a line or row, a column, and ``texts``."""
    return Case(name, mutate, E, texts, place)


def unlocated(name: str, mutate: Callable[[Path], None], place: str, *texts: str) -> Case:
    """A case refused with a message naming ``place`` and ``texts`` but no line or column."""
    return Case(name, mutate, E, texts, place, located=False)


def warned(name: str, mutate: Callable[[Path], None], *texts: str) -> Case:
    """A case accepted with a warning that names ``texts``."""
    return Case(name, mutate, W, texts)


CASES: list[Case] = [
    # ---- coordinates and layout
    refused("degrees-with-boundary", _degrees, _B, "[coordinates-geographic]"),
    refused(
        "degrees-without-boundary", both(_degrees, _no_boundary), _B, "[coordinates-geographic]"
    ),
    refused("xy-swapped", _swap_xy, _B, "[xy-swapped]"),
    refused("xy-swapped-without-boundary", both(_swap_xy, _no_boundary), _B, "[xy-swapped]"),
    refused("southern-hemisphere-y", moved(B1=(500010.0, -5000010.0)), _B, "[outside-crs-area]"),
    unlocated(
        "wrong-utm-zone", setting("site", "crs", '"EPSG:32617"'), _B, "[borings-outside-boundary]"
    ),
    unlocated(
        "boring-far-outside-boundary",
        moved(B3=(500030.0, 5009070.0)),
        _B,
        "[borings-outside-boundary]",
    ),
    warned(
        "boring-just-outside-boundary", moved(B3=(500030.0, 5000095.0)), "outside the site boundary"
    ),
    refused("infinite-x", replace(_B, "B2,500060.0", "B2,inf"), _B, "[non-finite-number]"),
    refused("nan-ground-elev", replace(_B, ",50.5,", ",nan,"), _B, "ground_elev"),
    refused("ground-elev-in-feet", replace(_B, ",49.8,", ",163.39,"), _B, "[ground-elev-units]"),
    warned("ground-elev-outlier", replace(_B, ",49.8,", ",120.0,"), "[ground-elev-outlier]"),
    unlocated("single-boring", only_borings("B1"), _B, "[too-few-borings]"),
    unlocated("two-borings", only_borings("B1", "B2"), _B, "[too-few-borings]"),
    unlocated("collinear-borings", moved(B3=(500035.0, 5000015.0)), _B, "[collinear-borings]"),
    unlocated(
        "coincident-borings",
        moved(B2=(500010.0, 5000010.0), B3=(500010.0, 5000010.0)),
        _B,
        "[coincident-borings]",
    ),
    # ---- zones
    unlocated(
        "zone-outside-site",
        zones(_square(501000, 5001000, 501050, 5001050)),
        "zones.geojson",
        "[zone-outside-site]",
    ),
    warned(
        "zone-barely-overlaps",
        zones(_square(500085, 5000085, 500185, 5000185)),
        "[zone-barely-overlaps]",
    ),
    unlocated(
        "zone-in-another-utm-zone",
        zones(_square(500000, 5000000, 500050, 5000050), epsg=32632),
        "zones.geojson",
        "[zone-outside-site]",
        "not the site CRS",
    ),
    warned("zone-in-wgs84", zones_in_wgs84, "[zones-crs]"),
    # ---- units
    refused("lengths-declared-ft-data-m", setting("units", "length", '"ft"'), "", "["),
    unlocated(
        "flow-declared-l-per-min", setting("units", "flow", '"L/min"'), "B1.csv", "[flow-units]"
    ),
    unlocated("flow-declared-l-per-s", setting("units", "flow", '"L/s"'), "B1.csv", "[flow-units]"),
    warned(
        "flow-in-l-per-min-declared-ml", log_column("B2", "flow", _scaled(0.001)), "[flow-units]"
    ),
    unlocated(
        "pressure-declared-psi-data-kpa",
        setting("units", "pressure", '"psi"'),
        _D,
        "[units-hydrostatic]",
    ),
    warned("one-log-in-feet", log_column("B1", "depth", _scaled(1 / 0.3048)), "[log-depth-units]"),
    warned(
        "log-deeper-than-direct-push",
        both(
            *(log_column(b, "depth", _scaled(1.0, 70.0)) for b in MINI_BORINGS),
            replace(_D, "B1,2.5", "B1,72.5", 5),
            sub(_D, r"^B2,2\.0,", "B2,72.0,"),
            sub(_D, r"^B2,3\.0,", "B2,73.0,"),
            replace(_S, "B1,2.0,2.5", "B1,72.0,72.5"),
            replace(_S, "B3,1.75,2.75", "B3,71.75,72.75"),
            replace("zones.geojson", '"bottom": 2.5', '"bottom": 73'),
        ),
        "[deep-log]",
    ),
    # ---- log values
    unlocated("zero-flow-throughout", log_column("B2", "flow", _all("0")), "B2.csv", "[zero-flow]"),
    unlocated(
        "constant-pressure",
        log_column("B2", "pressure", _all("150.0")),
        "B2.csv",
        "[constant-pressure]",
    ),
    refused(
        "infinite-pressure",
        log_column("B2", "pressure", _at(4, "inf")),
        "B2.csv",
        "[non-finite-number]",
    ),
    refused("negative-ec", log_column("B3", "ec", _at(2, "-5.0")), "B3.csv", "[negative-ec]"),
    warned("constant-ec", log_column("B3", "ec", _all("25.0")), "[constant-ec]"),
    refused("null-marker-ec", log_column("B3", "ec", _at(6, "-9999")), "B3.csv", "[null-marker]"),
    refused(
        "null-marker-pressure-gauge",
        both(
            setting("units", "pressure_reference", '"gauge"'),
            log_column("B1", "pressure", _scaled(1.0, -101.325)),
            log_column("B1", "pressure", _at(6, "-999.25")),
        ),
        "B1.csv",
        "[null-marker]",
    ),
    refused(
        "gauge-negative-pressure",
        both(
            setting("units", "pressure_reference", '"gauge"'),
            log_column("B2", "pressure", _scaled(1.0, -300.0)),
        ),
        "B2.csv",
        "[negative-pressure]",
    ),
    unlocated(
        "truncated-last-line-fields", fixed_format_log("B3", drop_fields=1, cut=2), "B3.csv", "line"
    ),
    warned("truncated-last-number", fixed_format_log("B3", cut=2), "[truncated-number]"),
    unlocated(
        "las-null-differs",
        las_log(
            "B3",
            null="-999.25",
            value=lambda i, r: [r[0], r[1], r[2], -9999.0, r[4]] if i == 4 else r,
        ),
        "B3.las",
        "[null-marker]",
        "NULL -999.25",
    ),
    unlocated(
        "las-null-missing",
        las_log(
            "B3", null=None, value=lambda i, r: [r[0], r[1], r[2], -999.25, r[4]] if i == 4 else r
        ),
        "B3.las",
        "[null-marker]",
    ),
    Case("las-valid", las_log("B3"), "ok", ("Site is valid",)),
    # ---- dissipation and slug tests
    refused(
        "dissipation-one-reading",
        add_dissipation(_dissipation_test("B3", 2.0, [140.0])),
        _D,
        "[dissipation-too-short]",
    ),
    refused(
        "dissipation-two-readings",
        add_dissipation(_dissipation_test("B3", 2.0, [140.0, 130.0])),
        _D,
        "[dissipation-too-short]",
    ),
    refused(
        "dissipation-rising",
        add_dissipation(_dissipation_test("B3", 2.0, [110.0, 115.0, 120.0, 126.0])),
        _D,
        "[dissipation-rising]",
    ),
    refused(
        "dissipation-below-log", sub(_D, r"^B1,2\.5,", "B1,4.5,"), _D, "[dissipation-below-log]"
    ),
    refused("slug-outside-log", replace(_S, "B1,2.0,2.5", "B1,5.0,6.0"), _S, "[slug-outside-log]"),
    warned(
        "slug-partly-outside-log",
        replace(_S, "B1,2.0,2.5", "B1,2.5,3.6"),
        "[slug-partly-outside-log]",
    ),
    # ---- settings and resources
    unlocated(
        "neighbors-1", setting("kriging", "neighbors", "1"), _T, "[setting-kriging]", "neighbors"
    ),
    unlocated("neighbors-2", setting("kriging", "neighbors", "2"), _T, "[setting-kriging]"),
    unlocated(
        "nan-cell-size",
        setting("grid", "cell_size", "[nan, 2.0, 0.25]"),
        _T,
        "[setting-non-finite]",
        "cell_size",
    ),
    unlocated("inf-padding", setting("grid", "padding", "inf"), _T, "[setting-non-finite]"),
    unlocated(
        "absurd-cell-size", setting("grid", "cell_size", "[0.001, 0.001, 0.001]"), _T, "[resources-"
    ),
    unlocated(
        "million-realizations",
        setting("simulation", "realizations", "1000000"),
        _T,
        "[resources-memory]",
        "realizations",
    ),
    unlocated(
        "max-cells-limit",
        setting("limits", "max_cells", "1000"),
        _T,
        "[resources-cells]",
        "max_cells",
    ),
    unlocated(
        "max-memory-limit",
        setting("limits", "max_memory", "0.001"),
        _T,
        "[resources-memory]",
        "max_memory",
    ),
    warned("long-run-warning", setting("limits", "warn_time", "0.001"), "[resources-time]"),
    unlocated(
        "scheduler-unreachable",
        setting("kriging", "scheduler", '"tcp://127.0.0.1:1"'),
        _T,
        "[setting-scheduler]",
        "[kriging] scheduler",
    ),
    unlocated(
        "scheduler-malformed",
        setting("kriging", "scheduler", '"not an address"'),
        _T,
        "[setting-scheduler]",
    ),
    # ---- malformed files (refused by the readers)
    unlocated("no-site-toml", delete("site.toml"), "site.toml", "site.toml"),
    unlocated("site-toml-syntax", write(_T, "[site\nname = 1\n"), "site.toml", "site.toml"),
    unlocated(
        "site-toml-unknown-key",
        setting("grid", "cell_sise", "[2.0, 2.0, 0.25]"),
        "site.toml",
        "cell_sise",
    ),
    unlocated("site-geographic-crs", setting("site", "crs", '"EPSG:4326"'), "site.toml", "crs"),
    unlocated("site-crs-nonsense", setting("site", "crs", '"EPSG:999999"'), "site.toml", "crs"),
    unlocated(
        "unknown-length-unit", setting("units", "length", '"furlong"'), "site.toml", "furlong"
    ),
    unlocated(
        "negative-cell-size",
        setting("grid", "cell_size", "[-2.0, 2.0, 0.25]"),
        "site.toml",
        "cell_size",
    ),
    unlocated("neighbors-zero", setting("kriging", "neighbors", "0"), "site.toml", "neighbors"),
    unlocated(
        "realizations-negative",
        setting("simulation", "realizations", "-1"),
        "site.toml",
        "realizations",
    ),
    unlocated("borings-missing", delete(_B), _B, "borings.csv"),
    unlocated("borings-empty", write(_B, ""), _B, "borings.csv"),
    unlocated("borings-header-only", write(_B, "boring_id,x,y,ground_elev\n"), _B, "borings.csv"),
    unlocated("borings-missing-column", write(_B, "boring_id,x,y\nB1,1,2\n"), _B, "ground_elev"),
    refused("borings-text-in-x", replace(_B, "B2,500060.0", "B2,east"), _B, "line 3, column 'x'"),
    unlocated("borings-duplicate-id", replace(_B, "B3,", "B2,"), _B, "B2"),
    unlocated("borings-semicolons", sub(_B, ",", ";"), _B, "borings.csv"),
    unlocated("borings-binary", write(_B, "\x00\x01\x02garbage\xff"), _B, "borings.csv"),
    unlocated(
        "log-missing-column", write("logs/B3.csv", "depth,pressure\n1,2\n"), "B3.csv", "B3.csv"
    ),
    refused(
        "log-text-in-pressure",
        log_column("B2", "pressure", _at(3, "high")),
        "B2.csv",
        "column 'pressure'",
    ),
    refused("log-negative-depth", log_column("B2", "depth", _at(0, "-0.5")), "B2.csv", "depth"),
    refused(
        "log-depth-not-increasing", log_column("B2", "depth", _at(3, "0.6")), "B2.csv", "increas"
    ),
    refused("log-negative-flow", log_column("B2", "flow", _at(3, "-3")), "B2.csv", "flow"),
    unlocated("log-empty-file", write("logs/B2.csv", ""), "B2.csv", "B2.csv"),
    unlocated("log-of-unknown-boring", write("logs/B9.csv", SHORT_LOG), "B9.csv", "B9"),
    unlocated("boring-without-log", delete("logs/B3.csv"), _B, "B3"),
    unlocated(
        "logs-glob-matches-nothing", setting("files", "logs", '"nologs/*.csv"'), "", "nologs"
    ),
    unlocated(
        "las-unreadable",
        both(las_log("B3"), write("logs/B3.las", "~Version\nnot a las file\n~A\n1 2\n")),
        "B3.las",
        "B3.las",
    ),
    unlocated(
        "las-missing-curve",
        both(las_log("B3"), sub("logs/B3.las", r"^ EC\.mS/m : ec\n", "")),
        "B3.las",
        "B3.las",
    ),
    unlocated(
        "las-version-3",
        both(las_log("B3"), replace("logs/B3.las", "VERS.   2.0", "VERS.   3.0")),
        "B3.las",
        "B3.las",
    ),
    unlocated(
        "same-boring-twice", both(las_log("B3"), write("logs/B3.csv", SHORT_LOG)), "B3", "B3"
    ),
    refused(
        "pressure-below-atmospheric",
        log_column("B1", "pressure", _scaled(1.0, -100.0)),
        "B1.csv",
        "below atmospheric",
    ),
    unlocated(
        "dissipation-missing-column",
        write(_D, "boring_id,depth,pressure\nB1,2.5,100\n"),
        _D,
        "time_s",
    ),
    refused(
        "dissipation-text", sub(_D, r"^(B1,2\.5,30\.0,)[0-9.]+", r"\1abc"), _D, "column 'pressure'"
    ),
    refused(
        "dissipation-time-decreasing", sub(_D, r"^B1,2\.5,60\.0,", "B1,2.5,10.0,"), _D, "time_s"
    ),
    unlocated(
        "dissipation-unknown-boring",
        add_dissipation(_dissipation_test("B7", 2.0, [140.0, 130.0, 125.0])),
        _D,
        "B7",
    ),
    unlocated("dissipation-file-missing", delete(_D), "", "dissipation"),
    refused("slug-top-below-bottom", replace(_S, "B1,2.0,2.5", "B1,2.5,2.0"), _S, "bottom_depth"),
    refused("slug-zero-k", replace(_S, "1.5e-5", "0"), _S, "column 'k'"),
    unlocated("slug-unknown-boring", replace(_S, "B3,1.75", "B8,1.75"), _S, "B8"),
    unlocated(
        "sensor-check-unknown-boring",
        replace("sensor_checks.csv", "B2,ec", "B9,ec"),
        "sensor_checks.csv",
        "B9",
    ),
    unlocated("boundary-missing", delete("boundary.geojson"), "boundary.geojson", "boundary"),
    unlocated("boundary-empty", write("boundary.geojson", ""), "boundary.geojson", "boundary"),
    unlocated(
        "boundary-no-features",
        write("boundary.geojson", '{"type": "FeatureCollection", "features": []}'),
        "boundary.geojson",
        "boundary",
    ),
    unlocated("zones-bad-json", write("zones.geojson", "{not json"), "zones.geojson", "zones"),
    unlocated(
        "zones-bottom-above-top",
        replace("zones.geojson", '"bottom": 2.5', '"bottom": 0.5'),
        "zones.geojson",
        "zones.geojson",
    ),
]
