"""Request areas as HTTP parameters: the ``bbox`` text and the polygon body's limit.

How polygons are read (antimeridian, poles, holes, invalid rings) is tested once, in
tests/grid/test_grid_shapes.py, against shapely and pyproj.Geod.
"""

from __future__ import annotations

import pytest
from pyproj import Geod

from alveary import InvalidInput, LimitExceeded, grid
from alveary.query import Area, bbox_area, parse_bbox, parse_polygon

GEOD = Geod(ellps="WGS84")


def test_bad_bbox_names_the_parameter():
    bad = ["0,91,1,92", "0,1,2", "a,b,c,d", "0,10,1,5", "200,0,1,1", "0,0,nan,1", "0,-inf,1,1"]
    for text in bad:
        with pytest.raises(InvalidInput) as info:
            parse_bbox(text)
        assert info.value.parameter == "bbox", text


def test_bbox_text_and_area():
    assert parse_bbox(" 10, 40,12.5,41") == (10.0, 40.0, 12.5, 41.0)
    assert parse_bbox("170,-10,-170,10") == (170.0, -10.0, -170.0, 10.0)  # across ±180
    # pyproj.Geod polygon area on WGS84: the box's parallels are not geodesics, so a box
    # small enough that the difference stays below 0.5 %
    w, s, e, n = 7.0, 45.0, 7.5, 45.4
    geod_area = abs(GEOD.polygon_area_perimeter([w, e, e, w], [s, s, n, n])[0])
    assert bbox_area(w, s, e, n) == pytest.approx(geod_area, rel=5e-3)


def test_polygon_body_is_read_by_the_grid_under_the_request_limit():
    square = {"type": "Polygon", "coordinates": [[[0, 0], [1, 0], [1, 1], [0, 1], [0, 0]]]}
    area = parse_polygon(square, 100)
    assert isinstance(area, Area) and area == grid.read_polygon(square)
    many = {"type": "Polygon", "coordinates": [[[0, 0], [1, 0], [1, 1], [0, 1], [0, 0]] * 3]}
    with pytest.raises(LimitExceeded) as info:
        parse_polygon(many, 10)
    assert info.value.limit == "polygon vertices"
    assert info.value.requested == 14
    with pytest.raises(InvalidInput) as bad:
        parse_polygon({"type": "Point", "coordinates": [0, 0]}, 100)
    assert bad.value.parameter == "geometry"
