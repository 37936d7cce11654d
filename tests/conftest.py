"""Shared fixtures: a small, valid site folder written programmatically.

The mini site is invented test data (three borings in UTM zone 31N), small enough to read in a
fraction of a second. ``make_site`` builds it in any folder with options to break it.
"""

from __future__ import annotations

import json
import textwrap
from pathlib import Path

import numpy as np
import pytest

GAMMA_W = 9.80665  # kPa/m, unit weight of water (standard gravity, NIST SP 811)
P_ATM = 101.325  # kPa, standard atmosphere (NIST SP 811)

MINI_BORINGS = {
    # boring_id: (x, y, ground_elev), EPSG:32631 metres
    "B1": (500010.0, 5000010.0, 50.0),
    "B2": (500060.0, 5000020.0, 50.5),
    "B3": (500030.0, 5000070.0, 49.8),
}
MINI_DEPTHS = np.round(np.arange(0.5, 3.01, 0.25), 3)  # 11 samples per boring
MINI_DEPTH_TO_WATER = 1.5  # m, invented


SITE_TOML = """\
[site]
name = "Mini site"
crs = "EPSG:32631"

[units]
length = "m"
pressure = "kPa"
pressure_reference = "absolute"
flow = "mL/min"
ec = "mS/m"

[files]
borings = "borings.csv"
logs = "logs/*.csv"
dissipation = "dissipation.csv"
slug_tests = "slug_tests.csv"
sensor_checks = "sensor_checks.csv"
boundary = "boundary.geojson"
zones = "zones.geojson"

[logs]
time = "time"

[probe]
# the mini logs run with the flow on from their first reading: the reference pressure comes from
# an invented site barometer reading, equal to the standard atmosphere (NIST SP 811)
barometric_pressure = 101.325
"""


def mini_log(boring_id: str) -> dict[str, np.ndarray]:
    """Invented log values for one mini-site boring (kPa, mL/min, mS/m, s)."""
    index = list(MINI_BORINGS).index(boring_id)
    depth = MINI_DEPTHS
    head = GAMMA_W * np.clip(depth - MINI_DEPTH_TO_WATER, 0.0, None)
    p_net = 40.0 + 10.0 * index + 5.0 * np.sin(depth)
    return {
        "depth": depth,
        "pressure": np.round(P_ATM + head + p_net, 3),
        "flow": np.full(depth.size, 300.0),
        "ec": np.round(20.0 + 3.0 * depth + index, 3),
        "time": np.round(depth / 0.02, 3),
    }


def write_log_csv(path: Path, boring_id: str) -> None:
    """Write one mini-site log as CSV."""
    values = mini_log(boring_id)
    lines = ["depth,pressure,flow,ec,time"]
    for row in zip(*(values[k] for k in ("depth", "pressure", "flow", "ec", "time")), strict=True):
        lines.append(",".join(f"{v:g}" for v in row))
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text("\n".join(lines) + "\n")


def _square(x0: float, y0: float, x1: float, y1: float) -> list[list[float]]:
    return [[x0, y0], [x1, y0], [x1, y1], [x0, y1], [x0, y0]]


def write_geojson(path: Path, features: list[dict], *, epsg: int | None = 32631) -> None:
    """Write polygons as GeoJSON; ``epsg=None`` leaves the CRS out."""
    doc = {"type": "FeatureCollection", "features": features}
    if epsg is not None:
        doc["crs"] = {"type": "name", "properties": {"name": f"urn:ogc:def:crs:EPSG::{epsg}"}}
    path.write_text(json.dumps(doc))


def polygon_feature(ring: list[list[float]], **properties) -> dict:
    return {
        "type": "Feature",
        "properties": properties,
        "geometry": {"type": "Polygon", "coordinates": [ring]},
    }


def make_site(root: Path) -> Path:
    """Write the mini site into ``root`` and return it."""
    root.mkdir(parents=True, exist_ok=True)
    (root / "site.toml").write_text(SITE_TOML)
    rows = ["boring_id,x,y,ground_elev,date"]
    for boring_id, (x, y, z) in MINI_BORINGS.items():
        rows.append(f"{boring_id},{x},{y},{z},2026-05-0{len(rows)}")
    (root / "borings.csv").write_text("\n".join(rows) + "\n")
    for boring_id in MINI_BORINGS:
        write_log_csv(root / "logs" / f"{boring_id}.csv", boring_id)
    rows = ["boring_id,depth,time_s,pressure"]
    for boring_id, depth in (("B1", 2.5), ("B2", 2.0), ("B2", 3.0)):
        static = P_ATM + GAMMA_W * (depth - MINI_DEPTH_TO_WATER)
        for t in (0.0, 30.0, 60.0, 120.0, 240.0):
            rows.append(f"{boring_id},{depth},{t},{static + 30.0 * np.exp(-t / 40.0):.4f}")
    (root / "dissipation.csv").write_text("\n".join(rows) + "\n")
    (root / "slug_tests.csv").write_text(
        textwrap.dedent(
            """\
            boring_id,top_depth,bottom_depth,k
            B1,2.0,2.5,1.5e-5
            B3,1.75,2.75,4e-6
            """
        )
    )
    (root / "sensor_checks.csv").write_text(
        textwrap.dedent(
            """\
            boring_id,sensor,stage,measured,expected,tolerance
            B1,pressure,pre,101.0,101.3,1.0
            B1,flow,post,295,300,15
            B2,ec,pre,141,141.3,5
            """
        )
    )
    write_geojson(
        root / "boundary.geojson",
        [polygon_feature(_square(499990.0, 4999990.0, 500090.0, 5000090.0), name="site")],
    )
    write_geojson(
        root / "zones.geojson",
        [
            polygon_feature(
                _square(500000.0, 5000000.0, 500050.0, 5000050.0),
                name="Z1",
                top=1.0,
                bottom=2.5,
                reference="depth",
            )
        ],
    )
    return root


@pytest.fixture
def mini_site(tmp_path: Path) -> Path:
    """A valid site folder: 3 borings, logs, dissipation and slug tests, boundary, one zone."""
    return make_site(tmp_path / "mini_site")
