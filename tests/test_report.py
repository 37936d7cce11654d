"""Tests of the HTML report: sections, embedded figures, self-containment, graceful absence.

The run results below are a small synthetic site (invented data, for tests only), built from
the stage result types (site, logs results, calibration, water-table surface, run results);
the model's variogram fits, cross-validations and injection plans are plain namespaces with the
attributes of their types.
"""

from __future__ import annotations

import base64
import math
import re
import struct
import warnings
from html.parser import HTMLParser
from pathlib import Path
from types import SimpleNamespace

import geopandas as gpd
import numpy as np
import pandas as pd
import pyproj
import pytest
import xarray as xr
from hypothesis import given
from hypothesis import strategies as st
from shapely import affinity
from shapely.geometry import Polygon, box

from geo3d.analysis.facies_maps import facies_column_maps
from geo3d.config import config_from_dict
from geo3d.errors import Geo3dWarning
from geo3d.facies import DEFAULT_CLASSES
from geo3d.geostats.facies_crossval import FaciesCrossValidation
from geo3d.logs.calibration import Calibration
from geo3d.logs.hydraulic import shape_factor
from geo3d.logs.process import LogResults
from geo3d.logs.water_level import WaterTableSurface
from geo3d.model import ModelResult
from geo3d.report import build_report, write_report
from geo3d.report import figures as fg
from geo3d.report.html import SECTION_TITLES, _fmt
from geo3d.results import RunResults
from geo3d.site import Site

# --------------------------------------------------------------------------- synthetic run

X0, Y0 = 500_000.0, 5_600_000.0
FACIES = ("storage", "transitional", "transmissive")
# log10(gamma_w / F) for the default 0.02 m x 0.01 m cylindrical screen, Hvorslev (1951):
# F = 2 pi L / ln(L/D + sqrt(1 + (L/D)^2)) = 0.08703 m
A_PHYS = 2.0517


def _field(x, y, z):
    """Layered log10 K (m/s): a tight layer between 4 and 5.5 m elevation, open sand below."""
    layer = np.where((z > 4.0) & (z < 5.5), -7.8, -4.4)
    return layer + 0.3 * np.sin((x - X0) / 9.0) + 0.2 * np.cos((y - Y0) / 7.0) - 0.05 * z


def _codes(log10_k):
    return np.where(log10_k < -7.0, 0, np.where(log10_k < -5.0, 1, 2)).astype(np.int8)


def boundary() -> Polygon:
    return box(X0, Y0, X0 + 60.0, Y0 + 40.0)


def borings() -> pd.DataFrame:
    xy = [(8, 6), (30, 8), (52, 10), (12, 32), (33, 22), (50, 34)]
    return pd.DataFrame(
        {
            "boring_id": [f"DP-{i + 1:02d}" for i in range(len(xy))],
            "x": [X0 + a for a, _ in xy],
            "y": [Y0 + b for _, b in xy],
            "ground_elev": [10.0 + 0.02 * a for a, _ in xy],
        }
    )


