"""Web Mercator tile geometry and the pixel-to-zone map, judged against PROJ (pyproj's
EPSG:3857 -> EPSG:4326), pyproj.Geod distances, shapely box intersection and
grid.point_to_zone evaluated at independently computed pixel centres."""

from __future__ import annotations

import math
import threading

import numpy as np
import pyproj
import pytest
import shapely

from alveary import grid
from alveary._errors import InvalidInput
from alveary.query._tiles import (
    EDGE_PIXELS,
    MAX_LATITUDE,
    TILE_SIZE,
    PixelZoneCache,
    check_tile,
    default_level,
    pixel_centres,
    pixel_size,
    tile_bounds,
    tile_intersects,
    tile_zone_candidates,
    tile_zones,
    zone_pixels,
)

# EPSG:3857 is the spherical Mercator on R = 6 378 137 m; its square spans ±πR.
HALF = math.pi * 6378137.0
TO_LONLAT = pyproj.Transformer.from_crs("EPSG:3857", "EPSG:4326", always_xy=True)
GEOD = pyproj.Geod(ellps="WGS84")

# Tiles of every kind: the whole world, touching ±180°, the top and bottom rows near the
# pole limit, mid latitudes, and deep zooms.
TILES = [
    (0, 0, 0),
    (1, 0, 0),
    (1, 1, 1),
    (3, 0, 7),  # north-east corner: touches +180° and 85.05° N
    (3, 7, 0),  # south-west corner: touches -180° and 85.05° S
    (5, 11, 17),
    (7, 0, 127),
    (9, 200, 300),
    (14, 6000, 8191),
    (20, 400000, 524287),
]


def _mercator_pixels(z, y, x, size=TILE_SIZE, pad=0):
    """Pixel-centre lat/lon via PROJ from EPSG:3857 metres (independent of the module)."""
    step = 2.0 * HALF / (size * 2**z)
    idx = np.arange(size + pad) + 0.5
    mx = -HALF + (x * size + idx) * step
    my = HALF - (y * size + idx) * step
    mxx, myy = np.meshgrid(mx, my)
    lon, lat = TO_LONLAT.transform(mxx, myy)
    return np.asarray(lat), np.asarray(lon)


@pytest.mark.parametrize("tile", TILES)
def test_tile_bounds_match_proj(tile):
    z, y, x = tile
    step = 2.0 * HALF / 2**z
    # PROJ: the tile's corners from EPSG:3857 metres
    lon, lat = TO_LONLAT.transform(
        [-HALF + x * step, -HALF + (x + 1) * step], [HALF - (y + 1) * step, HALF - y * step]
    )
    west, south, east, north = tile_bounds(*tile)
    assert west == pytest.approx(lon[0], abs=1e-9)
    assert east == pytest.approx(lon[1], abs=1e-9)
    assert south == pytest.approx(lat[0], abs=1e-9)
    assert north == pytest.approx(lat[1], abs=1e-9)


def test_world_stops_at_the_published_latitude():
    # The Web Mercator square ends at 85.0511287798° (EPSG:3857's published validity)
    assert MAX_LATITUDE == pytest.approx(85.0511287798, abs=1e-9)
    _, south, _, north = tile_bounds(0, 0, 0)
    assert north == pytest.approx(85.0511287798, abs=1e-9) and south == -north


@pytest.mark.parametrize("tile", TILES)
def test_pixel_centres_match_proj(tile):
    lat, lon = pixel_centres(*tile)
    ref_lat, ref_lon = _mercator_pixels(*tile)  # PROJ
    assert lat.shape == lon.shape == (TILE_SIZE, TILE_SIZE)
    np.testing.assert_allclose(lat, ref_lat, rtol=0, atol=1e-9)
    np.testing.assert_allclose(lon, ref_lon, rtol=0, atol=1e-9)


def test_padded_centres_continue_into_the_next_tile():
    lat, lon = pixel_centres(4, 5, 6, pad=1)
    nlat, _ = pixel_centres(4, 6, 6)
    _, nlon = pixel_centres(4, 5, 7)
    # the extra row is the next tile's first row (same arithmetic, PROJ-checked above)
    np.testing.assert_allclose(lat[-1, :-1], nlat[0], atol=1e-12)
    np.testing.assert_allclose(lon[:-1, -1], nlon[:, 0], atol=1e-12)


