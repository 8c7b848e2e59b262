"""raster_to_zone against point_to_zone, point by point: map tiles at every zoom (the
antimeridian columns, the polar rows, the icosahedron's vertices (pentagons) and face
edges, zones from a fraction of a pixel to whole tiles across, several coarse steps),
irregular rasters, and the errors for bad input. point_to_zone itself is checked
against pyproj and analytic results in the other grid tests."""

from __future__ import annotations

import numpy as np
import pytest

from alveary import grid
from alveary._errors import GridError
from alveary.grid._authalic import authalic_to_geodetic
from alveary.grid._icosahedron import VERTICES


def mercator_rows(z, y, size=257):
    v = (y * 256 + np.arange(size) + 0.5) / (256 * 2**z)
    return np.degrees(np.arctan(np.sinh(np.pi * (1 - 2 * v))))


def mercator_cols(z, x, size=257):
    return (x * 256 + np.arange(size) + 0.5) / (256 * 2**z) * 360.0 - 180.0


def tiles():
    rng = np.random.default_rng(20261202)
    out = [(0, 0, 0, 3), (2, 0, 0, 5), (2, 3, 3, 5), (3, 0, 7, 6), (3, 7, 0, 6), (6, 31, 63, 9)]
    while len(out) < 40:
        z = int(rng.integers(0, 16))
        y, x = (int(v) for v in rng.integers(0, 2**z, size=2))
        level = int(np.clip(z + 4 + rng.integers(-3, 4), 0, grid.MAX_LEVEL))
        out.append((z, y, x, level))
    return out


@pytest.mark.parametrize("tile", tiles(), ids=str)
def test_tile_rasters_equal_point_to_zone(tile):
    z, y, x, level = tile
    lat, lon = mercator_rows(z, y), mercator_cols(z, x)
    got = grid.raster_to_zone(lat, lon, level)
    want = grid.point_to_zone(lat[:, None], lon[None, :], level)
    assert got.shape == (257, 257) and got.dtype == np.uint64
    np.testing.assert_array_equal(got, want)


def tile_of(lat, lon, z):
    """The Web Mercator tile (z, y, x) holding a point (rows clamp at +-85.05 degrees)."""
    n = 2**z
    x = min(int((lon + 180.0) / 360.0 * n), n - 1)
    merc = np.arcsinh(np.tan(np.radians(np.clip(lat, -85.0511, 85.0511))))
    y = min(max(int((1.0 - merc / np.pi) / 2.0 * n), 0), n - 1)
    return z, y, x


def special_tiles():
    """Tiles on the icosahedron's vertices (pentagons), on face edges' middles, on the
    antimeridian and the polar rows, at zooms up to 18 and levels up to 22."""
    vertices = VERTICES[[0, 1, 5, 6, 11]]
    edges = (VERTICES[[0, 1, 2]] + VERTICES[[1, 2, 7]]) / 2.0
    out = []
    for k, xyz in enumerate(np.concatenate([vertices, edges])):
        xyz = xyz / np.linalg.norm(xyz)
        lat = float(authalic_to_geodetic(np.degrees(np.arcsin(xyz[2]))))
        lon = float(np.degrees(np.arctan2(xyz[1], xyz[0])))
        z = (5, 9, 13, 18)[k % 4]
        out.append((*tile_of(lat, lon, z), min(z + 4, grid.MAX_LEVEL)))
    for z in (1, 8, 17):  # antimeridian, both sides, and the polar rows
        last = 2**z - 1
        out += [(z, last // 3, 0, z + 4), (z, last // 3, last, z + 4)]
        out += [(z, 0, last // 2, z + 3), (z, last, 0, z + 5)]
    out += [(18, 99999, 131071, 22), (16, 30000, 32768, 21)]  # zones about a pixel
    return out


@pytest.mark.parametrize("tile", special_tiles(), ids=str)
def test_special_tiles_equal_point_to_zone(tile):
    z, y, x, level = tile
    lat, lon = mercator_rows(z, y), mercator_cols(z, x)
    want = grid.point_to_zone(lat[:, None], lon[None, :], level)
    np.testing.assert_array_equal(grid.raster_to_zone(lat, lon, level), want)


@pytest.mark.parametrize("step", [2, 4, 16, 32])
def test_coarse_steps_equal_point_to_zone(step):
    for z, y, x, level in [(6, 20, 33, 10), (3, 1, 5, 7), (11, 700, 1500, 15)]:
        lat, lon = mercator_rows(z, y), mercator_cols(z, x)
        want = grid.point_to_zone(lat[:, None], lon[None, :], level)
        np.testing.assert_array_equal(grid.raster_to_zone(lat, lon, level, step=step), want)


def test_irregular_and_small_rasters():
    rng = np.random.default_rng(7)
    lat = np.sort(rng.uniform(-89.9, 89.9, 50))
    lon = np.sort(rng.uniform(-400.0, 400.0, 70))  # longitudes wrap
    for level in (0, 4, 11):
        want = grid.point_to_zone(lat[:, None], lon[None, :], level)
        np.testing.assert_array_equal(grid.raster_to_zone(lat, lon, level), want)
    tiny = grid.raster_to_zone([10.0, 10.1], [20.0], 9)
    assert tiny.shape == (2, 1)
    assert tiny[0, 0] == grid.point_to_zone(10.0, 20.0, 9)


def test_bad_input_is_named():
    with pytest.raises(GridError, match="lat"):
        grid.raster_to_zone([95.0, 0.0], [0.0, 1.0], 5)
    with pytest.raises(GridError, match="level"):
        grid.raster_to_zone([0.0], [0.0], 99)