def samples_and_intervals(bor: pd.DataFrame):
    rows, ints = [], []
    for b in bor.itertuples(index=False):
        depth = np.arange(0.3, 8.0, 0.05)
        elev = b.ground_elev - depth
        lk = _field(b.x, b.y, elev)
        frame = pd.DataFrame(
            {
                "boring_id": b.boring_id,
                "depth": depth,
                "elev": elev,
                "x": b.x,
                "y": b.y,
                "log10_k": lk,
                "k_log": 10.0**lk,
                "ec": 8.0 + 30.0 * (lk < -7.0) + np.cos(depth),
                # Hvorslev (1951): log10(Q/P) = log10 K - log10(gamma_w / F)
                "q_over_p": 10.0 ** (lk - A_PHYS),
                "p_atm": 101.3,
                "p_hydrostatic": 9.80665 * np.clip(depth - 2.0, 0, None),
                "p_net": 1e-4 / 10.0 ** (lk - A_PHYS),
                "pressure": 101.3
                + 9.80665 * np.clip(depth - 2.0, 0, None)
                + 1e-4 / 10.0 ** (lk - A_PHYS),
                "depth_to_water": 2.0,
                "above_water": depth < 2.0,
                "spike": False,
                "ec_above_trend": False,
                "out_of_range_high": lk > -3.5,
                "out_of_range_low": lk < -8.5,
            }
        )
        rows.append(frame)
        top = np.arange(0.3, 7.8, 0.25)
        bottom = top + 0.25
        z_mid = b.ground_elev - 0.5 * (top + bottom)
        ilk = _field(b.x, b.y, z_mid)
        codes = _codes(ilk)
        ints.append(
            pd.DataFrame(
                {
                    "boring_id": b.boring_id,
                    "x": b.x,
                    "y": b.y,
                    "top": top,
                    "bottom": bottom,
                    "z_mid": z_mid,
                    "log10_k": ilk,
                    "ec": 8.0 + 30.0 * (ilk < -7.0),
                    "n_samples": 5,
                    "facies": [FACIES[c] for c in codes],
                    "facies_code": codes,
                }
            )
        )
    return pd.concat(rows, ignore_index=True), pd.concat(ints, ignore_index=True)


def voxel_model() -> xr.Dataset:
    dx, dz = 2.0, 0.5
    x = X0 + np.arange(dx / 2, 60.0, dx)
    y = Y0 + np.arange(dx / 2, 40.0, dx)
    z = np.arange(2.0 + dz / 2, 10.0, dz)
    zz, yy, xx = np.meshgrid(z, y, x, indexing="ij")
    lk = _field(xx, yy, zz)
    ground = 10.0 + 0.02 * (xx - X0)
    mask = zz < ground
    codes = np.where(mask, _codes(lk), -1).astype(np.int8)
    ds = xr.Dataset(
        coords={"z": z, "y": y, "x": x},
        attrs={
            "crs": pyproj.CRS("EPSG:32631").to_wkt(),
            "cell_size": (dx, dx, dz),
            **DEFAULT_CLASSES.attrs(),
        },
    )
    ds["mask"] = (("z", "y", "x"), mask)
    ds["log10_k"] = (("z", "y", "x"), np.where(mask, lk, np.nan))
    ds["log10_k_var"] = (("z", "y", "x"), np.where(mask, 0.2, np.nan))
    ds["k"] = 10.0 ** ds["log10_k"]
    ds["ec"] = (("z", "y", "x"), np.where(mask, 8.0 + 30.0 * (lk < -7.0), np.nan))
    ds["facies_code"] = (("z", "y", "x"), codes)
    for code, name in enumerate(FACIES):
        prob = np.clip((codes == code) * 0.8 + 0.1, 0, 1)
        ds[f"prob_{name}"] = (("z", "y", "x"), np.where(mask, prob, np.nan))
    ds["saturated"] = (("z", "y", "x"), mask & (zz < 8.0))
    return ds


def variogram_fit():
    from geo3d.geostats.covariance import CovarianceModel

    model = CovarianceModel(
        kind="exponential",
        sill=1.1,
        nugget=0.05,
        range_h=25.0,
        range_v=1.2,
        azimuth=30.0,
        minor_ratio=0.6,
    )
    lags_v = np.arange(0.25, 3.0, 0.25)
    lags_h = np.array([10.0, 20.0, 30.0, 40.0])
    vertical = pd.DataFrame(
        {
            "lag": lags_v,
            "gamma": 0.05 + 1.1 * (1 - np.exp(-3 * lags_v / 1.2)),
            "n_pairs": np.arange(len(lags_v))[::-1] * 20 + 30,
        }
    )
    horizontal = pd.DataFrame(
        {
            "lag": lags_h,
            "gamma": 0.05 + 1.1 * (1 - np.exp(-3 * lags_h / 25.0)),
            "n_pairs": [40, 120, 90, 30],
        }
    )
    return SimpleNamespace(
        model=model, vertical=vertical, horizontal=horizontal, kind="exponential", rmse=0.04
    )