@pytest.mark.parametrize(
    ("z", "y", "x", "name", "allowed"),
    [
        (25, 0, 0, "z", "[0, 24]"),
        (-1, 0, 0, "z", "[0, 24]"),
        (2, 4, 0, "y", "[0, 3]"),
        (2, 0, -1, "x", "[0, 3]"),
        (2.5, 0, 0, "z", "an integer"),
        (2, True, 0, "y", "an integer"),
    ],
)
def test_bad_tiles_name_the_parameter(z, y, x, name, allowed):
    with pytest.raises(InvalidInput) as err:
        check_tile(z, y, x)
    assert err.value.parameter == name
    assert allowed in str(err.value)


def test_pixel_size_matches_geodesic_spacing():
    # pyproj.Geod on the sphere of EPSG:3857: one pixel of longitude along the parallel
    # through the tile row's centre (from PROJ) is the pixel size, to second order
    sphere = pyproj.Geod(a=6378137.0, b=6378137.0)
    for z, y in [(0, 0), (6, 20), (12, 1500), (18, 100000)]:
        step = 2.0 * HALF / 2**z
        _, lat = TO_LONLAT.transform(0.0, HALF - (y + 0.5) * step)
        dlon = 360.0 / (TILE_SIZE * 2**z)
        _, _, d = sphere.inv(0.0, lat, dlon, lat)
        assert pixel_size(z, y) == pytest.approx(d, rel=1e-6)


@pytest.mark.parametrize("tile", TILES)
def test_pixel_zones_match_point_to_zone_at_proj_centres(tile):
    z = tile[0]
    level = min(default_level(z, tile[1], range(0, 21)), 18)
    tz = tile_zones(*tile, level)
    lat, lon = _mercator_pixels(*tile)  # PROJ pixel centres
    expected = grid.point_to_zone(lat, lon, level)
    assert tz.index.shape == (TILE_SIZE, TILE_SIZE)
    np.testing.assert_array_equal(tz.zones[tz.index], expected)
    assert np.array_equal(tz.zones, np.unique(expected))  # distinct, ascending, no extras


@pytest.mark.parametrize("tile", [(3, 0, 7), (3, 7, 0), (5, 11, 17), (9, 200, 511)])
def test_edges_where_right_or_lower_neighbour_differs(tile):
    level = default_level(tile[0], tile[1], range(0, 21)) - 2  # zones ~14 px across
    tz = tile_zones(*tile, level)
    lat, lon = _mercator_pixels(*tile, pad=1)  # PROJ, one pixel into the next tiles
    zones = grid.point_to_zone(lat, lon, level)  # longitudes past 180° wrap
    expected = (zones[:-1, :-1] != zones[:-1, 1:]) | (zones[:-1, :-1] != zones[1:, :-1])
    np.testing.assert_array_equal(tz.edges, expected)
    assert 0 < expected.mean() < 0.5


def test_pixels_per_zone_at_the_default_level():
    # "zones about 2-6 pixels across": measured from the map itself, a hexagon of p pixels
    # is sqrt(2p/√3) pixels across flats
    for z, y, x in [(4, 5, 6), (8, 90, 40), (13, 3000, 4000), (17, 43000, 70000)]:
        level = default_level(z, y, range(0, 25))
        tz = tile_zones(z, y, x, level)
        counts = np.bincount(tz.index.reshape(-1))
        border = np.unique(
            np.concatenate([tz.index[0], tz.index[-1], tz.index[:, 0], tz.index[:, -1]])
        )
        inner = np.delete(counts, border)
        across = math.sqrt(2.0 * float(np.median(inner)) / math.sqrt(3.0))
        assert 2.0 <= across <= 6.0, (z, y, level, across)
        assert 2.0 <= zone_pixels(z, y, level) <= 6.0


def test_default_level_is_clamped_to_the_cube():
    levels = (5, 9)
    assert default_level(1, 0, levels) == 5  # wants ~2: the coarsest the cube has
    assert default_level(16, 20000, levels) == 9  # wants ~15: the finest
    # the ideal level of each zoom, nearest cube level on both sides of the gap
    for z in range(0, 20):
        ideal = default_level(z, 0, range(0, 25))
        got = default_level(z, 0, levels)
        assert got in levels
        assert abs(got - ideal) == min(abs(v - ideal) for v in levels)
    with pytest.raises(InvalidInput):
        default_level(3, 0, ())


def test_edges_are_drawn_only_for_large_zones():
    z, y, x = 10, 380, 500
    fine = default_level(z, y, range(0, 25))
    assert not tile_zones(z, y, x, fine).draw_edges
    coarse = tile_zones(z, y, x, fine - 2)  # 4x wider zones: more than 12 px
    assert zone_pixels(z, y, fine - 2) > EDGE_PIXELS
    assert coarse.draw_edges


