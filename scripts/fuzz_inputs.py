"""Fuzz ``geo3d check`` with seeded random mutations of the demo site.

Each mutation copies a few borings of the demo site into a temporary folder, changes one thing
(a cell, a file, a setting), and runs ``geo3d check`` in-process through click's test runner.
It counts:

- tracebacks: the command printed a traceback or failed with anything but a clean exit;
- silent acceptances: an error was planted but ``check`` exited 0 without a warning.

Both must be 0. Usage::

    python scripts/fuzz_inputs.py --n 1000 --seed 1 --jobs 2
"""

from __future__ import annotations

import argparse
import math
import random
import shutil
import sys
import tempfile
import time
from collections import Counter
from collections.abc import Callable
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]
DEMO = REPO / "demo_site"

#: name -> (mutator, planted): a planted mutation makes the site wrong, so check must refuse it
#: or warn about it.
Mutator = Callable[[Path, random.Random], None]


# --------------------------------------------------------------------------- small site


def small_demo(dest: Path, n_borings: int) -> Path:
    """Copy the first ``n_borings`` borings of the demo site (and their tests) into ``dest``."""
    dest.mkdir(parents=True)
    rows = (DEMO / "borings.csv").read_text().splitlines()
    keep = [r.split(",")[0] for r in rows[1 : n_borings + 1]]
    for name in ("borings.csv", "dissipation.csv", "slug_tests.csv", "sensor_checks.csv"):
        lines = (DEMO / name).read_text().splitlines()
        kept = [lines[0]] + [x for x in lines[1:] if x.split(",")[0] in keep]
        (dest / name).write_text("\n".join(kept) + "\n")
    (dest / "logs").mkdir()
    for log in (DEMO / "logs").iterdir():
        if log.stem in keep:
            shutil.copy(log, dest / "logs" / log.name)
    for name in ("site.toml", "boundary.geojson", "zones.geojson"):
        shutil.copy(DEMO / name, dest / name)
    return dest


# --------------------------------------------------------------------------- mutations


def _csv(path: Path) -> tuple[list[str], list[list[str]]]:
    lines = path.read_text().splitlines()
    return lines[0].split(","), [line.split(",") for line in lines[1:] if line]


def _write_csv(path: Path, header: list[str], rows: list[list[str]]) -> None:
    path.write_text("\n".join([",".join(header)] + [",".join(r) for r in rows]) + "\n")


def _a_log(root: Path, rng: random.Random) -> Path:
    return rng.choice(sorted((root / "logs").glob("*.csv")))


def _set_cell(root: Path, rng: random.Random, value: Callable[[str], str], *, columns=None) -> None:
    path = _a_log(root, rng)
    header, rows = _csv(path)
    j = header.index(rng.choice(columns)) if columns else rng.randrange(len(header))
    i = rng.randrange(len(rows))
    rows[i][j] = value(rows[i][j])
    _write_csv(path, header, rows)


def _set_column(root: Path, rng: random.Random, column: str, fn: Callable[[list[str]], list[str]]):
    path = _a_log(root, rng)
    header, rows = _csv(path)
    j = header.index(column)
    for r, v in zip(rows, fn([r[j] for r in rows]), strict=True):
        r[j] = v
    _write_csv(path, header, rows)


def _setting(root: Path, section: str, key: str, value: str) -> None:
    path = root / "site.toml"
    out, inside, done = [], False, False
    for line in path.read_text().splitlines():
        if line.startswith("["):
            inside = line.strip() == f"[{section}]"
        if inside and not done and line.split("=")[0].strip() == key:
            line, done = f"{key} = {value}", True
        out.append(line)
    if not done:
        out += [f"[{section}]", f"{key} = {value}"]
    path.write_text("\n".join(out) + "\n")


def _borings(root: Path, fn: Callable[[list[list[str]]], None]) -> None:
    header, rows = _csv(root / "borings.csv")
    fn(rows)
    _write_csv(root / "borings.csv", header, rows)


def m_text_cell(root, rng):
    _set_cell(root, rng, lambda v: rng.choice(["abc", "1..2", "--", "1,5", "#N/A", "12a"]))


def m_special_cell(root, rng):
    special = rng.choice(["inf", "-inf", "-999.25", "-9999", "1e400"])
    _set_cell(root, rng, lambda v: special, columns=["pressure", "flow", "ec"])


def m_negative_ec(root, rng):
    _set_cell(root, rng, lambda v: f"-{abs(float(v)) + 1:g}", columns=["ec"])


def m_truncate_log(root, rng):
    path = _a_log(root, rng)
    text = path.read_text().rstrip("\n")
    last = text.rsplit("\n", 1)[1]
    cut = rng.randint(1, len(last) - 1)  # inside the last line, never all of it
    path.write_text(text[: len(text) - cut])