def crossval(intervals: pd.DataFrame):
    rng = np.random.default_rng(1)
    observed = intervals["log10_k"].to_numpy()
    estimate = observed + rng.normal(0, 0.4, observed.size)
    variance = np.full(observed.size, 0.16)
    error = estimate - observed
    samples = pd.DataFrame(
        {
            "group": intervals["boring_id"],
            "observed": observed,
            "estimate": estimate,
            "variance": variance,
            "error": error,
            "std_error": error / np.sqrt(variance),
        }
    )
    summary = {
        "rmse": float(np.sqrt(np.mean(error**2))),
        "mean_error": float(error.mean()),
        "mean_std_error": float(samples["std_error"].mean()),
        "var_std_error": float(samples["std_error"].var()),
        "n": int(observed.size),
    }
    return SimpleNamespace(samples=samples, summary=summary, per_group=None)


def water_table(levels: pd.DataFrame) -> WaterTableSurface:
    # head falling 1 cm per m toward the east (azimuth 90 degrees): common sign convention,
    # wt_elev = 8 - 0.01 (x - X0)
    return WaterTableSurface(
        method="plane",
        a=-0.01,
        b=0.0,
        c=8.0 + 0.01 * X0,
        gradient=0.01,
        flow_direction_deg=90.0,
        n_points=len(levels),
    )


def make_site(*, borings_table: pd.DataFrame | None = None, zones=None) -> Site:
    """A site with the synthetic geometry; the tables the report does not read are empty."""
    config = config_from_dict({"site": {"name": "Synthetic test site", "crs": "EPSG:32631"}})
    empty = pd.DataFrame()
    return Site(
        name=config.site.name,
        root=Path("synthetic-site"),
        config=config,
        crs=pyproj.CRS("EPSG:32631"),
        borings=borings() if borings_table is None else borings_table,
        samples=empty,
        dissipation=empty,
        slug_tests=empty,
        sensor_checks=empty,
        boundary=boundary(),
        zones=gpd.GeoDataFrame(geometry=[], crs="EPSG:32631") if zones is None else zones,
    )


