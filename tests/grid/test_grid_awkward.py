"""Awkward places: the poles, the antimeridian, longitudes outside +-180, points exactly
on face edges and vertices, and region searches (box, polygon, radius) checked against a
brute-force filter of every zone centre with shapely and pyproj.Geod (reference libraries).
"""

from __future__ import annotations

import numpy as np
import pyproj
import pytest
import shapely
from grid_reference import ReferenceGrid, authalic_to_geodetic, latlon

from alveary import grid
from support.samples import (
    ANTIMERIDIAN_CUT,
    ANTIMERIDIAN_JUMP,
    AWKWARD_POINTS,
    BBOXES,
    MULTIPOLYGON,
    POLAR_CAP,
    POLYGON_WITH_HOLE,
    SMALL_JUMP,
    pentagons,
)

GEOD = pyproj.Geod(ellps="WGS84")
U64 = np.uint64
BRUTE_LEVEL = 7  # 163 842 zones: brute force stays cheap
EPS_DEG = 1e-9  # centres this close to a region's edge are not judged (ties either way)


@pytest.fixture(scope="module")
def ref() -> ReferenceGrid:
    return ReferenceGrid()


@pytest.fixture(scope="module")
def centres():
    zones = grid.all_zones(BRUTE_LEVEL)
    lat, lon = grid.zone_to_point(zones)
    return zones, np.asarray(lat), np.asarray(lon)


# -- poles and longitudes ---------------------------------------------------------------


@pytest.mark.parametrize("pole", [90.0, -90.0])
def test_a_pole_is_one_zone_whatever_the_longitude(pole):
    lons = np.array([-180.0, -179.5, -90.0, 0.0, 11.25, 45.0, 123.456, 180.0, 359.0, -720.0])
    # The poles are the midpoints of an icosahedron edge (standard orientation): at level 0
    # on the edge between two pentagons (a tie, either will do), from level 1 on a lattice
    # point, hence a zone centre.
    zones = grid.point_to_zone(np.full(lons.size, pole), lons, 0)
    ends = {int(z) for z in pentagons(0) if abs(float(grid.zone_to_point(U64(z))[0][()])) > 58}
    assert set(zones.tolist()) <= ends
    for level in range(1, grid.MAX_LEVEL + 1):
        zones = grid.point_to_zone(np.full(lons.size, pole), lons, level)
        assert np.unique(zones).size == 1, f"level {level}"
        lat, _ = grid.zone_to_point(zones[:1])
        assert abs(float(lat[0]) - pole) < 1e-9


def test_longitudes_wrap():
    lat = np.array([12.5, -33.3, 60.0, 0.0, 89.0, -89.0])
    for level in (0, 3, 9, 17, 24):
        base = grid.point_to_zone(lat, np.array([-170.0, 0.0, 180.0, -0.5, 33.0, -33.0]), level)
        for lon in (
            [190.0, 360.0, -180.0, 719.5, 393.0, -393.0],
            [-530.0, -360.0, 540.0, -720.5, -327.0, 327.0],
        ):
            assert (grid.point_to_zone(lat, np.array(lon), level) == base).all(), (level, lon)


def test_longitude_wrap_on_random_points():
    # multiples of 1/1024 degree stay exact when 360 is added
    rng = np.random.default_rng(11)
    lat = np.degrees(np.arcsin(rng.uniform(-1, 1, 5000)))
    lon = np.round(rng.uniform(-180, 180, 5000) * 1024) / 1024
    shift = rng.integers(-3, 4, 5000) * 360.0
    for level in (4, 15, 24):
        assert (
            grid.point_to_zone(lat, lon + shift, level) == grid.point_to_zone(lat, lon, level)
        ).all()


def test_awkward_points_round_trip(ref):
    lat, lon = np.array(AWKWARD_POINTS).T
    for level in (0, 1, 7, 16, 24):
        zones = grid.point_to_zone(lat, lon, level)
        clat, clon = grid.zone_to_point(zones)
        assert (grid.point_to_zone(clat, clon, level) == zones).all()
        expected, margin = ref.locate(lat, lon, level)
        clear = margin > 1e-6
        assert (zones[clear] == expected[clear]).all(), level


def test_centres_longitudes_are_in_range():
    lat, lon = grid.zone_to_point(grid.all_zones(5))
    assert (np.abs(lat) <= 90).all()
    assert (lon >= -180).all() and (lon <= 180).all()


# -- icosahedron vertices and edges ------------------------------------------------------


