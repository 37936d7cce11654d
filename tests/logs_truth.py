"""Forward model of direct-push injection logs with a known truth, for the logs-stage tests.

Written from the physics alone (not from the demo generator), with everything a user's site
may vary drawn at random from a seed: geology, units, probe geometry, flows, noise, barometric
pressure, how the logs start and where the anomalies sit.

Physics (sources beside each formula):

* recorded pressure ``P = P_atm + gamma_w * (1 - g) * max(0, depth - dtw) + P_net`` with the
  vertical head gradient ``g = dh/dz`` below the water table (Freeze & Cherry 1979, h = z + psi;
  g = 0 is hydrostatic) and ``P_net = Q * gamma_w / (F * K)`` (Hvorslev 1951 steady injection,
  cylinder ``F = 2 pi L / ln(L/D + sqrt(1 + (L/D)^2))``); above the water table the injection
  into unsaturated soil adds a few kPa (common practice: 3-9 kPa);
* the pump holds the pressure below the sensor limit: where more is needed the flow falls in
  proportion (steady flow is linear in P_net);
* dissipation: ``P(t) = P_static + (P_0 - P_static) * exp(-t/T)`` (Hvorslev 1951 time lag);
* barometric pressure: ISO 2533:1975 standard atmosphere at the collar elevation plus a
  weather offset per day (+-2.5 kPa) and a semi-diurnal tide of 0.1 kPa (common practice);
* bulk EC: ``log10 EC = 1.2 - 0.22 (log10 K + 5)`` plus a per-unit offset (sd 0.04), drier
  above the water table (x 0.6), with multiplicative sensor noise (Archie 1942: bulk EC rises
  with clay content and pore-water EC);
* slug tests: the arithmetic mean of the true K over the screen (parallel layers) times a
  lognormal error of 0.02 log10.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

GAMMA_W = 9.80665  # kPa/m, unit weight of water (NIST SP 811 standard gravity, 1000 kg/m3)
ML_PER_MIN = 1e-6 / 60.0  # m3/s in one mL/min
PSI = 6.894757  # kPa in one psi (NIST SP 811)


def iso2533(elevation):
    """ISO 2533:1975 standard atmosphere, kPa: 101.325 (1 - 0.0065 H / 288.15) ** 5.255877."""
    return 101.325 * (1.0 - 0.0065 * np.asarray(elevation, float) / 288.15) ** 5.255877


def hvorslev_cylinder(length: float, diameter: float) -> float:
    """Hvorslev (1951) shape factor of a cylindrical screen in uniform soil, m."""
    ratio = length / diameter
    return float(2.0 * np.pi * length / np.log(ratio + np.sqrt(1.0 + ratio**2)))


# log10 K ranges (m/s) of the units (common practice, Freeze & Cherry 1979 Table 2.2)
UNITS = {
    "clay": (-9.0, -8.0),
    "silt": (-7.0, -6.2),
    "silty_sand": (-6.0, -5.3),
    "sand": (-4.8, -4.0),
    "coarse_sand": (-4.0, -3.6),
}


@dataclass
class Options:
    """What varies between cases; every field has a default that gives a clean site."""

    n_borings: int = 10
    total_depth: tuple[float, float] = (9.0, 12.0)
    ec_noise: float = 0.05  # multiplicative (1 SD)
    pressure_noise: float = 0.3  # kPa (1 SD)
    start: str = "flow_off"  # flow_off | flow_on | mixed
    barometer_in_site_file: bool = False
    vertical_gradient: tuple[float, float] = (0.0, 0.0)  # range of dh/dz drawn per boring
    test_depths: str = "one"  # one | two
    high_k_unit: bool = False  # a gravel near the probe's upper limit
    n_slug_tests: int = 0
    ec_above_trend: int = 0  # borings with an EC anomaly
    spikes: int = 0  # borings with a metal-contact spike
    layout: str = "csv"  # csv | mixed (LAS with other curve names)
    units_row: bool = False
    pressure_unit: str = "kPa"  # kPa | psi
    days: int = 2


@dataclass
class Truth:
    """The truth of one synthetic site."""

    root: Path
    shape_factor: float
    offset: float  # log10(gamma_w / F): the calibration offset a with b = 1
    gradient: float
    direction_deg: float
    depth_to_water: dict[str, float] = field(default_factory=dict)
    p_atm: dict[str, float] = field(default_factory=dict)
    vertical_gradient: dict[str, float] = field(default_factory=dict)
    ec_above_trend: dict[str, tuple[float, float]] = field(default_factory=dict)
    spikes: dict[str, list[float]] = field(default_factory=dict)
    probe: dict[str, float] = field(default_factory=dict)
    p_atm_base: dict[str, float] = field(default_factory=dict)
    day_levels_at_site: dict[str, float] = field(default_factory=dict)
    slug_tests: pd.DataFrame | None = None


def _geology(rng: np.random.Generator, depth: np.ndarray, opts: Options, dtw: float):
    """Sharp-contact units down one boring: name, log10 K and EC offset of each sample."""
    names = list(UNITS)
    if opts.high_k_unit:
        names = [*names, "gravel"]
    top, rows = 0.0, []
    while top < depth[-1] + 0.1:
        name = str(rng.choice(names))
        thickness = float(rng.uniform(0.6, 2.2))
        if name == "gravel":
            lo, hi = -3.3, -3.0
        else:
            lo, hi = UNITS[name]
        rows.append((top, top + thickness, name, rng.uniform(lo, hi), rng.normal(0, 0.08)))
        top += thickness
    if opts.high_k_unit:
        # the gravel sits below the water table, thick enough for slug tests
        start = dtw + rng.uniform(1.0, 2.0)
        rows = [(t, min(b, start), *rest) for t, b, *rest in rows if t < start] + [
            (start, start + 2.5, "gravel", rng.uniform(-3.3, -3.0), 0.0)
        ]
        top = start + 2.5
        while top < depth[-1] + 0.1:
            name = str(rng.choice(list(UNITS)))
            lo, hi = UNITS[name]
            thickness = float(rng.uniform(0.6, 2.2))
            rows.append((top, top + thickness, name, rng.uniform(lo, hi), rng.normal(0, 0.08)))
            top += thickness
    # thin lenses (real layers, 4-20 cm) of clay or silt inside the sands (common practice)
    lenses = []
    for t, b, name, _, off in rows:
        if name in ("sand", "coarse_sand") and b - t > 0.8 and rng.random() < 0.5:
            top_lens = float(rng.uniform(t + 0.3, b - 0.4))
            lens = str(rng.choice(["clay", "silt"]))
            lo, hi = UNITS[lens]
            lenses.append(
                (top_lens, top_lens + rng.uniform(0.04, 0.2), lens, rng.uniform(lo, hi), off)
            )
    rows = sorted(rows + lenses, key=lambda r: r[0])
    unit = np.empty(depth.size, dtype=object)
    log10_k = np.empty(depth.size)
    ec_offset = np.empty(depth.size)
    for t, b, name, lk, off in rows:
        inside = (depth >= t) & (depth < b)
        if name in ("clay", "silt") and b - t < 0.25:
            inside = (depth >= t) & (depth < b)  # a lens overrides its host unit
        unit[inside] = name
        # small variation inside a unit, smooth over ~0.1 m
        wiggle = np.convolve(rng.normal(0, 1, inside.sum() + 10), np.ones(5) / 5, "same")
        log10_k[inside] = lk + 0.08 * wiggle[: inside.sum()]
        ec_offset[inside] = off
    return unit, log10_k, ec_offset, rows


def _boring_log(rng, opts, plan, truth: Truth, clock_start: pd.Timestamp):
    """One log (site-file units) and its dissipation records."""
    total = plan["total_depth"]
    dtw = plan["dtw"]
    g = plan["g"]
    step = 0.02  # m per reading, one reading per second
    n_off = 0
    flow_off_start = plan["start"] == "flow_off"
    depth = np.round(np.arange(0.01, total, step), 4)
    if flow_off_start:
        n_off = 6
        depth = np.concatenate([np.round(np.linspace(0.0, 0.008, n_off), 4), depth])
    n = depth.size
    unit, log10_k, ec_off, rows = _geology(rng, depth, opts, dtw)
    # the injection senses the soil around the screen: flow into parallel layers over about
    # +-4 cm (arithmetic mean), while the EC array reads sharp contacts
    kernel = np.ones(5) / 5.0
    k = np.convolve(np.pad(10.0**log10_k, 2, mode="edge"), kernel, "valid")
    time = np.arange(n, dtype=float)
    tests = plan["tests"]
    pause = np.zeros(n)
    test_index = [int(np.searchsorted(depth, d)) for d in tests]
    durations = [float(rng.uniform(240.0, 400.0)) for _ in tests]
    for i, dur in zip(test_index, durations, strict=True):
        pause[i:] += dur + 20.0
    time = time + pause
    hours = (clock_start.hour + clock_start.minute / 60.0) + time / 3600.0
    p_atm = truth.p_atm_base[plan["id"]] + 0.1 * np.sin(2 * np.pi * hours / 12.0)
    q_set = plan["flow_ml_min"] * (1 + 0.01 * rng.normal(0, 1, n))
    q = q_set * ML_PER_MIN
    saturated = depth > dtw
    p_net = q * GAMMA_W / (truth.shape_factor * k)
    vadose = rng.uniform(3.0, 9.0) + 2.0 * depth / max(dtw, 0.5)
    # unsaturated soil takes water more easily, but tight layers still raise the pressure
    p_net = np.where(saturated, p_net, vadose + 0.25 * p_net)
    p_static = GAMMA_W * (1.0 - g) * np.clip(depth - dtw, 0.0, None)
    hold = 0.9 * plan["limit"]
    needed = p_atm + p_static + p_net
    capped = needed > hold
    available = np.clip(hold - p_atm - p_static, 0.0, None)
    flow = np.where(capped, q_set * available / p_net, q_set)
    pressure = np.where(capped, hold, needed)
    if flow_off_start:
        flow[:n_off] = 0.0
        pressure[:n_off] = p_atm[:n_off]
    pressure = pressure + rng.normal(0.0, opts.pressure_noise, n)
    # flow-meter noise while the pump runs; a stopped pump reads zero
    flow = np.where(flow > 0, np.clip(flow + rng.normal(0.0, 1.0, n), 0.0, None), 0.0)
    log10_ec = 1.2 - 0.22 * (np.clip(log10_k, -9, -2.5) + 5.0) + ec_off
    ec = 10.0**log10_ec * np.where(saturated, 1.0, 0.6)
    # topsoil or fill at the top of the log: 5-25 cm of higher EC (a real layer)
    ec = np.where(depth < plan["topsoil"], ec * plan["topsoil_factor"], ec)
    if plan["id"] in truth.ec_above_trend:
        top, bottom = truth.ec_above_trend[plan["id"]]
        ec = np.where((depth >= top) & (depth <= bottom), ec * plan["ec_anomaly_factor"], ec)
    ec = ec * (1.0 + rng.normal(0.0, opts.ec_noise, n)) + rng.normal(0.0, 0.1, n)
    if plan["id"] in truth.spikes:
        j = int(np.searchsorted(depth, truth.spikes[plan["id"]][0]))
        ec[j - 1 : j + 2] += np.array([0.6, 1.0, 0.5]) * plan["spike_size"]
    ec = np.clip(ec, 0.05, None)
    records = []
    for index, (i, dur) in enumerate(zip(test_index, durations, strict=True)):
        t = np.arange(0.0, dur, 1.0)
        tau = float(rng.uniform(10.0, 35.0))
        static = p_atm[i] + GAMMA_W * (1.0 - g) * (depth[i] - dtw)
        values = static + (pressure[i] - static) * np.exp(-t / tau)
        values = values + rng.normal(0.0, opts.pressure_noise, t.size)
        records.append(
            pd.DataFrame(
                {
                    "boring_id": plan["id"],
                    "test_id": plan["test_ids"][index],
                    "depth": round(float(depth[i]), 3),
                    "time_s": t,
                    "pressure": values,
                }
            )
        )
    log = pd.DataFrame({"depth": depth, "pressure": pressure, "flow": flow, "ec": ec, "time": time})
    return log, records, (depth, log10_k, unit, rows)


def _site_toml(opts: Options, truth: Truth, *, las_names: dict[str, str]) -> str:
    probe = truth.probe
    lines = [
        "[site]",
        'name = "Synthetic truth site"',
        'crs = "EPSG:32631"',
        "[units]",
        f'pressure = "{opts.pressure_unit}"',
        'flow = "mL/min"',
        'ec = "mS/m"',
        "[files]",
        'logs = ["logs/*.csv", "logs/*.las"]',
        f'slug_tests = "{"slug_tests.csv" if opts.n_slug_tests else ""}"',
        "[logs]",
        'depth = "depth"',
        'pressure = "pressure"',
        'flow = "flow"',
        'ec = "ec"',
        'time = "time"',
    ]
    if opts.units_row:
        lines.append("units_row = true")
    if opts.layout == "mixed":
        lines += ["[logs.las]", *(f'{k} = "{v}"' for k, v in las_names.items())]
        lines += ["[logs.csv]", 'pressure = "p_total"', 'ec = "cond"']
    pressure_unit = 1.0 if opts.pressure_unit == "kPa" else 1.0 / PSI
    lines += [
        "[probe]",
        f"screen_length = {probe['length']}",
        f"screen_diameter = {probe['diameter']}",
        f"sensor_noise = {opts.pressure_noise * pressure_unit:.6g}",
        f"pressure_limit = {probe['limit'] * pressure_unit:.6g}",
    ]
    if opts.barometer_in_site_file:
        days = ", ".join(
            f'"{d}" = {v * pressure_unit:.6g}' for d, v in truth.day_levels_at_site.items()
        )
        lines.append(f"barometric_pressure = {{ {days} }}")
    return "\n".join(lines) + "\n"


def _write_csv_log(path: Path, log: pd.DataFrame, opts: Options) -> None:
    names = {"depth": "depth", "pressure": "pressure", "flow": "flow", "ec": "ec", "time": "time"}
    if opts.layout == "mixed":
        names.update(pressure="p_total", ec="cond")
    out = log.rename(columns=names)
    text = out.to_csv(index=False, float_format="%.5g")
    if opts.units_row:
        header, body = text.split("\n", 1)
        units = {"depth": "m", "pressure": opts.pressure_unit, "flow": "mL/min", "ec": "mS/m"}
        row = ",".join(units.get(c, "s") for c in log.columns)
        text = f"{header}\n{row}\n{body}"
    path.write_text(text)


def _write_las_log(path: Path, log: pd.DataFrame, las_names: dict[str, str], opts) -> None:
    import lasio

    las = lasio.LASFile()
    las.well["WELL"].value = path.stem
    units = {"depth": "m", "pressure": opts.pressure_unit, "flow": "mL/min", "ec": "mS/m"}
    for key in ("depth", "pressure", "flow", "ec", "time"):
        las.append_curve(las_names[key], log[key].to_numpy(), unit=units.get(key, "s"))
    with path.open("w") as handle:
        las.write(handle, version=2.0)


#: LAS curve names of the "mixed" layout (CSV files use other names)
LAS_NAMES = {"depth": "DEPT", "pressure": "PRES", "flow": "QINJ", "ec": "COND", "time": "ETIM"}


def _plan(rng, opts: Options, i: int, boring_id: str, dtw: float, test_id: int, limit: float):
    """What varies per boring: gradient, start, depth, test depths, flow and anomaly sizes."""
    g = float(rng.uniform(*opts.vertical_gradient))
    if opts.start == "mixed":
        start = "flow_off" if i % 4 in (0, 1) else "flow_on"  # both kinds each day
    else:
        start = opts.start
    total = float(rng.uniform(*opts.total_depth))
    tests = [round(dtw + float(rng.uniform(0.8, 1.5)), 2)]
    if opts.test_depths == "two":
        tests.append(round(min(total - 0.5, dtw + float(rng.uniform(6.0, 8.0))), 2))
    return {
        "id": boring_id,
        "dtw": dtw,
        "g": g,
        "start": start,
        "total_depth": total,
        "tests": tests,
        "test_ids": list(range(test_id, test_id + len(tests))),
        "flow_ml_min": float(rng.uniform(250.0, 400.0)),
        "limit": limit,
        "ec_anomaly_factor": float(rng.uniform(3.0, 5.0)),
        # a metal contact reads hundreds of mS/m (common practice)
        "spike_size": float(rng.uniform(250.0, 500.0)),
        "topsoil": float(rng.uniform(0.05, 0.25)),
        "topsoil_factor": float(rng.uniform(2.0, 4.0)),
    }


def _log_with_anomalies(rng, opts, plan, truth: Truth, clock, *, ec_above_trend: bool, spike: bool):
    """Simulate one log; where it carries anomalies, place them once the geology is known."""
    state = rng.bit_generator.state
    out = _boring_log(rng, opts, plan, truth, clock)
    if not (ec_above_trend or spike):
        return out
    depth, rows = out[2][0], out[2][3]
    interval = (
        _ec_anomaly_interval(rows, plan["dtw"], plan["total_depth"]) if ec_above_trend else None
    )
    if interval is not None:
        truth.ec_above_trend[plan["id"]] = interval
    if spike:
        truth.spikes[plan["id"]] = _spike_depth(rows, plan["dtw"], plan["total_depth"], depth)
    rng.bit_generator.state = state  # the same geology and noise, now with the anomalies
    return _boring_log(rng, opts, plan, truth, clock)


def _write_log(root: Path, opts: Options, log: pd.DataFrame, boring_id: str, *, las: bool):
    written = log.copy()
    if opts.pressure_unit == "psi":
        written["pressure"] = written["pressure"] / PSI
    if las:
        _write_las_log(root / "logs" / f"{boring_id}.las", written, LAS_NAMES, opts)
    else:
        _write_csv_log(root / "logs" / f"{boring_id}.csv", written, opts)


def make_site(root: Path, seed: int, opts: Options) -> Truth:
    """Write a synthetic site into ``root`` and return its truth."""
    rng = np.random.default_rng(seed)
    root.mkdir(parents=True, exist_ok=True)
    (root / "logs").mkdir(exist_ok=True)
    length = float(rng.choice([0.015, 0.02, 0.03]))
    diameter = float(rng.choice([0.008, 0.01, 0.012]))
    f = hvorslev_cylinder(length, diameter)
    # water table: a plane with a random direction and gradient 0.004-0.01 (common practice)
    gradient = float(rng.uniform(0.004, 0.01))
    direction = float(rng.uniform(0.0, 360.0))
    flow_x, flow_y = np.sin(np.radians(direction)), np.cos(np.radians(direction))
    origin = np.array([500000.0, 5000000.0])
    xy = rng.uniform(0.0, 150.0, (opts.n_borings, 2))
    ground = 60.0 + 0.004 * xy[:, 0] + rng.normal(0.0, 0.3, opts.n_borings)
    wt = 57.0 - gradient * (flow_x * xy[:, 0] + flow_y * xy[:, 1])
    ground = np.maximum(ground, wt + 2.0)
    ids = [f"T{i + 1:02d}" for i in range(opts.n_borings)]
    days = [f"2026-06-{10 + d:02d}" for d in range(opts.days)]
    weather = {d: float(rng.uniform(-2.5, 2.5)) for d in days}
    truth = Truth(root, f, float(np.log10(GAMMA_W / f)), gradient, direction)
    truth.probe = {"length": length, "diameter": diameter, "limit": float(rng.choice([1000, 1500]))}
    mean_ground = float(np.mean(ground))
    for d in days:
        truth.day_levels_at_site[d] = float(iso2533(mean_ground)) + weather[d]
    ec_anomaly_ids = (
        list(rng.choice(ids, opts.ec_above_trend, replace=False)) if opts.ec_above_trend else []
    )
    spike_ids = list(rng.choice(ids, opts.spikes, replace=False)) if opts.spikes else []
    borings, dissipation = [], []
    test_id = 1
    slug_candidates = []
    for i, boring_id in enumerate(ids):
        day = days[i % len(days)]
        dtw = float(ground[i] - wt[i])
        plan = _plan(rng, opts, i, boring_id, dtw, test_id, truth.probe["limit"])
        test_id += len(plan["tests"])
        # this boring's barometric pressure: the day's level at its own elevation
        truth.p_atm_base[boring_id] = float(iso2533(ground[i])) + weather[day]
        truth.p_atm[boring_id] = truth.p_atm_base[boring_id]
        truth.depth_to_water[boring_id] = dtw
        truth.vertical_gradient[boring_id] = plan["g"]
        clock = pd.Timestamp(f"{day} 08:00") + pd.Timedelta(hours=float(rng.uniform(0, 8)))
        log, records, (depth, log10_k, unit, rows) = _log_with_anomalies(
            rng,
            opts,
            plan,
            truth,
            clock,
            ec_above_trend=boring_id in ec_anomaly_ids,
            spike=boring_id in spike_ids,
        )
        dissipation += records
        _write_log(root, opts, log, boring_id, las=opts.layout == "mixed" and i % 2 == 1)
        borings.append(
            {
                "boring_id": boring_id,
                "x": origin[0] + xy[i, 0],
                "y": origin[1] + xy[i, 1],
                "ground_elev": round(float(ground[i]), 3),
                "date": day,
            }
        )
        slug_candidates += _slug_screens(boring_id, depth, log10_k, unit, rows, dtw, opts)
    pd.DataFrame(borings).to_csv(root / "borings.csv", index=False)
    dis = pd.concat(dissipation, ignore_index=True)
    if opts.pressure_unit == "psi":
        dis["pressure"] = dis["pressure"] / PSI
    dis.to_csv(root / "dissipation.csv", index=False, float_format="%.5f")
    if opts.n_slug_tests:
        order = rng.permutation(len(slug_candidates))
        chosen = _choose_slug_tests([slug_candidates[j] for j in order], opts)
        table = pd.DataFrame(chosen)
        table["k"] = table["k"] * 10.0 ** rng.normal(0.0, 0.02, len(table))
        table.to_csv(root / "slug_tests.csv", index=False, float_format="%.6g")
        truth.slug_tests = table
    (root / "site.toml").write_text(_site_toml(opts, truth, las_names=LAS_NAMES))
    return truth


def _ec_anomaly_interval(rows, dtw: float, total: float) -> tuple[float, float] | None:
    """An anomaly 0.4-1.0 m thick in the thickest transmissive unit below the water table.

    None when the boring has no transmissive unit thick enough: EC above the trend is only an
    anomaly in transmissive soil.
    """
    best = max(
        (r for r in rows if r[3] >= -5.0 and r[1] > dtw + 0.5 and r[0] < total - 0.5),
        key=lambda r: min(r[1], total) - max(r[0], dtw),
        default=None,
    )
    if best is None or min(best[1], total) - max(best[0], dtw + 0.3) < 0.6:
        return None
    top = max(best[0], dtw + 0.3) + 0.1
    bottom = min(best[1], total) - 0.1
    return (round(top, 3), round(max(top + 0.4, min(bottom, top + 1.0)), 3))


def _spike_depth(rows, dtw: float, total: float, depth: np.ndarray) -> list[float]:
    """A metal contact at least 0.25 m from any contact or lens, below the water table.

    (At a contact the injection changes too, and nothing tells the two apart.)
    """
    edges = np.array([edge for r in rows for edge in r[:2]])
    for candidate in np.arange(dtw + 0.6, total - 0.3, 0.05):
        if np.all(np.abs(edges - candidate) >= 0.25):
            return [round(float(candidate), 3)]
    return [round(0.5 * (dtw + total), 3)]


def _slug_screens(boring_id, depth, log10_k, unit, rows, dtw, opts) -> list[dict]:
    """Possible slug-test screens (0.5-0.8 m) in saturated units; K is the screen's mean K."""
    out = []
    for t, b, name, _, _ in rows:
        top, bottom = max(t, dtw + 0.5) + 0.1, min(b, depth[-1]) - 0.1
        if bottom - top < 0.5:
            continue
        screen_bottom = round(min(bottom, top + 0.8), 3)
        inside = (depth >= top) & (depth <= screen_bottom)
        k = float(np.mean(10.0 ** log10_k[inside]))
        out.append(
            {
                "boring_id": boring_id,
                "top_depth": round(top, 3),
                "bottom_depth": screen_bottom,
                "k": k,
                "unit": name,
            }
        )
    return out


def _choose_slug_tests(candidates: list[dict], opts: Options) -> list[dict]:
    """Screens in resolvable units, with half of them in the gravel when there is one."""
    chosen = []
    gravel = [c for c in candidates if c["unit"] == "gravel"]
    others = [c for c in candidates if c["unit"] in ("silty_sand", "sand", "coarse_sand")]
    if opts.high_k_unit:
        chosen += gravel[: opts.n_slug_tests // 2]
    chosen += others[: opts.n_slug_tests - len(chosen)]
    return [{k: v for k, v in c.items() if k != "unit"} for c in chosen]
