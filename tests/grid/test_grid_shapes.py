"""GeoJSON in and out: the awkward shapes, tested once.

Reading (``grid.read_polygon``, which ``zones_in_polygon`` and the service use): rings
that cross ±180° by a jump or already cut, rings round a pole, holes, edges of exactly
360°, MultiPolygons across the antimeridian, invalid rings. Writing
(``grid.zone_to_geojson``): RFC 7946 rings, orientation and cutting.

Judges: shapely (planar geometry in longitude/latitude, built here from the shapes as
RFC 7946 describes them), pyproj.Geod (geodesic areas on WGS84; edges straight in
longitude/latitude are followed by segmentizing them to 0.01°), and the WGS84 surface
area (510 065 621.724 km²).
"""

from __future__ import annotations

import numpy as np
import pytest
import shapely
from pyproj import Geod
from shapely.geometry import shape

from alveary import GridError, InvalidInput, LimitExceeded, grid
from support.samples import (
    ANTIMERIDIAN_CUT,
    ANTIMERIDIAN_JUMP,
    MULTIPOLYGON,
    POLAR_CAP,
    POLYGON_WITH_HOLE,
    SMALL_JUMP,
    WGS84_AREA_M2,
)

GEOD = Geod(ellps="WGS84")


def polygon(*rings):
    return {"type": "Polygon", "coordinates": [list(map(list, r)) for r in rings]}


def box_ring(w, s, e, n):
    return [[w, s], [e, s], [e, n], [w, n], [w, s]]


def lonlat_area(geom) -> float:
    """Geodesic area (pyproj.Geod) of a shape whose edges are straight in lon/lat.

    pyproj counts a ring positive when counter-clockwise, so holes are turned clockwise.
    """
    oriented = shapely.orient_polygons(shapely.segmentize(geom, 0.01), exterior_cw=False)
    return GEOD.geometry_area_perimeter(oriented)[0]


def boxes(*bounds):
    return shapely.union_all([shapely.box(*b) for b in bounds])


# -- reading: what a polygon means ---------------------------------------------------------

WORLD = polygon(box_ring(-180, -90, 180, 90))

READ_CASES = {
    # name: (GeoJSON, the same region built by hand in lon/lat)
    "plain box": (polygon(box_ring(10, 40, 11, 41)), shapely.box(10, 40, 11, 41)),
    "jump across ±180": (SMALL_JUMP, boxes((179, -1, 180, 1), (-180, -1, -179, 1))),
    "cut at ±180": (ANTIMERIDIAN_CUT, boxes((172.3, -8.7, 180, 6.1), (-180, -8.7, -174.6, 6.1))),
    "jump, wider": (ANTIMERIDIAN_JUMP, boxes((172.3, -8.7, 180, 6.1), (-180, -8.7, -174.6, 6.1))),
    # RFC 7946 edges are straight in lon/lat: -180 -> 180 is the whole parallel
    "360° edges: whole world": (WORLD, shapely.box(-180, -90, 180, 90)),
    "360° edges: polar cap": (POLAR_CAP, shapely.box(-180, 81.3, 180, 90)),
    # a ring winding eastward round the north pole, with no vertex on the pole
    "round the north pole": (
        polygon([[0, 80], [90, 80], [180, 80], [-90, 80], [0, 80]]),
        shapely.box(-180, 80, 180, 90),
    ),
    "round the south pole": (
        polygon([[0, -75], [-90, -75], [-180, -75], [90, -75], [0, -75]]),
        shapely.box(-180, -90, 180, -75),
    ),
    "hole": (
        POLYGON_WITH_HOLE,
        shapely.Polygon(POLYGON_WITH_HOLE["coordinates"][0], POLYGON_WITH_HOLE["coordinates"][1:]),
    ),
    "hole across ±180": (
        polygon(
            [[170, -10], [-170, -10], [-170, 10], [170, 10], [170, -10]],
            [[175, -5], [175, 5], [-175, 5], [-175, -5], [175, -5]],
        ),
        boxes((170, -10, 180, 10), (-180, -10, -170, 10)).difference(
            boxes((175, -5, 180, 5), (-180, -5, -175, 5))
        ),
    ),
    "MultiPolygon with a part across ±180": (
        {
            "type": "MultiPolygon",
            "coordinates": [
                [box_ring(-20, 0, -10, 5)],
                [[[175, 50], [-175, 50], [-175, 55], [175, 55], [175, 50]]],
            ],
        },
        boxes((-20, 0, -10, 5), (175, 50, 180, 55), (-180, 50, -175, 55)),
    ),
    "MultiPolygon": (
        MULTIPOLYGON,
        shapely.union_all([shapely.Polygon(p[0]) for p in MULTIPOLYGON["coordinates"]]),
    ),
    "Feature": (
        {"type": "Feature", "properties": {"a": 1}, "geometry": polygon(box_ring(0, 0, 4, 4))},
        shapely.box(0, 0, 4, 4),
    ),
}


