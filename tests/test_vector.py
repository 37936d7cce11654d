import json
from pathlib import Path

import pyproj
import pytest
from conftest import polygon_feature, write_geojson

from geo3d.errors import CRSError, Geo3dWarning, GeometryError
from geo3d.io.vector import metric_crs, parse_crs, read_boundary, read_zones

US_FT = 1200 / 3937  # m, US survey foot (NIST SP 811)
UTM31 = pyproj.CRS("EPSG:32631")

SQUARE = [[0.0, 0.0], [100.0, 0.0], [100.0, 100.0], [0.0, 100.0], [0.0, 0.0]]


def test_parse_crs_epsg_and_wkt():
    declared, internal = parse_crs("EPSG:32631")
    assert declared.equals(UTM31) and internal.equals(UTM31)
    declared, _ = parse_crs(UTM31.to_wkt())
    assert declared.equals(UTM31)


def test_parse_crs_refuses_geographic_empty_and_unknown():
    with pytest.raises(CRSError, match="not a projected CRS"):
        parse_crs("EPSG:4326")
    with pytest.raises(CRSError, match="no CRS given"):
        parse_crs("  ")
    with pytest.raises(CRSError, match="cannot read CRS"):
        parse_crs("EPSG:999999")


def test_crs_unit_disagreement_warns():
    # EPSG:2263 (NAD83 / New York Long Island) has US survey foot axes (EPSG registry).
    with pytest.warns(Geo3dWarning, match="US survey foot.*'m'"):
        parse_crs("EPSG:2263", length_unit="m")


def test_metric_twin_of_a_feet_crs_keeps_georeferencing():
    declared, internal = parse_crs("EPSG:2263", length_unit="us_survey_ft")
    assert internal.axis_info[0].unit_name == "metre"
    # The same point: (x, y) US ft in the declared CRS = (x, y) * 1200/3937 m in the twin.
    to_twin = pyproj.Transformer.from_crs(declared, internal, always_xy=True)
    x, y = to_twin.transform(1_000_000.0, 200_000.0)
    assert x == pytest.approx(1_000_000.0 * US_FT, abs=1e-6)
    assert y == pytest.approx(200_000.0 * US_FT, abs=1e-6)
    a = pyproj.Transformer.from_crs(declared, "EPSG:4326", always_xy=True)
    b = pyproj.Transformer.from_crs(internal, "EPSG:4326", always_xy=True)
    assert a.transform(1e6, 2e5) == pytest.approx(b.transform(1e6 * US_FT, 2e5 * US_FT))
    assert metric_crs(UTM31) is UTM31


def test_boundary_read_and_reprojected(tmp_path: Path):
    path = tmp_path / "b.geojson"
    ring = [[500000 + x, 5000000 + y] for x, y in SQUARE]
    write_geojson(path, [polygon_feature(ring)])
    assert read_boundary(path, crs=UTM31).area == pytest.approx(10_000.0)
    # The same square given in geographic coordinates comes back in UTM metres.
    to_geo = pyproj.Transformer.from_crs(UTM31, "EPSG:4326", always_xy=True)
    geo_ring = [list(to_geo.transform(x, y)) for x, y in ring]
    write_geojson(path, [polygon_feature(geo_ring)], epsg=4326)
    polygon = read_boundary(path, crs=UTM31)
    assert polygon.area == pytest.approx(10_000.0, rel=1e-3)
    assert polygon.bounds[0] == pytest.approx(500000.0, abs=0.01)


@pytest.mark.filterwarnings("ignore:'crs' was not provided")
def test_layer_without_crs_is_refused(tmp_path: Path):
    path = tmp_path / "b.geojson"
    # GeoJSON without a "crs" member is WGS 84 by RFC 7946, so use a shapefile-free GeoPackage.
    import geopandas as gpd
    from shapely.geometry import Polygon

    gpd.GeoDataFrame(geometry=[Polygon(SQUARE)]).to_file(tmp_path / "b.gpkg")
    with pytest.raises(CRSError, match="no CRS"):
        read_boundary(tmp_path / "b.gpkg", crs=UTM31)
    path.write_text("")
    with pytest.raises(GeometryError, match="empty"):
        read_boundary(path, crs=UTM31)


def test_projected_coordinates_in_a_geojson_without_crs(tmp_path: Path):
    # RFC 7946: a GeoJSON without a "crs" member is WGS 84 longitude/latitude.
    path = tmp_path / "b.geojson"
    ring = [[500000 + x, 5000000 + y] for x, y in SQUARE]
    write_geojson(path, [polygon_feature(ring)], epsg=None)
    with pytest.raises(CRSError, match=r"b.geojson: the boundary layer is in .*degrees"):
        read_boundary(path, crs=UTM31)


def test_boundary_must_be_one_polygon(tmp_path: Path):
    path = tmp_path / "b.geojson"
    far = [[x + 1000, y] for x, y in SQUARE]
    write_geojson(path, [polygon_feature(SQUARE), polygon_feature(far)])
    with pytest.raises(GeometryError, match="2 separate polygons"):
        read_boundary(path, crs=UTM31)
    doc = json.loads(path.read_text())
    doc["features"] = [
        {"type": "Feature", "properties": {}, "geometry": {"type": "Point", "coordinates": [1, 2]}}
    ]
    path.write_text(json.dumps(doc))
    with pytest.raises(GeometryError, match="row 1, column 'geometry': Point; expected a polygon"):
        read_boundary(path, crs=UTM31)


def test_zones_read_with_defaults_and_units(tmp_path: Path):
    path = tmp_path / "z.geojson"
    write_geojson(
        path,
        [
            polygon_feature(SQUARE, name="A", top=10, bottom=20),
            polygon_feature(
                SQUARE, name="B", top=30, bottom=25, reference="elevation", design_fraction=0.3
            ),
        ],
    )
    zones = read_zones(path, crs=UTM31, length_unit="us_survey_ft", radius_of_influence=4.0)
    assert list(zones["name"]) == ["A", "B"]
    assert zones["top"].iloc[0] == pytest.approx(10 * US_FT)
    assert list(zones["reference"]) == ["depth", "elevation"]
    assert list(zones["design_fraction"]) == [0.2, 0.3]
    assert list(zones["radius_of_influence"]) == [4.0, 4.0]


def test_zones_without_top_or_bottom(tmp_path: Path):
    path = tmp_path / "z.geojson"
    write_geojson(path, [polygon_feature(SQUARE, name="A", top=1)])
    with pytest.raises(GeometryError, match=r"z.geojson: zones lack the property 'bottom'"):
        read_zones(path, crs=UTM31)
    write_geojson(
        path,
        [
            polygon_feature(SQUARE, name="A", top=1, bottom=2),
            polygon_feature(SQUARE, name="B", top=1),
        ],
    )
    with pytest.raises(GeometryError, match=r"row 2, column 'bottom': empty"):
        read_zones(path, crs=UTM31)


def test_zones_bad_order_and_reference(tmp_path: Path):
    path = tmp_path / "z.geojson"
    write_geojson(path, [polygon_feature(SQUARE, name="A", top=5, bottom=2)])
    with pytest.raises(GeometryError, match=r"row 1, column 'bottom'.*top < bottom"):
        read_zones(path, crs=UTM31)
    write_geojson(path, [polygon_feature(SQUARE, name="A", top=1, bottom=2, reference="datum")])
    with pytest.raises(GeometryError, match=r"column 'reference'.*depth or elevation"):
        read_zones(path, crs=UTM31)
