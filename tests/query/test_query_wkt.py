"""WKT ``coords`` (OGC 06-103r4 / ISO 19125-1 text form) read into query inputs.

Judges: shapely's own WKT reader (GEOS) on the same text, shapely's WKT writer as an
independent producer of text for random geometries, coordinates written out by hand, and
the native GeoJSON polygon reader for the request area.
"""

from __future__ import annotations

import numpy as np
import pytest
import shapely
from hypothesis import given, settings
from hypothesis import strategies as st
from shapely.geometry import mapping

from alveary import InvalidInput, LimitExceeded
from alveary.query import parse_polygon
from alveary.query._wkt import WKT_TYPES, coords_area, coords_lat_lon, parse_coords


def _plain(obj):
    """shapely's mapping() as nested lists of floats, for comparison."""
    if isinstance(obj, list | tuple):
        return [_plain(v) for v in obj]
    return float(obj)


def _shapely_reading(text):
    """GeoJSON type and coordinates as GEOS reads the same WKT."""
    geometry = mapping(shapely.from_wkt(text))
    return geometry["type"], _plain(geometry["coordinates"])


# (text, type, coordinates written out by hand from the text)
VALID = [
    ("POINT(-36.1 30.55)", "Point", [-36.1, 30.55]),
    ("point ( 0 51.48 )", "Point", [0.0, 51.48]),
    ("POINT(1e1 -2.5E-1)", "Point", [10.0, -0.25]),
    ("POINT(.5 -.5)", "Point", [0.5, -0.5]),
    ("POINT(180 -90)", "Point", [180.0, -90.0]),
    ("MULTIPOINT((38.9 -77),(48.85 2.35))", "MultiPoint", [[38.9, -77.0], [48.85, 2.35]]),
    ("MultiPoint (10 40, 40 30, 20 20)", "MultiPoint", [[10, 40], [40, 30], [20, 20]]),
    ("MULTIPOINT((1 2))", "MultiPoint", [[1.0, 2.0]]),
    (
        "POLYGON((-6.1 50.3,-4.35 51.4,-2.6 51.6,-2.8 50.6,-5.3 49.9,-6.1 50.3))",
        "Polygon",
        [[[-6.1, 50.3], [-4.35, 51.4], [-2.6, 51.6], [-2.8, 50.6], [-5.3, 49.9], [-6.1, 50.3]]],
    ),
    (
        "POLYGON ((35 10, 45 45, 15 40, 10 20, 35 10),\n(20 30, 35 35, 30 20, 20 30))",
        "Polygon",
        [
            [[35, 10], [45, 45], [15, 40], [10, 20], [35, 10]],
            [[20, 30], [35, 35], [30, 20], [20, 30]],
        ],
    ),
    (
        "MULTIPOLYGON(((30 20, 45 40, 10 40, 30 20)), ((15 5, 40 10, 10 20, 5 10, 15 5)))",
        "MultiPolygon",
        [
            [[[30, 20], [45, 40], [10, 40], [30, 20]]],
            [[[15, 5], [40, 10], [10, 20], [5, 10], [15, 5]]],
        ],
    ),
    (
        "MULTIPOLYGON (((40 40, 20 45, 45 30, 40 40)),"
        " ((20 35, 10 30, 10 10, 30 5, 45 20, 20 35), (30 20, 20 15, 20 25, 30 20)))",
        "MultiPolygon",
        [
            [[[40, 40], [20, 45], [45, 30], [40, 40]]],
            [
                [[20, 35], [10, 30], [10, 10], [30, 5], [45, 20], [20, 35]],
                [[30, 20], [20, 15], [20, 25], [30, 20]],
            ],
        ],
    ),
]


@pytest.mark.parametrize(("text", "kind", "expected"), VALID)
def test_valid_text_matches_hand_written_coordinates_and_shapely(text, kind, expected):
    geometry = parse_coords(text)
    assert geometry["type"] == kind
    # Hand-written coordinates from the text.
    assert _plain(geometry["coordinates"]) == _plain(expected)
    # GEOS reads the same text to the same geometry.
    assert (geometry["type"], _plain(geometry["coordinates"])) == _shapely_reading(text)


def _ring(draw, lon0, lat0):
    """A closed, simple ring: a star-shaped polygon around (lon0, lat0)."""
    n = draw(st.integers(3, 12))
    angles = np.sort(draw(st.lists(st.floats(0, 2 * np.pi), min_size=n, max_size=n, unique=True)))
    radii = draw(st.lists(st.floats(0.1, 2.0), min_size=n, max_size=n))
    pts = [(lon0 + r * np.cos(a), lat0 + r * np.sin(a)) for a, r in zip(angles, radii, strict=True)]
    return [*pts, pts[0]]