def make_results(*, with_model: bool = True, with_slug_tests: bool = True) -> RunResults:
    bor = borings()
    samples, intervals = samples_and_intervals(bor)
    levels = bor.assign(
        test_id=np.arange(len(bor)),
        depth=5.0,
        p_static=130.0,
        depth_to_water=2.0 + 0.01 * (bor.x - X0),
        fraction_dissipated=0.95,
        method="tail",
        fit_rmse=0.1,
    )
    levels["wt_elev"] = levels["ground_elev"] - levels["depth_to_water"]
    zones = gpd.GeoDataFrame(
        {
            "name": ["Zone A"],
            "top": [2.0],
            "bottom": [7.0],
            "reference": ["depth"],
            "design_fraction": [0.2],
            "radius_of_influence": [3.0],
        },
        geometry=[box(X0 + 15, Y0 + 10, X0 + 40, Y0 + 30)],
        crs="EPSG:32631",
    )
    site = make_site(borings_table=bor, zones=zones)
    if with_slug_tests:
        residuals = [
            {
                "boring_id": "DP-01",
                "top_depth": 6.0,
                "bottom_depth": 7.0,
                "k_slug": 6e-5,
                "k_predicted": 5e-5,
                "k_physics": 4.2e-5,
                "log10_residual": 0.079,
                "n_samples": 20,
            },
            {
                "boring_id": "DP-03",
                "top_depth": 6.0,
                "bottom_depth": 7.0,
                "k_slug": 1e-8,
                "k_predicted": 1.5e-8,
                "k_physics": 1.2e-8,
                "log10_residual": -0.176,
                "n_samples": 20,
            },
            {
                "boring_id": "DP-05",
                "top_depth": 5.0,
                "bottom_depth": 6.0,
                "k_slug": 2e-6,
                "k_predicted": 1.5e-6,
                "k_physics": 1.3e-6,
                "log10_residual": 0.125,
                "n_samples": 20,
            },
        ]
        calibration = Calibration(
            method="slug_tests",
            a=A_PHYS + 0.1,
            b=0.95,
            se_a=0.2,
            se_b=0.05,
            n_tests=3,
            r2=0.97,
            residuals=residuals,
        )
    else:
        calibration = Calibration(method="physics", a=A_PHYS, b=1.0)
    logs = LogResults(
        samples=samples,
        intervals=intervals,
        water_levels=levels,
        water_table=water_table(levels),
        calibration=calibration,
        sensor_checks=pd.DataFrame(
            {
                "boring_id": ["DP-01", "DP-02"],
                "sensor": ["pressure", "flow"],
                "stage": ["pre", "post"],
                "measured": [100.1, 0.9],
                "expected": [100.0, 1.0],
                "tolerance": [0.5, 0.05],
                "passed": [True, False],
            }
        ),
        profiles=pd.DataFrame(),
        facies_classes=DEFAULT_CLASSES,
        ec_trend={},
        shape_factor=shape_factor("cylinder", length=0.02, diameter=0.01),
    )
    results = RunResults(site=site, logs=logs, timings={"logs": 1.2, "model": 3.4})
    if not with_model:
        return results
    ds = voxel_model()
    results.model = ModelResult(
        ds,
        variograms={"log10_k": variogram_fit()},
        crossval={"log10_k": crossval(intervals)},
        facies_crossval=FaciesCrossValidation(
            ("storage", "transitional", "transmissive"),
            pd.DataFrame(
                {
                    "boring_id": ["B1", "B1", "B2", "B2"],
                    "z_mid": [1.0, 2.0, 1.0, 2.0],
                    "observed": [0, 2, 0, 1],
                    "p_storage": [0.8, 0.1, 0.6, 0.2],
                    "p_transitional": [0.1, 0.1, 0.2, 0.3],
                    "p_transmissive": [0.1, 0.8, 0.2, 0.5],
                }
            ),
        ),
    )
    dz = 0.5
    results.maps = {
        "transmissive_thickness": ((ds.facies_code == 2).sum("z") * dz).where(ds.mask.any("z")),
        "storage_thickness": ((ds.facies_code == 0).sum("z") * dz).where(ds.mask.any("z")),
    }
    results.maps["transmissive_thickness_p10"] = 0.8 * results.maps["transmissive_thickness"]
    results.maps["transmissive_thickness_p90"] = 1.2 * results.maps["transmissive_thickness"]
    results.facies_maps = facies_column_maps(ds)
    results.volumes = pd.DataFrame(
        {
            "zone": ["Zone A", "Zone A"],
            "facies": ["storage", "transmissive"],
            "volume_m3": [700.0, 2500.0],
            "volume_m3_p10": [600.0, 2300.0],
            "volume_m3_p50": [690.0, 2490.0],
            "volume_m3_p90": [820.0, 2700.0],
        }
    )
    points = pd.DataFrame(
        {"x": X0 + np.array([20.0, 25.0, 30.0]), "y": Y0 + np.array([15.0, 20.0, 15.0])}
    )
    schedule = pd.DataFrame(
        {
            "point_id": [1, 1, 2, 3],
            "x": [0.0] * 4,
            "y": [0.0] * 4,
            "top_depth": [3.0, 6.0, 3.0, 3.0],
            "bottom_depth": [4.0, 7.0, 4.0, 4.0],
            "volume_m3": [1.0, 2.0, 1.5, 1.2],
        }
    )
    results.injection = {
        "Zone A": SimpleNamespace(
            points=points,
            schedule=schedule,
            summary={"zone": "Zone A", "n_points": 3, "planned_volume_m3": 5.7},
        )
    }
    return results


