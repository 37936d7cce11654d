"""Write a synthetic-truth site as a site folder that ``geo3d run`` accepts, plus its truth.

Every file is written in the units the site drew (``TruthSite.units``), with conversion factors
from NIST SP 811 written out here rather than taken from :mod:`geo3d.units`, so that reading the
folder back checks geo3d's own conversions against an independent source.

Folder content: ``site.toml``, ``borings.csv``, ``logs/<boring>.csv``, ``dissipation.csv``,
``slug_tests.csv``, ``boundary.geojson``, ``zones.geojson`` and ``truth/truth.json`` (true volumes
per region, part and facies, and the drawn parameters).

References
----------
.. [1] Thompson, A., Taylor, B.N. (2008) NIST Special Publication 811: 1 ft = 0.3048 m;
   1 psi = 6.894757 kPa; 1 US gal = 3.785411784 L.
"""

from __future__ import annotations

import json
from os import PathLike
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from geo3d.validation.truth import TruthSite, truth_volumes

__all__ = ["TO_SI", "write_site"]

#: Factor from each declared unit to SI (m, kPa, m3/s, mS/m, m/s); NIST SP 811.
TO_SI: dict[str, dict[str, float]] = {
    "length": {"m": 1.0, "ft": 0.3048},
    "pressure": {"kPa": 1.0, "psi": 6.894757},
    "flow": {"mL/min": 1e-6 / 60, "L/min": 1e-3 / 60, "gal/min": 3.785411784e-3 / 60},
    "ec": {"mS/m": 1.0, "uS/cm": 0.1},
    "k": {"m/s": 1.0, "cm/s": 0.01, "ft/d": 0.3048 / 86400},
}


def _factor(site: TruthSite, quantity: str) -> float:
    return TO_SI[quantity][site.units[quantity]]


def _coords(site: TruthSite, x, y) -> tuple[np.ndarray, np.ndarray]:
    f = _factor(site, "length")
    return (site.origin[0] + np.asarray(x)) / f, (site.origin[1] + np.asarray(y)) / f


def _geojson(site: TruthSite, name: str, features: list[tuple[dict, Any]]) -> str:
    items = []
    for properties, polygon in features:
        ring = np.asarray(polygon.exterior.coords)
        xs, ys = _coords(site, ring[:, 0], ring[:, 1])
        coords = [[round(float(a), 3), round(float(b), 3)] for a, b in zip(xs, ys, strict=True)]
        items.append(
            {
                "type": "Feature",
                "properties": properties,
                "geometry": {"type": "Polygon", "coordinates": [coords]},
            }
        )
    crs = {"type": "name", "properties": {"name": f"urn:ogc:def:crs:EPSG::{site.crs}"}}
    return json.dumps({"type": "FeatureCollection", "name": name, "crs": crs, "features": items})


def _site_toml(site: TruthSite, cell: float) -> str:
    u = site.units
    length = _factor(site, "length")
    pressure = _factor(site, "pressure")
    probe = site.probe

    def m(value: float) -> str:
        return f"{value / length:.6g}"

    return f"""\
# Synthetic validation site (invented), drawn from seed {site.seed} by geo3d.validation.truth.
[site]
name = "{site.name}"
crs = "EPSG:{site.crs}"

[units]
length = "{u["length"]}"
pressure = "{u["pressure"]}"
pressure_reference = "{u["pressure_reference"]}"
flow = "{u["flow"]}"
ec = "{u["ec"]}"
k = "{u["k"]}"
output_length = "{u["length"]}"
output_volume = "m3"

[files]
borings = "borings.csv"
logs = "logs/*.csv"
dissipation = "dissipation.csv"
slug_tests = "slug_tests.csv"
boundary = "boundary.geojson"
zones = "zones.geojson"

[logs]
depth = "depth"
pressure = "pressure"
flow = "flow"
ec = "ec"
time = "time"

[probe]
shape = "cylinder"
screen_length = {m(probe.screen_length)}
screen_diameter = {m(probe.screen_diameter)}
sensor_noise = {probe.sensor_noise / pressure:.6g}
pressure_limit = {probe.pressure_limit / pressure:.6g}

[flags]
hampel_window = {m(0.15)}

[composite]
interval = {m(0.15)}

[facies]
method = "thresholds"

[grid]
cell_size = [{m(cell)}, {m(cell)}, {m(0.25)}]
base = {m(site.base)}

[variogram]
elevation_tolerance = {m(0.5)}

[simulation]
realizations = 20
seed = {site.seed}

[treatment]
radius_of_influence = {m(3.0)}

[output]
formats = ["csv"]
"""


