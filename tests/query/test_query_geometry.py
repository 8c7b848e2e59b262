"""Request geometries, checked against shapely and pyproj.Geod."""

from __future__ import annotations

import pytest
import shapely
from pyproj import Geod
from shapely.geometry import shape

from alveary import InvalidInput, LimitExceeded
from alveary.query import bbox_area, parse_bbox, parse_polygon

GEOD = Geod(ellps="WGS84")


def square(w, s, e, n):
    return {"type": "Polygon", "coordinates": [[[w, s], [e, s], [e, n], [w, n], [w, s]]]}


@pytest.mark.parametrize(
    ("text", "parameter_value"),
    [
        ("0,91,1,92", "bbox"),
        ("0,1,2", "bbox"),
        ("a,b,c,d", "bbox"),
        ("0,10,1,5", "bbox"),
        ("200,0,1,1", "bbox"),
    ],
)
def test_bad_bbox_names_the_parameter(text, parameter_value):
    with pytest.raises(InvalidInput) as info:
        parse_bbox(text)
    assert info.value.parameter == parameter_value


def test_bbox_area_against_geod():
    # Reference: pyproj.Geod polygon area on WGS84. The box's meridians and parallels are
    # not geodesics, so compare a box small enough that the difference is < 0.5 %.
    w, s, e, n = 7.0, 45.0, 7.5, 45.4
    lons, lats = [w, e, e, w], [s, s, n, n]
    geod_area = abs(GEOD.polygon_area_perimeter(lons, lats)[0])
    assert bbox_area(w, s, e, n) == pytest.approx(geod_area, rel=5e-3)


def test_polygon_area_estimate_against_geod():
    area = parse_polygon(square(10, 40, 11, 41), 100)
    geod_area = abs(GEOD.geometry_area_perimeter(shape(area.geometry))[0])
    assert area.area_m2 == pytest.approx(geod_area, rel=1e-2)
    assert area.vertices == 4


def test_feature_and_hole_are_accepted():
    outer = [[0, 0], [4, 0], [4, 4], [0, 4], [0, 0]]
    hole = [[1, 1], [1, 2], [2, 2], [2, 1], [1, 1]]
    body = {
        "type": "Feature",
        "properties": {},
        "geometry": {"type": "Polygon", "coordinates": [outer, hole]},
    }
    area = parse_polygon(body, 100)
    # Reference: shapely computes the planar area with the hole removed: 16 - 1.
    assert shapely.area(area.shape) == pytest.approx(15.0)


def test_antimeridian_ring_is_cut_into_parts():
    # A box from 170°E to 170°W written with an edge stepping across the antimeridian.
    ring = [[170, -5], [-170, -5], [-170, 5], [170, 5], [170, -5]]
    area = parse_polygon({"type": "Polygon", "coordinates": [ring]}, 100)
    assert area.geometry["type"] == "MultiPolygon"
    parts = list(area.shape.geoms)
    assert len(parts) == 2
    # RFC 7946 §3.1.9: every longitude within [-180, 180], both parts 10° wide.
    assert all(-180 <= x <= 180 for p in parts for x, _ in p.exterior.coords)
    assert sorted(round(p.area) for p in parts) == [100, 100]
    # The same box given already cut (a MultiPolygon) is the same request.
    cut = {
        "type": "MultiPolygon",
        "coordinates": [
            [[[170, -5], [180, -5], [180, 5], [170, 5], [170, -5]]],
            [[[-180, -5], [-170, -5], [-170, 5], [-180, 5], [-180, -5]]],
        ],
    }
    assert parse_polygon(cut, 100).key == area.key


def test_self_intersection_is_refused_with_reason():
    bow = {"type": "Polygon", "coordinates": [[[0, 0], [2, 2], [2, 0], [0, 2], [0, 0]]]}
    with pytest.raises(InvalidInput, match="Self-intersection") as info:
        parse_polygon(bow, 100)
    assert info.value.parameter == "geometry"


@pytest.mark.parametrize(
    "body",
    [
        {"type": "Point", "coordinates": [0, 0]},
        {"type": "Polygon", "coordinates": [[[0, 0], [1, 0], [0, 0]]]},
        {"type": "Polygon", "coordinates": [[[0, 0], [1, 0], [1, 1], [0, 1]]]},
        {"type": "Polygon", "coordinates": [[[0, 0], [1, 0], [1, 95], [0, 0]]]},
        {"type": "Polygon", "coordinates": "nope"},
        [1, 2, 3],
    ],
)
def test_malformed_geometry_is_invalid_input(body):
    with pytest.raises(InvalidInput):
        parse_polygon(body, 100)


def test_vertex_limit_is_checked_first():
    many = {"type": "Polygon", "coordinates": [[[0, 0], [1, 0], [1, 1], [0, 1], [0, 0]] * 3]}
    with pytest.raises(LimitExceeded) as info:
        parse_polygon(many, 10)
    assert info.value.limit == "polygon vertices"
    assert info.value.requested == 14
