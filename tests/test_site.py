import shutil
import warnings
from pathlib import Path

import numpy as np
import pytest
from conftest import MINI_BORINGS, MINI_DEPTHS, make_site
from shapely import Point

from geo3d.errors import (
    CRSError,
    Geo3dWarning,
    LogFormatError,
    SiteValidationError,
    TableFormatError,
    WaterLevelError,
)
from geo3d.site import ABSOLUTE_PRESSURE_FLOOR, Site, read_site

US_FT = 1200 / 3937  # m, US survey foot (NIST SP 811)


def edit(path: Path, old: str, new: str) -> None:
    text = path.read_text()
    assert old in text, f"{old!r} not in {path}"
    path.write_text(text.replace(old, new))


def test_mini_site_reads_with_expected_counts(mini_site: Path):
    with warnings.catch_warnings():
        warnings.simplefilter("error", Geo3dWarning)
        site = read_site(mini_site)
    assert isinstance(site, Site)
    assert site.name == "Mini site"
    assert site.root == mini_site
    assert site.crs.to_epsg() == 32631
    assert len(site.borings) == 3
    assert len(site.samples) == 3 * len(MINI_DEPTHS)
    assert site.dissipation["test_id"].nunique() == 3
    assert len(site.slug_tests) == 2 and len(site.sensor_checks) == 3
    assert list(site.zones["name"]) == ["Z1"]
    assert site.boundary.area == pytest.approx(100.0 * 100.0)
    assert site.dem is None
    assert list(site.samples.columns[:7]) == [
        "boring_id",
        "depth",
        "elev",
        "pressure",
        "flow",
        "ec",
        "time_s",
    ]


def test_sample_elevation_is_ground_minus_depth(mini_site: Path):
    site = read_site(mini_site)
    for boring_id, (_, _, ground) in MINI_BORINGS.items():
        rows = site.samples[site.samples["boring_id"] == boring_id]
        np.testing.assert_allclose(rows["elev"], ground - rows["depth"])
    # sorted by boring then depth
    assert site.samples.equals(
        site.samples.sort_values(["boring_id", "depth"]).reset_index(drop=True)
    )


def test_boring_without_log(mini_site: Path):
    (mini_site / "logs" / "B2.csv").unlink()
    with pytest.raises(TableFormatError, match=r"borings.csv, column 'boring_id', line 3.*'B2'"):
        read_site(mini_site)


def test_log_without_boring_row(mini_site: Path):
    shutil.copy(mini_site / "logs" / "B1.csv", mini_site / "logs" / "B7.csv")
    with pytest.raises(LogFormatError, match=r"B7.csv: log of boring 'B7' has no row in borings"):
        read_site(mini_site)


def test_boring_outside_boundary_warns(mini_site: Path):
    edit(mini_site / "borings.csv", "B3,500030.0,5000070.0", "B3,500030.0,5000570.0")
    with pytest.warns(Geo3dWarning, match=r"borings.csv.*'B3' outside the site boundary"):
        site = read_site(mini_site)
    assert len(site.borings) == 3


def test_no_dissipation_test_needs_depth_to_water(mini_site: Path):
    edit(mini_site / "site.toml", 'dissipation = "dissipation.csv"', 'dissipation = ""')
    with pytest.raises(WaterLevelError, match=r"no dissipation test.*depth_to_water"):
        read_site(mini_site)
    (mini_site / "site.toml").write_text(
        (mini_site / "site.toml").read_text() + "\n[water]\ndepth_to_water = 1.5\n"
    )
    site = read_site(mini_site)
    assert site.dissipation.empty
    assert site.config.water.depth_to_water == 1.5


def test_pressure_below_atmospheric_when_absolute(mini_site: Path):
    log = mini_site / "logs" / "B1.csv"
    lines = log.read_text().splitlines()
    fields = lines[3].split(",")
    fields[1] = "60"  # kPa: below any atmospheric pressure at a land site
    lines[3] = ",".join(fields)
    log.write_text("\n".join(lines) + "\n")
    with pytest.raises(LogFormatError) as info:
        read_site(mini_site)
    message = str(info.value)
    assert "B1.csv, line 4, column 'pressure'" in message
    assert "below atmospheric" in message and "'B1'" in message
    assert f"{ABSOLUTE_PRESSURE_FLOOR:g} kPa, a plausibility floor" in message
    # With a declared atmospheric pressure, the message names it instead.
    (mini_site / "site.toml").write_text(
        (mini_site / "site.toml").read_text() + "\n[probe]\natmospheric_pressure = 101.3\n"
    )
    with pytest.raises(LogFormatError, match=r"atmospheric_pressure 101.3 kPa"):
        read_site(mini_site)
    # Dissipation records are checked too.
    log.write_text(log.read_text().replace("\n1,60,", "\n1,150,"))
    dissipation = mini_site / "dissipation.csv"
    dissipation.write_text(dissipation.read_text() + "B2,3.0,300.0,50.0\n")
    with pytest.raises(TableFormatError, match=r"dissipation.csv, column 'pressure'.*'B2'"):
        read_site(mini_site)
    # Gauge pressure is not checked against atmospheric.
    edit(mini_site / "site.toml", 'pressure_reference = "absolute"', 'pressure_reference = "gauge"')
    assert len(read_site(mini_site).samples) == 33