# --------------------------------------------------------------------------- helpers

# PNG signature and IHDR layout: PNG specification (W3C 2003 / ISO/IEC 15948:2004) 5.2 and 11.2.2
PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"


class _Collector(HTMLParser):
    """Collect headings, section ids, images and every attribute that can load a resource."""

    def __init__(self):
        super().__init__()
        self.sections: list[str] = []
        self.images: list[dict] = []
        self.resource_attrs: list[tuple[str, str, str]] = []
        self.tags: list[str] = []
        self.h2: list[str] = []
        self._in_h2 = False

    def handle_starttag(self, tag, attrs):
        attrs = dict(attrs)
        self.tags.append(tag)
        if tag == "section":
            self.sections.append(attrs.get("id"))
        if tag == "img":
            self.images.append(attrs)
        if tag == "h2":
            self._in_h2 = True
            self.h2.append("")
        for name in ("src", "href", "srcset", "poster", "data", "action", "background"):
            if name in attrs:
                self.resource_attrs.append((tag, name, attrs[name] or ""))

    def handle_endtag(self, tag):
        if tag == "h2":
            self._in_h2 = False

    def handle_data(self, data):
        if self._in_h2:
            self.h2[-1] += data


def parse(text: str) -> _Collector:
    collector = _Collector()
    collector.feed(text)
    return collector


def png_size(png: bytes) -> tuple[int, int]:
    assert png[:8] == PNG_SIGNATURE
    length, kind = struct.unpack(">I4s", png[8:16])
    assert kind == b"IHDR" and length == 13
    return struct.unpack(">II", png[16:24])


def decode_img(src: str) -> bytes:
    prefix = "data:image/png;base64,"
    assert src.startswith(prefix), src[:40]
    return base64.b64decode(src[len(prefix) :], validate=True)


@pytest.fixture(scope="module")
def full_report(tmp_path_factory):
    path = tmp_path_factory.mktemp("report") / "report.html"
    with warnings.catch_warnings():
        warnings.simplefilter("error", Geo3dWarning)  # no section may fail on complete data
        written = write_report(make_results(), path)
    return written, written.read_text(encoding="utf-8")


# --------------------------------------------------------------------------- whole report


@pytest.mark.slow
def test_report_has_every_section_in_order(full_report):
    _, text = full_report
    page = parse(text)
    assert page.sections == list(SECTION_TITLES)
    for title in SECTION_TITLES.values():
        assert title in page.h2
    # the table of contents links every section
    for anchor in SECTION_TITLES:
        assert f'href="#{anchor}"' in text


@pytest.mark.slow
def test_report_embeds_every_expected_figure_as_png(full_report):
    _, text = full_report
    page = parse(text)
    names = [img.get("data-figure") for img in page.images]
    expected = {
        "site-map",
        "water-table",
        "calibration",
        "variogram-log10_k",
        "crossval-log10_k",
        "section-A",
        "section-B",
        "view3d",
    } | {f"log-DP-{i:02d}" for i in range(1, 7)}
    assert expected <= set(names)
    assert sum(n.startswith("map-") and "thickness" in n for n in names) == 2
    assert sum(n.startswith("map-") and "prob" in n for n in names) == 3
    for img in page.images:
        width, height = png_size(decode_img(img["src"]))
        assert width > 100 and height > 100
        assert img.get("alt")


@pytest.mark.slow
def test_report_references_no_external_resource(full_report):
    _, text = full_report
    page = parse(text)
    for tag, name, value in page.resource_attrs:
        assert value.startswith(("data:", "#")), (tag, name, value[:60])
    assert not {"script", "link", "iframe", "object", "embed"} & set(page.tags)
    assert not re.search(r"https?://|file:|@import", text, flags=re.IGNORECASE)
    for url in re.findall(r"url\(([^)]*)\)", text):
        assert url.strip("'\" ").startswith("data:")