@pytest.mark.parametrize("name", sorted(READ_CASES))
def test_read_polygon_against_shapes_built_by_hand(name):
    geometry, expected = READ_CASES[name]
    fp = grid.read_polygon(geometry)
    assert fp.shape.is_valid
    # the same region: symmetric difference of (near) zero area, in square degrees
    assert shapely.symmetric_difference(fp.shape, expected).area < 1e-9, name
    assert shape(fp.geometry).equals(fp.shape)
    # RFC 7946: longitudes within [-180, 180], exterior rings counter-clockwise (§3.1.6),
    # holes clockwise
    for part in shapely.get_parts(fp.shape):
        assert part.exterior.is_ccw
        assert all(not ring.is_ccw for ring in part.interiors)
        xy = np.asarray(part.exterior.coords)
        assert np.abs(xy[:, 0]).max() <= 180 and np.abs(xy[:, 1]).max() <= 90
    # the area estimate against pyproj.Geod: exact for boxes, close for slanted edges
    if name == "360° edges: whole world":  # one ring round everything: Geod cannot say
        return
    rel = 1e-6 if "MultiPolygon" not in name and name not in ("hole",) else 1e-2
    assert fp.area_m2 == pytest.approx(lonlat_area(expected), rel=rel), name


def test_whole_world_is_the_wgs84_area():
    assert grid.read_polygon(WORLD).area_m2 == pytest.approx(WGS84_AREA_M2, rel=1e-9)
    assert grid.bbox_area(-180, -90, 180, 90) == pytest.approx(WGS84_AREA_M2, rel=1e-9)


def test_one_region_written_several_ways_has_one_key():
    # cut (RFC 7946 §3.1.9) or jumping; started at another vertex; clockwise; in a Feature
    ring = ANTIMERIDIAN_JUMP["coordinates"][0]
    variants = [
        ANTIMERIDIAN_CUT,
        ANTIMERIDIAN_JUMP,
        polygon(ring[1:] + ring[1:2]),
        polygon(ring[::-1]),
        {"type": "Feature", "properties": None, "geometry": ANTIMERIDIAN_JUMP},
    ]
    keys = {grid.read_polygon(g).key for g in variants}
    assert len(keys) == 1
    assert grid.read_polygon(SMALL_JUMP).key not in keys


def test_vertex_count_and_limit():
    # positions in the request, each ring's closing position not counted
    assert grid.read_polygon(POLYGON_WITH_HOLE).vertices == 5 + 3
    many = polygon(box_ring(0, 0, 1, 1) * 3)  # 15 positions, 14 distinct ones counted
    with pytest.raises(LimitExceeded) as info:
        grid.read_polygon(many, max_vertices=10)
    assert info.value.limit == "polygon vertices" and info.value.requested == 14
    # the limit is checked before the rings are read: a huge bad ring is refused cheaply
    huge = polygon([[0, 0]] * 50_001)
    with pytest.raises(LimitExceeded):
        grid.read_polygon(huge, max_vertices=20_000)


def test_box_area_against_geod():
    # exact for a lon/lat box (a band of the authalic sphere, cut by two meridians)
    for box in [(7.0, 45.0, 7.5, 45.4), (-30, -80, 60, 10), (170, -5, -175, 5), (0, 89, 10, 90)]:
        w, s, e, n = box
        expected = lonlat_area(
            boxes((w, s, e, n)) if w < e else boxes((w, s, 180, n), (-180, s, e, n))
        )
        assert grid.bbox_area(*box) == pytest.approx(expected, rel=1e-6), box


def test_zones_in_polygon_takes_a_footprint():
    fp = grid.read_polygon(ANTIMERIDIAN_JUMP)
    assert np.array_equal(grid.zones_in_polygon(fp, 6), grid.zones_in_polygon(ANTIMERIDIAN_JUMP, 6))


SQUARE = box_ring(0.0, 0.0, 1.0, 1.0)
BAD_GEOMETRIES = {
    "not an object": (None, None),
    "text": ("POLYGON((0 0, 1 0, 1 1, 0 0))", None),
    "a list": ([SQUARE], None),
    "a point": ({"type": "Point", "coordinates": [0.0, 0.0]}, None),
    "no coordinates": ({"type": "Polygon"}, None),
    "no rings": ({"type": "Polygon", "coordinates": []}, None),
    "coordinates not a list": ({"type": "Polygon", "coordinates": "nope"}, None),
    "Feature without geometry": ({"type": "Feature", "geometry": None}, None),
    "not closed (RFC 7946 §3.1.6)": (polygon(SQUARE[:-1]), 0),
    "too short": (polygon([[0.0, 0.0], [1.0, 1.0], [0.0, 0.0]]), 0),
    "a text coordinate": (polygon([[0, 0], [1, "a"], [1, 1], [0, 0]]), 0),
    "latitude 95": (polygon([[0, 0], [1, 0], [1, 95], [0, 0]]), (0, 2)),
    "longitude 190": (polygon([[0, 0], [190, 0], [1, 1], [0, 0]]), (0, 1)),
    "NaN": (polygon([[0, 0], [1, float("nan")], [1, 1], [0, 0]]), (0, 1)),
    "hole out of range": (polygon(SQUARE, [[0, 0], [0, -91], [1, 0], [0, 0]]), (1, 1)),
    "part out of range": (
        {"type": "MultiPolygon", "coordinates": [[SQUARE], [[[0, 0], [1, 0], [1, 99], [0, 0]]]]},
        (1, 0, 2),
    ),
    # OGC simple features: a bow tie crosses itself; parts of a MultiPolygon may not overlap
    "bow tie": (polygon([[0, 0], [1, 1], [1, 0], [0, 1], [0, 0]]), None),
    "overlapping parts": (
        {"type": "MultiPolygon", "coordinates": [[box_ring(0, 0, 2, 2)], [box_ring(1, 1, 3, 3)]]},
        None,
    ),
    "one nesting level short": ({"type": "MultiPolygon", "coordinates": [SQUARE]}, None),
}