def test_vertices_given_as_geodetic_lat_lon_are_pentagons(ref):
    # the vertices are placed on the authalic sphere; a caller gives geodetic latitudes
    lat, lon = ref.vertex_geodetic.T
    for level in range(grid.MAX_LEVEL + 1):
        zones = grid.point_to_zone(lat, lon, level)
        assert sorted(zones.tolist()) == pentagons(level), level


def test_the_authalic_latitude_is_not_a_geodetic_one(ref):
    # 58.2825 degrees authalic is about 58.397 geodetic: mixing them up moves a vertex by
    # some 12 km, out of its pentagon from level 10 on (zones of about 7 km)
    beta, lon = latlon(ref.V)
    assert np.abs(ref.vertex_geodetic[:, 0] - beta).max() > 0.1
    zones = grid.point_to_zone(beta, lon, 12)
    assert not np.asarray(grid.is_pentagon(zones))[np.abs(beta) > 1].any()


def test_points_exactly_on_face_edges(ref):
    frac = np.linspace(0.0, 1.0, 37)
    pts = []
    for f in ref.F:
        for a, b in ((f[0], f[1]), (f[1], f[2]), (f[2], f[0])):
            ang = np.arccos(ref.V[a] @ ref.V[b])
            pts.append(
                (
                    np.sin((1 - frac) * ang)[:, None] * ref.V[a]
                    + np.sin(frac * ang)[:, None] * ref.V[b]
                )
                / np.sin(ang)
            )
    beta, lon = latlon(np.concatenate(pts))
    lat = authalic_to_geodetic(beta)
    for level in (0, 2, 5, 11, 20, 24):
        expected, margin = ref.locate(lat, lon, level)
        got = grid.point_to_zone(lat, lon, level)
        clear = margin > 1e-6
        assert clear.mean() > 0.5
        bad = np.flatnonzero((got != expected) & clear)
        assert bad.size == 0, f"level {level}: lat={lat[bad[0]]!r}, lon={lon[bad[0]]!r}"


# -- boxes --------------------------------------------------------------------------------


def box_filter(lat, lon, west, south, east, north):
    """Brute force with shapely: a box, or two across the antimeridian; also the centres
    too close to an edge to judge."""
    if west <= east:
        shape = shapely.box(west, south, east, north)
    else:
        shape = shapely.union(
            shapely.box(west, south, 180, north), shapely.box(-180, south, east, north)
        )
    inside = shapely.contains_xy(shape, lon, lat) | shapely.intersects_xy(shape.boundary, lon, lat)
    edge = np.zeros(lat.shape, bool)
    for x in (west, east):
        edge |= np.abs(lon - x) < EPS_DEG
    for y in (south, north):
        edge |= (np.abs(lat - y) < EPS_DEG) & (np.abs(y) < 90)
    return inside, edge


@pytest.mark.parametrize("name", sorted(BBOXES))
def test_zones_in_bbox_against_brute_force(centres, name):
    zones, lat, lon = centres
    west, south, east, north = BBOXES[name]
    got = np.asarray(grid.zones_in_bbox(west, south, east, north, BRUTE_LEVEL))
    assert got.dtype == U64
    assert (np.diff(got.astype(np.int64)) > 0).all()
    inside, edge = box_filter(lat, lon, west, south, east, north)
    assert inside.sum() > 10
    judged = set(zones[~edge].tolist())
    assert set(got.tolist()) & judged == set(zones[inside & ~edge].tolist())


def test_whole_world_box_is_every_zone():
    # a box's edges belong to it: the poles' zones (centred on the poles) are in
    for level in range(6):
        got = grid.zones_in_bbox(-180, -90, 180, 90, level)
        assert np.array_equal(np.sort(got), grid.all_zones(level))


def test_antimeridian_box_is_the_union_of_its_halves():
    for level in (5, 9):
        across = set(np.asarray(grid.zones_in_bbox(175.5, -3.3, -176.5, 4.4, level)).tolist())
        west = set(np.asarray(grid.zones_in_bbox(175.5, -3.3, 180, 4.4, level)).tolist())
        east = set(np.asarray(grid.zones_in_bbox(-180, -3.3, -176.5, 4.4, level)).tolist())
        assert across == west | east and len(across) > 0


# -- polygons -----------------------------------------------------------------------------


def polygon_filter(geometry, lat, lon):
    shape = shapely.geometry.shape(geometry)
    inside = shapely.contains_xy(shape, lon, lat)
    near = shapely.distance(shape.boundary, shapely.points(lon, lat)) < EPS_DEG
    return inside, near