@st.composite
def geometries(draw):
    kind = draw(st.sampled_from(WKT_TYPES))
    lon = st.floats(-178, 178, allow_nan=False)
    lat = st.floats(-87, 87, allow_nan=False)
    if kind == "Point":
        return shapely.Point(draw(lon), draw(lat))
    if kind == "MultiPoint":
        n = draw(st.integers(1, 8))
        return shapely.MultiPoint([(draw(lon), draw(lat)) for _ in range(n)])
    polygons = [shapely.Polygon(_ring(draw, draw(lon), draw(lat))) for _ in range(2)]
    return polygons[0] if kind == "Polygon" else shapely.MultiPolygon(polygons)


@settings(max_examples=150, deadline=None)
@given(geometries(), st.booleans())
def test_text_written_by_shapely_reads_back_exactly(geometry, trim):
    # shapely's WKT writer (GEOS) is an independent producer of text: 16
    # decimals at most with trim=True, fixed notation with 16 decimals without.
    text = shapely.to_wkt(geometry, rounding_precision=-1, trim=trim)
    out = parse_coords(text)
    # GEOS reads the same text to the same doubles.
    expected = mapping(shapely.from_wkt(text))
    assert out["type"] == expected["type"]
    assert _plain(out["coordinates"]) == _plain(expected["coordinates"])
    if trim:  # and it is the geometry written, to the digits written
        for a, b in zip(
            _flat(out["coordinates"]), _flat(mapping(geometry)["coordinates"]), strict=True
        ):
            assert a == pytest.approx(b, rel=1e-15, abs=1e-15)


def _flat(obj):
    if isinstance(obj, list | tuple):
        return [x for v in obj for x in _flat(v)]
    return [float(obj)]


# Text GEOS cannot read either: both must refuse it.
SYNTAX_ERRORS = [
    "POINT(1)",
    "POINT(1 2",
    "POINT 1 2",
    "POINT(1 2) x",
    "POINT(1, 2)",
    "POINT(a b)",
    "MULTIPOINT((1 2),(3))",
    "POLYGON((0 0, 1 0, 1 1))",
    "POLYGON((0 0, 1 0, 1 1, 0 1))",
    "POLYGON(0 0, 1 0, 1 1, 0 0)",
    "POLYGON((-6.1 50.3,-4.35 51.4,-2.6 51.6,-2.8 50.6,-5.3 49.9,-6.1,50.3))",
    "MULTIPOLYGON((0 0, 1 0, 1 1, 0 0))",
    "CIRCLE(0 0, 1)",
    "",
]


@pytest.mark.parametrize("text", SYNTAX_ERRORS)
def test_syntax_errors_name_coords(text):
    with pytest.raises(shapely.errors.GEOSException):  # GEOS refuses it too
        shapely.from_wkt(text)
    with pytest.raises(InvalidInput) as info:
        parse_coords(text)
    assert info.value.parameter == "coords"
    assert "WKT" in info.value.allowed


# Text GEOS reads, but that an EDR query cannot use.
REFUSED = [
    ("POINT Z (1 2 3)", "Z or M"),
    ("POINT M (1 2 3)", "Z or M"),
    ("POINTZ(1 2 3)", "Z or M"),
    ("POINT(1 2 3)", "only 2-D"),
    ("POINT EMPTY", "empty"),
    ("MULTIPOLYGON EMPTY", "empty"),
    ("LINESTRING(0 0, 1 1)", "unknown geometry type LINESTRING"),
    ("GEOMETRYCOLLECTION(POINT(1 2))", "unknown geometry type"),
    ("SRID=4326;POINT(1 2)", "unknown geometry type"),
]


@pytest.mark.parametrize(("text", "reason"), REFUSED)
def test_readable_but_refused(text, reason):
    shapely.from_wkt(text.split(";")[-1])  # GEOS reads the geometry itself
    with pytest.raises(InvalidInput) as info:
        parse_coords(text)
    assert info.value.parameter == "coords"
    assert reason in str(info.value)


def test_error_says_where():
    with pytest.raises(InvalidInput) as info:
        parse_coords("POLYGON((0 0, 1 0, 1 1, 0 0), (0.2 0.2, 0.3 0.2, 0.2 0.3, 0.3 0.3))")
    # The second ring starts at character 30 (1-based) and is open.
    assert "not closed" in str(info.value) and "character 30" in str(info.value)


