from pathlib import Path

import numpy as np
import pytest

from geo3d.errors import TableFormatError
from geo3d.io.readers import (
    read_borings,
    read_dissipation,
    read_sensor_checks,
    read_slug_tests,
)

FT = 0.3048  # m (NIST SP 811)
PSI = 6.894757  # kPa (NIST SP 811)


def write(tmp_path: Path, name: str, text: str) -> Path:
    path = tmp_path / name
    path.write_text(text)
    return path


def test_borings_read_and_converted(tmp_path: Path):
    path = write(tmp_path, "b.csv", "boring_id,x,y,ground_elev\nA,10,20,100\nB,30,40,101.5\n")
    table = read_borings(path, length_unit="ft")
    assert list(table.columns) == ["boring_id", "x", "y", "ground_elev"]
    assert list(table["boring_id"]) == ["A", "B"]
    np.testing.assert_allclose(table["ground_elev"], [100 * FT, 101.5 * FT])
    np.testing.assert_allclose(table["x"], [10 * FT, 30 * FT])


def test_borings_missing_column_suggests_misspelling(tmp_path: Path):
    path = write(tmp_path, "b.csv", "boring_id,x,y,ground_elv\nA,1,2,3\n")
    with pytest.raises(TableFormatError) as info:
        read_borings(path)
    message = str(info.value)
    assert "b.csv, line 1" in message
    assert "'ground_elev'" in message and "'ground_elv'" in message


def test_borings_non_numeric_cell_names_line_and_column(tmp_path: Path):
    path = write(tmp_path, "b.csv", "boring_id,x,y,ground_elev\nA,1,2,3\nB,1,two,3\n")
    with pytest.raises(
        TableFormatError, match=r"b.csv, line 3, column 'y': not a number \('two'\)"
    ):
        read_borings(path)


def test_borings_empty_cell(tmp_path: Path):
    path = write(tmp_path, "b.csv", "boring_id,x,y,ground_elev\nA,1,2,\n")
    with pytest.raises(TableFormatError, match=r"line 2, column 'ground_elev': empty cell"):
        read_borings(path)


def test_borings_duplicate_ids(tmp_path: Path):
    path = write(tmp_path, "b.csv", "boring_id,x,y,ground_elev\nA,1,2,3\nB,1,2,3\nA,5,6,7\n")
    with pytest.raises(TableFormatError, match=r"lines 2, 4, column 'boring_id'.*duplicate.*'A'"):
        read_borings(path)


def test_empty_files(tmp_path: Path):
    with pytest.raises(TableFormatError, match="empty"):
        read_borings(write(tmp_path, "b.csv", ""))
    with pytest.raises(TableFormatError, match="no data rows"):
        read_borings(write(tmp_path, "c.csv", "boring_id,x,y,ground_elev\n"))
    with pytest.raises(TableFormatError, match="not found"):
        read_borings(tmp_path / "nowhere.csv")


def test_borings_dates(tmp_path: Path):
    path = write(tmp_path, "b.csv", "boring_id,x,y,ground_elev,date\nA,1,2,3,2026-05-01\n")
    assert str(read_borings(path)["date"].iloc[0])[:10] == "2026-05-01"
    path = write(tmp_path, "c.csv", "boring_id,x,y,ground_elev,date\nA,1,2,3,someday\n")
    with pytest.raises(TableFormatError, match=r"line 2, column 'date'"):
        read_borings(path)


def test_borings_geopackage(tmp_path: Path):
    import geopandas as gpd
    from shapely.geometry import Point

    layer = gpd.GeoDataFrame(
        {"boring_id": ["A", "B"], "ground_elev": [10.0, 11.0]},
        geometry=[Point(1, 2), Point(3, 4)],
        crs="EPSG:32631",
    )
    path = tmp_path / "borings.gpkg"
    layer.to_file(path)
    table = read_borings(path)
    assert list(table["boring_id"]) == ["A", "B"]
    np.testing.assert_allclose(table["x"], [1, 3])
    np.testing.assert_allclose(table["y"], [2, 4])


def test_dissipation_test_ids_and_units(tmp_path: Path):
    text = (
        "boring_id,depth,time_s,pressure\n"
        "A,10,0,20\nA,10,60,18\nA,20,0,30\nA,20,60,25\nB,10,0,20\nB,10,30,19\n"
    )
    table = read_dissipation(write(tmp_path, "d.csv", text), length_unit="ft", pressure_unit="psi")
    assert list(table["test_id"]) == [1, 1, 2, 2, 3, 3]  # one per (boring, depth)
    np.testing.assert_allclose(table["depth"].iloc[2], 20 * FT)
    np.testing.assert_allclose(table["pressure"].iloc[0], 20 * PSI)