@pytest.mark.parametrize(
    "geometry",
    [POLYGON_WITH_HOLE, MULTIPOLYGON, ANTIMERIDIAN_CUT, POLAR_CAP],
    ids=["with hole", "multipolygon", "antimeridian cut", "polar cap"],
)
def test_zones_in_polygon_against_brute_force(centres, geometry):
    zones, lat, lon = centres
    got = np.asarray(grid.zones_in_polygon(geometry, BRUTE_LEVEL))
    assert got.dtype == U64
    assert (np.diff(got.astype(np.int64)) > 0).all()
    inside, near = polygon_filter(geometry, lat, lon)
    assert inside.sum() > 10
    judged = set(zones[~near].tolist())
    assert set(got.tolist()) & judged == set(zones[inside & ~near].tolist())


def test_holes_are_respected(centres):
    shell = {"type": "Polygon", "coordinates": POLYGON_WITH_HOLE["coordinates"][:1]}
    hole = {"type": "Polygon", "coordinates": POLYGON_WITH_HOLE["coordinates"][1:]}
    with_hole = set(np.asarray(grid.zones_in_polygon(POLYGON_WITH_HOLE, BRUTE_LEVEL)).tolist())
    full = set(np.asarray(grid.zones_in_polygon(shell, BRUTE_LEVEL)).tolist())
    in_hole = set(np.asarray(grid.zones_in_polygon(hole, BRUTE_LEVEL)).tolist())
    assert in_hole and with_hole == full - in_hole


def test_a_ring_jumping_across_the_antimeridian_is_the_cut_multipolygon():
    # RFC 7946 section 3.1.9 asks writers to cut such shapes (ANTIMERIDIAN_CUT); an uncut
    # ring whose edge jumps from 172.3 to -174.6 is read the short way across +-180
    for level in (4, BRUTE_LEVEL):
        cut = np.asarray(grid.zones_in_polygon(ANTIMERIDIAN_CUT, level))
        jump = np.asarray(grid.zones_in_polygon(ANTIMERIDIAN_JUMP, level))
        assert np.array_equal(cut, jump) and cut.size > 0
    small = np.asarray(grid.zones_in_polygon(SMALL_JUMP, 9))
    box = np.asarray(grid.zones_in_bbox(179.0, -1.0, -179.0, 1.0, 9))
    assert np.array_equal(small, box) and small.size > 10


def test_whole_world_polygon_is_every_zone():
    # the usual GeoJSON way to write the whole globe: a lon/lat rectangle with edges
    # along -180 and 180 (edges straight in lon/lat, RFC 7946 section 3.1.1)
    world = {
        "type": "Polygon",
        "coordinates": [[[-180, -90], [180, -90], [180, 90], [-180, 90], [-180, -90]]],
    }
    for level in (0, 2, 4):
        got = np.asarray(grid.zones_in_polygon(world, level))
        assert np.array_equal(got, grid.all_zones(level))


# -- radius -------------------------------------------------------------------------------


RADIUS_CASES = [
    (12.5, -3.25, 300e3),
    (89.5, 10.0, 250e3),  # holds the north pole
    (-89.9, -100.0, 120e3),  # holds the south pole
    (-5.0, 179.9, 400e3),  # across the antimeridian
    (58.39714591, 11.25, 200e3),  # on a vertex (a pentagon)
    (30.0, 60.0, 2_500e3),
]


@pytest.mark.parametrize("lat0, lon0, meters", RADIUS_CASES)
def test_zones_in_radius_against_geod(centres, lat0, lon0, meters):
    zones, lat, lon = centres
    got, dist = grid.zones_in_radius(lat0, lon0, meters, BRUTE_LEVEL, return_distance=True)
    got, dist = np.asarray(got), np.asarray(dist)
    assert got.dtype == U64
    _, _, d = GEOD.inv(np.full(lat.size, lon0), np.full(lat.size, lat0), lon, lat)
    d = np.asarray(d)
    judged = np.abs(d - meters) > 1e-3
    assert set(got.tolist()) & set(zones[judged].tolist()) == set(
        zones[(d <= meters) & judged].tolist()
    )
    expected = dict(zip(zones.tolist(), d.tolist(), strict=True))
    np.testing.assert_allclose(dist, [expected[z] for z in got.tolist()], rtol=0, atol=1e-3)
    assert set(np.asarray(grid.zones_in_radius(lat0, lon0, meters, BRUTE_LEVEL)).tolist()) == set(
        got.tolist()
    )