def test_tile_intersects_matches_shapely():
    # shapely box intersection (a box crossing 180° is two boxes)
    rng = np.random.default_rng(7)
    for _ in range(300):
        z = int(rng.integers(0, 6))
        y, x = (int(v) for v in rng.integers(0, 2**z, 2))
        w, e = sorted(rng.uniform(-180, 180, 2))
        s, n = sorted(rng.uniform(-89, 89, 2))
        if rng.random() < 0.3:
            w, e = e, w  # across the antimeridian
        boxes = (
            [shapely.box(w, s, e, n)]
            if w <= e
            else [shapely.box(w, s, 180, n), shapely.box(-180, s, e, n)]
        )
        tile = shapely.box(*tile_bounds(z, y, x))
        expected = any(tile.intersects(b) for b in boxes)
        assert tile_intersects(z, y, x, (w, s, e, n)) == expected


@pytest.mark.parametrize(("tile", "level"), [((6, 20, 30), 8), ((4, 0, 15), 6), ((7, 64, 0), 9)])
def test_candidates_cover_every_zone_touching_the_tile(tile, level):
    # shapely: outlines (face crossings included) against the tile's box, in a padded
    # longitude frame so that zones across 180° are judged whole
    west, south, east, north = tile_bounds(*tile)
    got = set(tile_zone_candidates(*tile, level).tolist())
    seed = grid.point_to_zone((south + north) / 2, (west + east) / 2, level)
    ring = int(
        2
        + 1.5
        * max(east - west, north - south)
        / math.degrees(math.sqrt(grid.zone_area(level)) / 6371e3)
    )
    near = grid.zone_disk(seed, ring)
    box = shapely.box(west, south, east, north)
    outlines = grid.zone_boundary(near, face_edges=True)  # (n, m, 2), NaN-padded
    lat, lon = outlines[:, :, 0], outlines[:, :, 1]
    step = (np.diff(lon, axis=1) + 180.0) % 360.0 - 180.0  # unwrapped rings
    lon = lon[:, :1] + np.concatenate([np.zeros((len(near), 1)), np.cumsum(step, axis=1)], axis=1)
    last = np.array([row[~np.isnan(row)][-1] for row in lon])
    closing = (lon[:, 0] - last + 180.0) % 360.0 - 180.0
    polar = np.abs(lon[:, 0] - last - closing) > 1.0  # rings winding around a pole
    assert (np.nanmin(np.abs(lat[polar]), axis=1) > max(abs(south), abs(north))).all()
    keep = ~np.isnan(lat) & ~polar[:, None]
    owners, rows = np.unique(np.nonzero(keep)[0], return_inverse=True)
    rings = shapely.linearrings(lon[keep], lat[keep], indices=rows)
    shapes = shapely.polygons(rings)
    touching = np.zeros(len(shapes), dtype=bool)
    for k in (-360.0, 0.0, 360.0):
        moved = shapely.transform(shapes, lambda xy, k=k: xy + np.array([k, 0.0]))
        touching |= shapely.intersects(moved, box)
    missing = set(near[owners[touching]].tolist()) - got
    assert not missing, grid.zone_to_text(np.array(sorted(missing), dtype=np.uint64))


def test_cache_is_bounded_and_least_recently_used():
    one = tile_zones(6, 20, 30, 8).nbytes
    cache = PixelZoneCache(3 * one + one // 2)
    for x in range(30, 35):
        cache.get(6, 20, x, 8)
    assert len(cache) == 3 and cache.nbytes <= cache.max_bytes
    first = cache.get(6, 20, 32, 8)  # still held
    assert cache.hits == 1 and cache.misses == 5
    cache.get(6, 20, 35, 8)  # evicts the least recently used (x=33)
    assert cache.get(6, 20, 32, 8) is first
    cache.get(6, 20, 33, 8)
    assert cache.misses == 7
    # a zero-byte cache computes every time and holds nothing
    empty = PixelZoneCache(0)
    empty.get(6, 20, 30, 8)
    assert len(empty) == 0
    with pytest.raises(InvalidInput):
        PixelZoneCache(-1)


def test_cache_from_many_threads_gives_one_consistent_map():
    cache = PixelZoneCache(64 << 20)
    out: list = []

    def work():
        out.append(cache.get(7, 40, 60, 10))

    threads = [threading.Thread(target=work) for _ in range(6)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    reference = tile_zones(7, 40, 60, 10)
    assert all(np.array_equal(m.zones[m.index], reference.zones[reference.index]) for m in out)
    assert cache.hits + cache.misses == 6 and len(cache) == 1
