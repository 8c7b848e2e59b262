"""raster_to_zone against point_to_zone, point by point: map tiles at every zoom (the
antimeridian columns, the polar rows, zones from a fraction of a pixel to whole tiles
across), irregular rasters, and the errors for bad input."""

from __future__ import annotations

import numpy as np
import pytest

from alveary import grid
from alveary._errors import GridError


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