def test_dissipation_given_test_ids_are_made_unique(tmp_path: Path):
    text = "boring_id,depth,time_s,pressure,test_id\nA,1,0,150,t1\nA,1,5,140,t1\nB,2,0,150,t1\n"
    table = read_dissipation(write(tmp_path, "d.csv", text))
    assert list(table["test_id"]) == [1, 1, 2]


def test_dissipation_time_must_increase(tmp_path: Path):
    text = "boring_id,depth,time_s,pressure\nA,1,0,150\nA,1,60,140\nA,1,30,139\n"
    with pytest.raises(TableFormatError, match=r"line 4, column 'time_s'.*increas"):
        read_dissipation(write(tmp_path, "d.csv", text))


def test_dissipation_negative_depth(tmp_path: Path):
    text = "boring_id,depth,time_s,pressure\nA,-1,0,150\n"
    with pytest.raises(TableFormatError, match=r"line 2, column 'depth'.*>= 0"):
        read_dissipation(write(tmp_path, "d.csv", text))


def test_slug_tests(tmp_path: Path):
    text = "boring_id,top_depth,bottom_depth,k\nA,1,2,1e-4\n"
    table = read_slug_tests(write(tmp_path, "s.csv", text), k_unit="cm/s")
    assert table["k"].iloc[0] == pytest.approx(1e-6)  # 1 cm/s = 0.01 m/s (definition)


def test_sensor_checks_converted_per_sensor(tmp_path: Path):
    text = (
        "boring_id,sensor,stage,measured,expected,tolerance\n"
        "A,pressure,pre,14.7,14.5,0.5\nA,ec,post,1000,1000,50\nA,flow,pre,1,1,0.1\n"
    )
    table = read_sensor_checks(
        write(tmp_path, "c.csv", text), pressure_unit="psi", flow_unit="L/min", ec_unit="uS/cm"
    )
    assert table["measured"].iloc[0] == pytest.approx(14.7 * PSI)
    assert table["measured"].iloc[1] == pytest.approx(100.0)  # 1000 uS/cm = 100 mS/m
    assert table["tolerance"].iloc[2] == pytest.approx(0.1e-3 / 60)  # L/min -> m3/s


SLUG = "boring_id,top_depth,bottom_depth,k\n"
CHECKS = "boring_id,sensor,stage,measured,expected,tolerance\n"


@pytest.mark.parametrize(
    ("reader", "text", "message"),
    [
        (read_slug_tests, SLUG + "A,1,2,1e-4\nA,3,2,1e-4\n", r"line 3, column 'bottom_depth'"),
        (read_slug_tests, SLUG + "A,1,2,0\n", r"line 2, column 'k'.*> 0"),
        (
            read_sensor_checks,
            CHECKS + "A,temperature,pre,1,1,1\n",
            r"line 2, column 'sensor'.*pressure, flow, ec",
        ),
        (read_sensor_checks, CHECKS + "A,ec,during,1,1,1\n", r"column 'stage'.*pre, post"),
    ],
)
def test_bad_test_tables_are_refused_naming_the_place(tmp_path: Path, reader, text, message):
    with pytest.raises(TableFormatError, match=message):
        reader(write(tmp_path, "t.csv", text))


def test_borings_geopackage_in_another_crs_is_reprojected(tmp_path: Path):
    import geopandas as gpd
    import pyproj
    from shapely.geometry import Point

    utm = pyproj.CRS("EPSG:32631")
    lon, lat = pyproj.Transformer.from_crs(utm, "EPSG:4326", always_xy=True).transform(
        500000.0, 5000000.0
    )
    layer = gpd.GeoDataFrame(
        {"boring_id": ["A"], "ground_elev": [10.0]}, geometry=[Point(lon, lat)], crs="EPSG:4326"
    )
    layer.to_file(tmp_path / "b.gpkg")
    table = read_borings(tmp_path / "b.gpkg", crs=utm)
    assert table["x"].iloc[0] == pytest.approx(500000.0, abs=1e-3)
    assert table["y"].iloc[0] == pytest.approx(5000000.0, abs=1e-3)