@pytest.mark.parametrize("seed", range(4))
def test_radius_always_holds_the_zone_of_the_point(centres, seed):
    # A field app asks what is around where it stands: the zone the point lies in
    # (point_to_zone) always belongs to the answer, with its real distance, beside every
    # zone whose centre is within the radius (brute force over every zone with
    # pyproj.Geod distances).
    zones, lat, lon = centres
    rng = np.random.default_rng(seed)
    for _ in range(6):
        lat0 = float(np.degrees(np.arcsin(rng.uniform(-1, 1))))
        lon0 = float(rng.uniform(-180, 180))
        meters = float(rng.choice([0.0, 1.0, rng.uniform(0, 60e3), rng.uniform(0, 120e3)]))
        got, dist = grid.zones_in_radius(lat0, lon0, meters, BRUTE_LEVEL, return_distance=True)
        own = int(grid.point_to_zone(lat0, lon0, BRUTE_LEVEL))
        _, _, d = GEOD.inv(np.full(lat.size, lon0), np.full(lat.size, lat0), lon, lat)
        d = np.asarray(d)
        judged = np.abs(d - meters) > 1e-3
        want = set(zones[(d <= meters) & judged].tolist()) | {own}
        assert set(got.tolist()) & (set(zones[judged].tolist()) | {own}) == want
        assert (np.diff(got.astype(np.int64)) > 0).all()
        expected = dict(zip(zones.tolist(), d.tolist(), strict=True))
        np.testing.assert_allclose(dist, [expected[z] for z in got.tolist()], atol=1e-3)


def test_readme_radius_holds_the_zone_under_the_point():
    # the README's example: the zone's centre is 970 m from the point, beyond 500 m
    got, dist = grid.zones_in_radius(30.55, -36.1, 500.0, 12, return_distance=True)
    own = grid.point_to_zone(30.55, -36.1, 12)
    clat, clon = grid.zone_to_point(own)
    assert got.tolist() == [int(own)]
    assert dist[0] == pytest.approx(GEOD.inv(-36.1, 30.55, float(clon), float(clat))[2], abs=1e-6)


def test_tiny_radius_at_a_centre_is_that_zone():
    zone = grid.point_to_zone(12.5, -3.25, 10)
    lat, lon = grid.zone_to_point(zone)
    got = np.asarray(grid.zones_in_radius(float(lat), float(lon), 1e-3, 10))
    assert got.tolist() == [int(zone)]
    assert np.asarray(grid.zones_in_radius(float(lat), float(lon), 0.0, 10)).tolist() == [int(zone)]


# -- one point at a time ------------------------------------------------------------------


def test_single_points_and_zones_agree_with_the_lattice_model_and_arrays(ref):
    # Single points and zones take a path of plain floats (a GPS fix at a time); judged
    # here by the lattice model like the array path, and equal to it point by point.
    rng = np.random.default_rng(21)
    lat = np.concatenate(
        [np.array(AWKWARD_POINTS)[:, 0], np.degrees(np.arcsin(rng.uniform(-1, 1, 300)))]
    )
    lon = np.concatenate([np.array(AWKWARD_POINTS)[:, 1], rng.uniform(-540, 540, 300)])
    vlat, vlon = ref.vertex_geodetic.T
    lat, lon = np.concatenate([lat, vlat]), np.concatenate([lon, vlon])
    for level in (0, 1, 5, 12, 19, 24):
        arrays = grid.point_to_zone(lat, lon, level)
        singles = np.array([grid.point_to_zone(a, b, level) for a, b in zip(lat, lon, strict=True)])
        assert np.array_equal(arrays, singles), level
        expected, margin = ref.locate(lat, np.asarray(lon), level)
        clear = margin > 1e-6
        assert (singles[clear] == expected[clear]).all(), level
        clat, clon = grid.zone_to_point(arrays)
        for k, zone in enumerate(arrays[:40]):
            one_lat, one_lon = grid.zone_to_point(zone)  # longitude is arbitrary at a pole
            assert GEOD.inv(one_lon, one_lat, clon[k], clat[k])[2] < 1e-6
            assert grid.zone_to_text(zone) == grid.zone_to_text(arrays[k : k + 1])[0]
            assert grid.is_pentagon(int(zone)) == grid.is_pentagon(arrays)[k]
            assert [int(x) for x in grid.zone_to_index(zone)] == [
                int(x[k]) for x in grid.zone_to_index(arrays)
            ]
        few = arrays[:5]
        np.testing.assert_allclose(grid.zone_to_point(few)[0], clat[:5], rtol=0, atol=1e-12)
        assert np.array_equal(grid.zone_level(few), np.full(5, level))