@pytest.mark.parametrize("name", sorted(BAD_GEOMETRIES))
def test_bad_geometry_names_parameter_position_and_range(name):
    geometry, position = BAD_GEOMETRIES[name]
    for read in (grid.read_polygon, lambda g: grid.zones_in_polygon(g, 4)):
        with pytest.raises(GridError) as info:
            read(geometry)
        err = info.value
        assert isinstance(err, InvalidInput) and err.parameter == "geometry"
        assert err.allowed and "allowed:" in str(err)
        if position is not None:
            assert err.index == position, (name, err.index)


def test_invalid_polygon_says_why():
    with pytest.raises(GridError, match="Self-intersection"):
        grid.read_polygon(polygon([[0, 0], [2, 2], [2, 0], [0, 2], [0, 0]]))
    with pytest.raises(GridError, match=r"latitude in \[-90, 90\]"):
        grid.read_polygon(polygon([[0, 0], [1, 0], [1, 95], [0, 0]]))


# -- writing: zone outlines as GeoJSON ------------------------------------------------------


def parts_of(geometry):
    return (
        geometry["coordinates"] if geometry["type"] == "MultiPolygon" else [geometry["coordinates"]]
    )


@pytest.mark.parametrize("level", [1, 3])
def test_every_zone_outline_is_valid_geojson(level):
    zones = grid.all_zones(level)
    geometries = grid.zone_to_geojson(zones)
    cut = 0
    for zone, geometry in zip(zones, geometries, strict=True):
        geom = shape(geometry)
        assert geom.is_valid, (grid.zone_to_text(zone), shapely.is_valid_reason(geom))
        for poly in parts_of(geometry):
            assert len(poly) == 1  # a zone has no holes
            assert poly[0][0] == poly[0][-1]  # closed (RFC 7946 §3.1.6)
            assert shapely.LinearRing(poly[0]).is_ccw
            xy = np.array(poly[0])
            assert np.all(np.abs(xy[:, 0]) <= 180) and np.all(np.abs(xy[:, 1]) <= 90)
        outline = grid.zone_boundary(zone)
        ring_area = abs(GEOD.polygon_area_perimeter(outline[:, 1], outline[:, 0])[0])
        if np.ptp(outline[:, 1]) > 180:  # the zone crosses ±180° or holds a pole
            cut += 1
            # cut points lie on the geodesics, so the geodesic area does not change
            assert abs(GEOD.geometry_area_perimeter(geom)[0]) == pytest.approx(ring_area, rel=1e-9)
    assert cut >= 2 ** (level + 1)  # zones along the antimeridian were exercised


def test_zones_at_the_antimeridian_and_the_poles():
    for level in (2, 5, 9):
        east = grid.zone_to_geojson(grid.point_to_zone(0.0, 180.0, level))
        assert east["type"] == "MultiPolygon"
        lons = [x for poly in parts_of(east) for x, _ in poly[0]]
        assert min(lons) == -180.0 and max(lons) == 180.0
    # Every pole zone from level 1 (at level 0 the poles lie on zone edges): the ring
    # restarts at its ±180° cut, so its closure over the pole is one Polygon.
    for level in range(1, 16):
        for pole in (90.0, -90.0):
            zone = grid.point_to_zone(pole, 0.0, level)
            g = grid.zone_to_geojson(zone)
            assert g["type"] == "Polygon"  # drawn up to the pole along ±180°
            assert max(abs(y) for _, y in g["coordinates"][0]) == 90.0
            area = abs(GEOD.geometry_area_perimeter(shape(g))[0])
            assert area == pytest.approx(float(grid.zone_areas(zone)), rel=1e-3)


def test_centres_lie_inside_their_outlines():
    zones = grid.all_zones(4)
    lat, lon = grid.zone_to_point(zones)
    inside = [
        shape(g).intersects(shapely.Point(x, y))
        for g, x, y in zip(grid.zone_to_geojson(zones), lon, lat, strict=True)
    ]
    assert all(inside)
    assert isinstance(grid.zone_to_geojson(zones[0]), dict)
    assert grid.zone_to_geojson(np.zeros(0, dtype=np.uint64)) == []