def _log_table(site: TruthSite, log: pd.DataFrame, p_atm: float) -> pd.DataFrame:
    pressure = log["pressure"] - (p_atm if site.units["pressure_reference"] == "gauge" else 0.0)
    return pd.DataFrame(
        {
            "depth": (log["depth"] / _factor(site, "length")).round(5),
            "pressure": (pressure / _factor(site, "pressure")).round(4),
            "flow": (log["flow"] / _factor(site, "flow")).map(lambda v: float(f"{v:.6g}")),
            "ec": (log["ec"] / _factor(site, "ec")).round(4),
            "time": log["time"].round(2),
        }
    )


def model_cell_size(site: TruthSite) -> float:
    """Horizontal model cell size (m): 2 m, coarser on large sites (about 40 cells across)."""
    x0, y0, x1, y1 = site.boundary.bounds
    return float(max(2.0, np.ceil(max(x1 - x0, y1 - y0) / 40.0)))


def write_site(site: TruthSite, folder: str | PathLike) -> Path:
    """Write the site folder and ``truth/truth.json``.

    Parameters
    ----------
    site
        A drawn site (:func:`geo3d.validation.truth.draw_site`).
    folder
        Folder to write (created; existing files of the same names are replaced).

    Returns
    -------
    Path
        The folder.
    """
    out = Path(folder)
    (out / "logs").mkdir(parents=True, exist_ok=True)
    (out / "truth").mkdir(exist_ok=True)
    length = _factor(site, "length")
    pressure = _factor(site, "pressure")
    b = site.borings
    x, y = _coords(site, b["x"], b["y"])
    pd.DataFrame(
        {"boring_id": b["boring_id"], "x": np.round(x, 3), "y": np.round(y, 3),
         "ground_elev": np.round(b["ground_elev"] / length, 4), "date": b["date"]}
    ).to_csv(out / "borings.csv", index=False)  # fmt: skip
    gauge = site.units["pressure_reference"] == "gauge"
    p_atm = site.p_atm
    for boring_id, log in site.logs.items():
        date = b.set_index("boring_id").loc[boring_id, "date"]
        table = _log_table(site, log, p_atm[date])
        table.to_csv(out / "logs" / f"{boring_id}.csv", index=False)
    dis = site.dissipation.copy()
    if gauge:
        dates = b.set_index("boring_id")["date"]
        dis["pressure"] = dis["pressure"] - dis["boring_id"].map(dates).map(p_atm)
    dis["depth"] = (dis["depth"] / length).round(5)
    dis["pressure"] = (dis["pressure"] / pressure).round(4)
    dis.to_csv(out / "dissipation.csv", index=False)
    slug = site.slug_tests.copy()
    slug[["top_depth", "bottom_depth"]] = (slug[["top_depth", "bottom_depth"]] / length).round(4)
    slug["k"] = (slug["k"] / _factor(site, "k")).map(lambda v: float(f"{v:.5g}"))
    slug.to_csv(out / "slug_tests.csv", index=False)
    (out / "boundary.geojson").write_text(
        _geojson(site, "boundary", [({"name": "site boundary"}, site.boundary)])
    )
    zones = [
        ({"name": z.name, "top": round(z.top / length, 4), "bottom": round(z.bottom / length, 4),
          "reference": z.reference}, z.polygon)
        for z in site.zones
    ]  # fmt: skip
    (out / "zones.geojson").write_text(_geojson(site, "zones", zones))
    (out / "site.toml").write_text(_site_toml(site, model_cell_size(site)))
    truth = {
        "seed": site.seed,
        "units": site.units,
        "info": site.info,
        "base_m": site.base,
        "ground_plane": list(site.ground),
        "water_table_plane": list(site.water_table),
        "geology": [body.describe() for body in site.geology.bodies],
        "volumes": truth_volumes(site).to_dict(orient="records"),
    }
    (out / "truth" / "truth.json").write_text(json.dumps(truth, indent=1, default=float))
    return out