def test_many_problems_collected_in_one_pass(mini_site: Path):
    edit(mini_site / "borings.csv", "B2,500060.0", "B2,5000x60.0")
    (mini_site / "logs" / "B3.csv").write_text("depth,pressure,flow,ec,time\n2,150,300,20,1\n1,1")
    edit(mini_site / "slug_tests.csv", "B3,1.75,2.75", "B3,2.75,1.75")
    edit(mini_site / "site.toml", 'dissipation = "dissipation.csv"', 'dissipation = ""')
    (mini_site / "zones.geojson").write_text("")
    with pytest.raises(SiteValidationError) as info:
        read_site(mini_site)
    problems = info.value.problems
    assert len(problems) == 5
    assert any("borings.csv, line 3, column 'x'" in p for p in problems)
    assert any("B3.csv" in p for p in problems)
    assert any("slug_tests.csv, line 3, column 'bottom_depth'" in p for p in problems)
    assert any("no dissipation test" in p for p in problems)
    assert any("zones.geojson" in p and "empty" in p for p in problems)


@pytest.mark.parametrize(
    ("file", "old", "new", "error", "message"),
    [
        (
            "slug_tests.csv",
            "B3,",
            "B9,",
            TableFormatError,
            r"slug_tests.csv, column 'boring_id'.*'B9'",
        ),
        (
            "site.toml",
            '"EPSG:32631"',
            '""',
            CRSError,
            r"site.toml, column '\[site\] crs': no CRS given",
        ),
        ("site.toml", "EPSG:32631", "EPSG:4326", CRSError, r"site.toml.*not a projected CRS"),
    ],
)
def test_bad_input_is_refused_naming_the_file(mini_site: Path, file, old, new, error, message):
    edit(mini_site / file, old, new)
    with pytest.raises(error, match=message):
        read_site(mini_site)


def test_hull_boundary_when_none_given(mini_site: Path):
    edit(mini_site / "site.toml", 'boundary = "boundary.geojson"', 'boundary = ""')
    site = read_site(mini_site)
    for x, y, _ in MINI_BORINGS.values():
        assert site.boundary.contains(Point(x, y))
    # Buffered by 10 % of the hull's larger side (60 m, in y, here), at least 5 m.
    assert site.boundary.bounds[0] == pytest.approx(500010.0 - 6.0, abs=0.01)


def test_site_in_us_survey_feet(tmp_path: Path):
    root = make_site(tmp_path / "ft")
    edit(root / "site.toml", 'crs = "EPSG:32631"', 'crs = "EPSG:2263"')
    edit(root / "site.toml", 'length = "m"', 'length = "us_survey_ft"')
    for name in ("boundary.geojson", "zones.geojson"):
        edit(root / name, "EPSG::32631", "EPSG::2263")
    site = read_site(root)
    assert site.crs.axis_info[0].unit_name == "metre"
    assert site.borings["x"].iloc[0] == pytest.approx(500010.0 * US_FT)
    assert site.samples["depth"].iloc[0] == pytest.approx(0.5 * US_FT)
    # The boundary, given in the declared feet CRS, lands on the same metre coordinates.
    assert site.boundary.bounds[0] == pytest.approx(499990.0 * US_FT, abs=1e-6)
    assert site.zones["top"].iloc[0] == pytest.approx(1.0 * US_FT)


@pytest.mark.filterwarnings("ignore:Use `@` matmul:PendingDeprecationWarning")
def test_dem_is_read(mini_site: Path):
    import rasterio
    from rasterio.transform import from_origin

    data = np.full((10, 10), 50.0, dtype="float32")
    with rasterio.open(
        mini_site / "dem.tif",
        "w",
        driver="GTiff",
        height=10,
        width=10,
        count=1,
        dtype="float32",
        crs="EPSG:32631",
        transform=from_origin(499990.0, 5000090.0, 10.0, 10.0),
    ) as dst:
        dst.write(data, 1)
    (mini_site / "site.toml").write_text(
        (mini_site / "site.toml").read_text().replace("[logs]", 'dem = "dem.tif"\n\n[logs]')
    )
    site = read_site(mini_site)
    elevation, transform = site.dem
    assert elevation.shape == (10, 10)
    assert transform.c == pytest.approx(499990.0)