@pytest.mark.slow
def test_report_title_block(full_report):
    _, text = full_report
    assert "<h1>Synthetic test site</h1>" in text
    assert "EPSG:32631" in text
    import geo3d

    assert geo3d.__version__ in text


@pytest.mark.slow
def test_cautions_open_and_close_the_report(full_report):
    _, text = full_report
    first = text.index('id="read-first"')
    last = text.index('id="cautions"')
    assert first < text.index('id="site"') < text.index('id="methods"') < last
    for part in (text[first : text.index('id="site"')], text[last:]):
        lower = part.lower()
        assert "licensed professional" in lower
        assert "regulations and permits" in lower
        assert "underground injection control" in lower
        assert "utilities" in lower
        assert "interpolation" in lower


@pytest.mark.slow
def test_methods_cite_their_sources(full_report):
    _, text = full_report
    sources = "Hvorslev Hampel Archie Freeze Journel Huijbregts Deutsch Pebesma Schwarz"
    for source in sources.split():
        assert source in text


@pytest.mark.slow
def test_report_tables_carry_the_numbers(full_report):
    _, text = full_report
    # P10/P50/P90 of the volumes and the cross-validation statistics reach the page
    for column in (
        "<th>P10</th>",
        "<th>P50</th>",
        "<th>P90</th>",
        "RMSE",
        "mean standardized error",
        "variance of standardized error",
    ):
        assert column in text
    assert "2,700" in text  # P90 transmissive volume of the synthetic zone, formatted
    # facies cross-validation: 3 of 4 intervals predicted right (most probable facies); Brier
    # score by hand: (0.06 + 0.06 + 0.24 + 0.78) / 4 = 0.285
    assert "Brier skill score" in text and "<td>0.75</td>" in text and "<td>0.285</td>" in text
    # injection: 3 points share the 3-4 m interval, 1 + 1.5 + 1.2 = 3.7 m3 (sum by hand)
    assert "<td>3.70</td>" in text


def test_volumes_are_laid_out_one_quantity_per_row():
    from geo3d.report.html import _long_volumes

    volumes = pd.DataFrame(
        {
            "zone": ["Z"],
            "facies": ["storage"],
            "area_m2": [50.0],
            "pore_volume_m3": [10.0],
            "pore_volume_m3_most_likely": [9.0],
            "pore_volume_m3_p10": [8.0],
            "pore_volume_m3_p50": [10.5],
            "pore_volume_m3_p90": [12.0],
        }
    )
    long = _long_volumes(volumes)
    assert long.to_dict("records") == [
        {
            "zone": "Z",
            "facies": "storage",
            "area_m2": 50.0,
            "quantity": "pore volume m3",
            "estimate": 10.0,
            "most likely": 9.0,
            "P10": 8.0,
            "P50": 10.5,
            "P90": 12.0,
        }
    ]


def _keep_borings(results, ids):
    """Cut the logs down to a few borings (keeps the tests fast)."""
    for name in ("samples", "intervals"):
        table = getattr(results.logs, name)
        setattr(results.logs, name, table[table["boring_id"].isin(ids)])
    return results


def test_write_report_leaves_only_the_report(tmp_path):
    path = write_report(RunResults(site=make_site()), tmp_path / "out" / "report.html")
    assert path == tmp_path / "out" / "report.html"
    assert [p.name for p in path.parent.iterdir()] == ["report.html"]
    assert path.stat().st_mode & 0o444 == 0o444  # readable by everyone it is shared with


def test_log_figures_handed_over_are_embedded_as_they_are(tmp_path):
    results = _keep_borings(make_results(with_model=False), ["DP-01"])
    fig = fg.new_figure(2.0, 2.0)
    fig.add_subplot().plot([0, 1], [1, 0])
    png = fg.figure_to_png(fig)
    path = write_report(results, tmp_path / "report.html", log_figures={"DP-01": png})
    text = path.read_text(encoding="utf-8")
    logs = [img for img in parse(text).images if img.get("data-figure") == "log-DP-01"]
    assert len(logs) == 1 and decode_img(logs[0]["src"]) == png