def m_flow_scaled(root, rng):
    _setting(root, "units", "flow", rng.choice(['"L/min"', '"L/s"', '"m3/s"']))


def m_length_ft(root, rng):
    _setting(root, "units", "length", '"ft"')


def m_pressure_psi(root, rng):
    _setting(root, "units", "pressure", '"psi"')


def m_swap_xy(root, rng):
    _borings(root, lambda rows: [r.__setitem__(slice(1, 3), [r[2], r[1]]) for r in rows])


def m_degrees(root, rng):
    def fn(rows):
        for i, r in enumerate(rows):
            r[1], r[2] = f"{14.5 + i * 1e-4:.6f}", f"{50.7 + i * 1e-4:.6f}"

    _borings(root, fn)


def m_ground_feet(root, rng):
    def fn(rows):
        r = rng.choice(rows)
        r[3] = f"{float(r[3]) / 0.3048:.2f}"

    _borings(root, fn)


def m_constant(root, rng):
    column = rng.choice(["pressure", "flow"])
    value = "0" if column == "flow" else f"{rng.uniform(100, 300):.2f}"
    _set_column(root, rng, column, lambda values: [value] * len(values))


def m_collinear(root, rng):
    def fn(rows):
        x0, y0 = float(rows[0][1]), float(rows[0][2])
        for k, r in enumerate(rows):
            r[1], r[2] = f"{x0 + 7 * k:.2f}", f"{y0 + 3 * k:.2f}"

    _borings(root, fn)


def m_one_boring(root, rng):
    _borings(root, lambda rows: rows.__delitem__(slice(1, None)))


def m_settings(root, rng):
    section, key, value = rng.choice(
        [
            ("kriging", "neighbors", str(rng.randint(-1, 2))),
            ("grid", "cell_size", "[nan, 2.0, 0.25]"),
            ("grid", "cell_size", f"[{rng.choice(['0.001', '0.0005'])}, 0.001, 0.001]"),
            ("grid", "padding", "inf"),
            ("simulation", "realizations", "1000000"),
            ("kriging", "scheduler", rng.choice(['"tcp://127.0.0.1:1"', '"nonsense"'])),
            ("units", "length", '"furlong"'),
            ("site", "crs", '"EPSG:4326"'),
        ]
    )
    _setting(root, section, key, value)


def m_dissipation(root, rng):
    header, rows = _csv(root / "dissipation.csv")
    tests = sorted({r[1] for r in rows})
    test = rng.choice(tests)
    kind = rng.choice(["short", "rising", "deep"])
    if kind == "short":
        first = next(r for r in rows if r[1] == test)
        rows = [r for r in rows if r[1] != test or r is first]
    elif kind == "rising":
        mine = [r for r in rows if r[1] == test]
        pressures = sorted(float(r[4]) for r in mine)
        for r, p in zip(mine, pressures, strict=True):
            r[4] = f"{p + 0.0:.2f}"
        if pressures[-1] - pressures[0] < 2.0:
            mine[-1][4] = f"{pressures[-1] + 5:.2f}"
    else:
        for r in rows:
            if r[1] == test:
                r[2] = f"{float(r[2]) + 50:.3f}"
    _write_csv(root / "dissipation.csv", header, rows)


def m_slug(root, rng):
    header, rows = _csv(root / "slug_tests.csv")
    if not rows:
        return m_dissipation(root, rng)
    r = rng.choice(rows)
    r[1], r[2] = f"{float(r[1]) + 60:.2f}", f"{float(r[2]) + 60:.2f}"
    _write_csv(root / "slug_tests.csv", header, rows)


def m_zones_shift(root, rng):
    import json

    doc = json.loads((root / "zones.geojson").read_text())
    dx = rng.choice([10000.0, -20000.0, 5000.0])
    for feature in doc["features"]:
        rings = feature["geometry"]["coordinates"]
        feature["geometry"]["coordinates"] = [[[x + dx, y] for x, y in ring] for ring in rings]
    (root / "zones.geojson").write_text(json.dumps(doc))


def m_duplicate_row(root, rng):
    path = _a_log(root, rng)
    header, rows = _csv(path)
    i = rng.randrange(len(rows))
    rows.insert(i, list(rows[i]))
    _write_csv(path, header, rows)


def m_empty_file(root, rng):
    target = rng.choice(["borings.csv", "dissipation.csv", "boundary.geojson"])
    (root / target).write_text("")
    if target != "borings.csv" and rng.random() < 0.5:
        (root / target).unlink()


def m_null_marker(root, rng):
    _set_cell(root, rng, lambda v: rng.choice(["-999.25", "-9999"]), columns=["depth", "ec"])