def test_type_not_allowed_for_the_query():
    with pytest.raises(InvalidInput) as info:
        parse_coords("MULTIPOINT((1 2))", ("Point",))
    assert info.value.parameter == "coords"
    assert info.value.allowed.startswith("WKT POINT(lon lat)")
    assert "MULTIPOINT" in str(info.value)
    with pytest.raises(InvalidInput) as info:
        parse_coords("POINT(1 2)", ("Polygon", "MultiPolygon"))
    assert "POLYGON" in info.value.allowed and "MULTIPOLYGON" in info.value.allowed


@pytest.mark.parametrize(
    ("text", "index", "bad"),
    [
        ("POINT(181 0)", 0, [181.0, 0.0]),
        ("POINT(0 -90.5)", 0, [0.0, -90.5]),
        ("MULTIPOINT((0 0), (10 10), (-200 5))", 2, [-200.0, 5.0]),
        ("POLYGON((0 0, 1 0, 1 91, 0 0))", 2, [1.0, 91.0]),
        ("POINT(1e999 0)", 0, [np.inf, 0.0]),
    ],
)
def test_out_of_range_positions(text, index, bad):
    with pytest.raises(InvalidInput) as info:
        parse_coords(text)
    assert info.value.parameter == "coords"
    assert info.value.index == index
    assert info.value.value == bad
    assert "[-180, 180]" in info.value.allowed and "[-90, 90]" in info.value.allowed


def test_position_limit():
    text = "MULTIPOINT(" + ", ".join(f"{i % 90} {i % 45}" for i in range(11)) + ")"
    assert len(parse_coords(text, max_positions=11)["coordinates"]) == 11
    with pytest.raises(LimitExceeded) as info:
        parse_coords(text, max_positions=10)
    assert (info.value.requested, info.value.maximum) == (11, 10)


def test_lat_lon_of_points():
    lat, lon = coords_lat_lon(parse_coords("MULTIPOINT(-36.1 30.55, 150 -33.9)"))
    np.testing.assert_array_equal(lat, [30.55, -33.9])
    np.testing.assert_array_equal(lon, [-36.1, 150.0])
    lat, lon = coords_lat_lon(parse_coords("POINT(-36.1 30.55)"))
    assert lat.tolist() == [30.55] and lon.tolist() == [-36.1]
    with pytest.raises(InvalidInput):
        coords_lat_lon(parse_coords("POLYGON((0 0, 1 0, 1 1, 0 0))"))


def test_area_matches_the_geojson_reader():
    # Judge: the native reader of the same polygon given as GeoJSON (RFC 7946).
    text = "POLYGON((-36.2 30.5, -36.0 30.5, -36.0 30.6, -36.2 30.5))"
    geojson = {
        "type": "Polygon",
        "coordinates": [[[-36.2, 30.5], [-36.0, 30.5], [-36.0, 30.6], [-36.2, 30.5]]],
    }
    area, reference = coords_area(text, 100), parse_polygon(geojson, 100)
    assert area.key == reference.key and area.area_m2 == reference.area_m2


def test_area_across_the_antimeridian_is_cut():
    area = coords_area("POLYGON((170 0, -170 0, -170 5, 170 5, 170 0))", 100)
    assert area.geometry["type"] == "MultiPolygon"
    west, _, east, _ = area.shape.bounds
    assert west == -180 and east == 180
    # 20° x 5° at the equator, against shapely's area in (lon, sin lat) on the sphere
    # of radius 6 371 007.181 m.
    band = np.sin(np.radians(5.0)) * np.radians(20.0) * 6_371_007.1809**2
    assert area.area_m2 == pytest.approx(band, rel=1e-9)


def test_invalid_area_names_coords():
    with pytest.raises(InvalidInput) as info:
        coords_area("POLYGON((0 0, 1 1, 1 0, 0 1, 0 0))", 100)
    assert info.value.parameter == "coords"
    assert "Self-intersection" in str(info.value.value)
    assert not shapely.from_wkt("POLYGON((0 0, 1 1, 1 0, 0 1, 0 0))").is_valid  # GEOS agrees
    with pytest.raises(LimitExceeded):
        coords_area("POLYGON((0 0, 1 0, 1 1, 0 1, 0 0))", 3)


def test_unknown_kind_is_a_programming_error():
    with pytest.raises(ValueError, match="unknown WKT kinds"):
        parse_coords("POINT(1 2)", ("LineString",))