# --------------------------------------------------------------------------- absent data


def test_absent_parts_give_notes_not_errors(tmp_path):
    results = _keep_borings(make_results(with_model=False, with_slug_tests=False), ["DP-02"])
    results.logs.sensor_checks = pd.DataFrame()
    results.site.zones = gpd.GeoDataFrame(geometry=[], crs="EPSG:32631")
    with warnings.catch_warnings():
        warnings.simplefilter("error", Geo3dWarning)
        text = write_report(results, tmp_path / "report.html").read_text(encoding="utf-8")
    page = parse(text)
    assert page.sections == list(SECTION_TITLES)
    assert "physics-only k, no calibration" in text.lower()
    assert "no 3d model was built" in text.lower()
    assert "could not be drawn" not in text
    names = {img.get("data-figure") for img in page.images}
    assert "site-map" in names and "view3d" not in names and "calibration" not in names


def test_nearly_empty_results_still_make_a_report():
    results = RunResults(site=make_site(borings_table=borings().iloc[0:0]))
    with warnings.catch_warnings():
        warnings.simplefilter("error", Geo3dWarning)
        text = build_report(results)
    assert parse(text).sections == list(SECTION_TITLES)
    assert "Synthetic test site" in text


def test_failing_section_becomes_a_note_and_a_warning():
    from geo3d.report.html import _Context, _render_section

    class Broken:
        @property
        def vertical(self):
            raise RuntimeError("variogram table unreadable")

    results = make_results(with_model=False)
    results.model = ModelResult(None, variograms={"log10_k": Broken()}, crossval={})
    ctx = _Context.from_results(results)
    with pytest.warns(Geo3dWarning, match="Variograms"):
        html_text = _render_section(ctx, "variograms")
    assert html_text.startswith('<section id="variograms"')
    assert "variogram table unreadable" in html_text


def test_missing_3d_rendering_is_a_note(monkeypatch):
    from geo3d.report import view3d
    from geo3d.report.html import _Context, _section_view3d

    def no_gl(*args, **kwargs):
        raise view3d.View3DUnavailable("no OpenGL context")

    monkeypatch.setattr(view3d, "render_model_view", no_gl)
    text = _section_view3d(_Context.from_results(make_results()))
    assert "could not be rendered on this machine (no OpenGL context)" in text
    assert "<img" not in text


# --------------------------------------------------------------------------- figure helpers


@pytest.mark.parametrize(
    ("azimuth", "expected"),
    # azimuth clockwise from north: 0 north, 90 east, 225 south-west (common convention)
    [
        (0.0, (0.0, 1.0)),
        (90.0, (1.0, 0.0)),
        (180.0, (0.0, -1.0)),
        (225.0, (-math.sqrt(0.5), -math.sqrt(0.5))),
    ],
)
def test_azimuth_vector(azimuth, expected):
    assert fg.azimuth_vector(azimuth) == pytest.approx(expected, abs=1e-12)


def test_facies_colours_are_okabe_ito():
    # Okabe & Ito (2008) palette hex values
    palette = {
        "#000000",
        "#E69F00",
        "#56B4E9",
        "#009E73",
        "#F0E442",
        "#0072B2",
        "#D55E00",
        "#CC79A7",
    }
    colors = fg.facies_colors(3)
    assert set(colors) <= palette
    assert len(set(colors)) == 3