def m_byte_noise(root, rng):
    """Not planted: random bytes may or may not break a file; only tracebacks count."""
    files = [p for p in root.rglob("*") if p.is_file()]
    path = rng.choice(files)
    data = bytearray(path.read_bytes())
    for _ in range(rng.randint(1, 4)):
        if data:
            data[rng.randrange(len(data))] = rng.randrange(256)
    path.write_bytes(bytes(data))


def m_drop_line(root, rng):
    """Not planted: a log missing one line is still a valid log."""
    path = _a_log(root, rng)
    lines = path.read_text().splitlines()
    del lines[rng.randrange(2, len(lines))]
    path.write_text("\n".join(lines) + "\n")


MUTATIONS: dict[str, tuple[Mutator, bool]] = {
    "text-cell": (m_text_cell, True),
    "special-cell": (m_special_cell, True),
    "negative-ec": (m_negative_ec, True),
    "truncate-log": (m_truncate_log, True),
    "flow-units": (m_flow_scaled, True),
    "length-ft": (m_length_ft, True),
    "pressure-psi": (m_pressure_psi, True),
    "swap-xy": (m_swap_xy, True),
    "degrees": (m_degrees, True),
    "ground-feet": (m_ground_feet, True),
    "constant-column": (m_constant, True),
    "collinear": (m_collinear, True),
    "one-boring": (m_one_boring, True),
    "settings": (m_settings, True),
    "dissipation": (m_dissipation, True),
    "slug": (m_slug, True),
    "zones-shift": (m_zones_shift, True),
    "duplicate-row": (m_duplicate_row, True),
    "empty-file": (m_empty_file, True),
    "null-marker": (m_null_marker, True),
    "byte-noise": (m_byte_noise, False),
    "drop-line": (m_drop_line, False),
}


# --------------------------------------------------------------------------- running


def run_one(args: tuple[int, int, str, int]) -> tuple[int, str, str, float, str]:
    """Mutate a copy of the template and run check; return (index, mutation, verdict, s, text)."""
    index, seed, template, _ = args
    from click.testing import CliRunner

    from geo3d.cli import main

    rng = random.Random(seed * 1_000_003 + index)
    name = rng.choice(sorted(MUTATIONS))
    mutate, planted = MUTATIONS[name]
    with tempfile.TemporaryDirectory(prefix="geo3d-fuzz-") as tmp:
        site = Path(tmp) / "site"
        shutil.copytree(template, site)
        mutate(site, rng)
        start = time.perf_counter()
        result = CliRunner().invoke(main, ["check", str(site)])
        seconds = time.perf_counter() - start
    output = result.output
    crashed = "Traceback" in output or result.exit_code not in (0, 2)
    if result.exception is not None and not isinstance(result.exception, SystemExit):
        crashed = True
    if crashed:
        verdict = "traceback"
    elif planted and result.exit_code == 0 and "Warning" not in output:
        verdict = "silent"
    else:
        verdict = {0: "accepted", 2: "refused"}[result.exit_code]
        if result.exit_code == 0 and "Warning" in output:
            verdict = "warned"
    return index, name, verdict, seconds, output[-600:]


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--n", type=int, default=200, help="number of mutations")
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--jobs", type=int, default=2, help="worker processes")
    parser.add_argument("--borings", type=int, default=6, help="demo borings kept per copy")
    args = parser.parse_args(argv)
    start = time.perf_counter()
    with tempfile.TemporaryDirectory(prefix="geo3d-fuzz-template-") as tmp:
        template = small_demo(Path(tmp) / "demo", args.borings)
        jobs = [(i, args.seed, str(template), 0) for i in range(args.n)]
        results = []
        with ProcessPoolExecutor(max_workers=args.jobs) as pool:
            for result in pool.map(run_one, jobs, chunksize=4):
                results.append(result)
                if len(results) % 100 == 0:
                    bad = sum(r[2] in ("traceback", "silent") for r in results)
                    print(f"{len(results)} done, {bad} bad", file=sys.stderr, flush=True)
    verdicts = Counter(v for _, _, v, _, _ in results)
    by_mutation = Counter((m, v) for _, m, v, _, _ in results)
    for index, name, verdict, _, text in results:
        if verdict in ("traceback", "silent"):
            print(f"--- mutation {index} ({name}): {verdict}\n{text}\n", file=sys.stderr)
    slowest = max(s for _, _, _, s, _ in results) if results else math.nan
    print(f"mutations: {len(results)} (seed {args.seed}, {args.borings} demo borings)")
    for (name, verdict), count in sorted(by_mutation.items()):
        print(f"  {name:<16} {verdict:<10} {count}")
    print(f"tracebacks: {verdicts['traceback']}")
    print(f"silent acceptances of planted errors: {verdicts['silent']}")
    print(f"slowest check: {slowest:.1f} s; total {time.perf_counter() - start:.0f} s")
    return 0 if verdicts["traceback"] == 0 and verdicts["silent"] == 0 else 1


if __name__ == "__main__":
    sys.exit(main())