def test_section_lines_follow_the_long_axis_of_a_rotated_rectangle():
    # a 100 m x 20 m rectangle turned 30 degrees counter-clockwise (geometry by hand): the long
    # axis through the centre is 100 m long along (cos 30, sin 30), the short one 20 m across
    rect = affinity.rotate(box(0, 0, 100, 20), 30, origin=(50, 10))
    a, b = fg.default_section_lines(rect)
    assert a.length == pytest.approx(100.0, rel=1e-9)
    assert b.length == pytest.approx(20.0, rel=1e-9)
    direction = np.subtract(a.end, a.start) / a.length
    assert direction == pytest.approx([math.cos(math.radians(30)), math.sin(math.radians(30))])
    across = np.subtract(b.end, b.start) / b.length
    assert abs(float(np.dot(direction, across))) < 1e-9
    mid_a = np.add(a.start, a.end) / 2
    assert mid_a == pytest.approx([50.0, 10.0])


def test_section_samples_the_nearest_cell():
    ds = voxel_model()
    line = fg.SectionLine("A", (X0 + 1.0, Y0 + 21.0), (X0 + 59.0, Y0 + 21.0))
    section = fg.sample_section(ds, line, variables=("log10_k", "facies_code"), n_points=30)
    assert section["log10_k"].dims == ("z", "distance")
    # station k lies at x = X0 + 1 + 2k; cell centres are at X0 + 1, 3, ... (2 m cells), so the
    # nearest cell of station k is cell column k and its value is the model's own
    expected = ds["log10_k"].sel(y=Y0 + 21.0, method="nearest").isel(x=np.arange(30))
    assert np.allclose(section["log10_k"].values, expected.values, equal_nan=True)


def test_projected_intervals_keep_nearby_borings_only():
    _, intervals = samples_and_intervals(borings())
    line = fg.SectionLine("B", (X0 + 30.0, Y0), (X0 + 30.0, Y0 + 40.0))
    near = fg.project_intervals(intervals, line, max_offset=4.0)
    # DP-02 at x = 30 lies on the line and DP-05 at x = 33 within 4 m; the others are farther
    assert sorted(near["boring_id"].unique()) == ["DP-02", "DP-05"]
    dp02 = near[near.boring_id == "DP-02"]
    assert dp02["distance"].iloc[0] == pytest.approx(8.0)
    assert (dp02["z_top"] - dp02["z_bottom"]).to_numpy() == pytest.approx(0.25)


@given(st.floats(allow_nan=False, allow_infinity=False, min_value=-1e12, max_value=1e12))
def test_number_format_keeps_three_significant_digits(value):
    text = _fmt(value)
    back = float(text.replace(",", ""))
    if value == 0:
        assert back == 0
    else:
        assert back == pytest.approx(value, rel=6e-3, abs=6e-3 if abs(value) >= 1 else 0)


def test_number_format_marks_missing_values():
    assert _fmt(float("nan")) == _fmt(None) == "\u2013"
    assert _fmt(True) == "yes"
    assert _fmt(12345) == "12,345"


# --------------------------------------------------------------------------- real pipeline


@pytest.mark.slow
def test_pipeline_run_report_has_every_section_and_image(mini_site, tmp_path):
    pipeline = pytest.importorskip("geo3d.pipeline")
    out = tmp_path / "out"
    with warnings.catch_warnings():
        warnings.simplefilter("error", Geo3dWarning)  # no report section may fail
        warnings.filterwarnings("ignore", category=Geo3dWarning, module=r"geo3d\.(?!report)")
        pipeline.run(mini_site, out, n_realizations=2)
    text = (out / "report.html").read_text(encoding="utf-8")
    page = parse(text)
    assert page.sections == list(SECTION_TITLES)
    assert "could not be drawn" not in text
    names = {img.get("data-figure") for img in page.images}
    expected = {
        "site-map",
        "log-B1",
        "log-B2",
        "log-B3",
        "variogram-log10_k",
        "crossval-log10_k",
        "section-A",
        "section-B",
        "view3d",
    }
    assert expected <= names, expected - names
    assert any(n.startswith("map-") and "thickness" in n for n in names)
    for img in page.images:
        png_size(decode_img(img["src"]))
    for tag, name, value in page.resource_attrs:
        assert value.startswith(("data:", "#")), (tag, name, value[:60])
