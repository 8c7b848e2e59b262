"""Map tile geometry: Web Mercator tiles (OGC WebMercatorQuad, z/y/x) and the zones under
their pixels. Pure arithmetic, no I/O.

A tile ``(z, y, x)`` is one of the 2^z × 2^z squares of the Web Mercator plane (EPSG:3857,
spherical formulas on a sphere of radius 6 378 137 m), rows counted from the north; its
256 × 256 pixels are sampled at their centres. The plane stops at ±85.0511° where the
projected world is square. :func:`tile_zones` maps every pixel centre to the zone under it
(the pixel-to-zone map depends only on the tile, the level and the grid, so it is computed
once and kept in a :class:`PixelZoneCache`); :func:`default_level` picks the level whose
zones are a few pixels across.
"""

from __future__ import annotations

import math
import threading
from dataclasses import dataclass

import numpy as np
import pandas as pd
from cachetools import LRUCache

from alveary import grid
from alveary._errors import InvalidInput

__all__ = [
    "EDGE_PIXELS",
    "MAX_LATITUDE",
    "MAX_ZOOM",
    "TARGET_PIXELS",
    "TILE_SIZE",
    "WEB_MERCATOR_RADIUS",
    "PixelZoneCache",
    "TileZones",
    "check_tile",
    "default_level",
    "pixel_centres",
    "pixel_size",
    "tile_bounds",
    "tile_intersects",
    "tile_zone_candidates",
    "tile_zones",
    "zone_pixels",
]

#: Pixels along each side of a tile.
TILE_SIZE = 256
#: The deepest tile matrix of WebMercatorQuad.
MAX_ZOOM = 24
#: Radius of the Web Mercator sphere (EPSG:3857), metres.
WEB_MERCATOR_RADIUS = 6378137.0
#: Latitude where the Web Mercator square ends: atan(sinh(π)), degrees.
MAX_LATITUDE = math.degrees(math.atan(math.sinh(math.pi)))
#: Zones are aimed at this many pixels across by default (2.5 to 4.9 px after rounding).
TARGET_PIXELS = 3.5
#: Zone outlines are drawn where zones are more than this many pixels across.
EDGE_PIXELS = 12.0


def check_tile(z: int, y: int, x: int) -> tuple[int, int, int]:
    """Check a tile address of WebMercatorQuad: 0 <= z <= 24, 0 <= y, x < 2^z.

    >>> check_tile(3, 2, 7)
    (3, 2, 7)
    >>> check_tile(3, 8, 0)
    Traceback (most recent call last):
    ...
    alveary._errors.InvalidInput: y is 8; allowed: tile rows [0, 7] at z=3
    """
    for name, value in (("z", z), ("y", y), ("x", x)):
        if isinstance(value, bool) or not isinstance(value, int | np.integer):
            raise InvalidInput(name, value, "an integer")
    z, y, x = int(z), int(y), int(x)
    if not 0 <= z <= MAX_ZOOM:
        raise InvalidInput("z", z, f"zoom levels [0, {MAX_ZOOM}]")
    top = (1 << z) - 1
    if not 0 <= y <= top:
        raise InvalidInput("y", y, f"tile rows [0, {top}] at z={z}")
    if not 0 <= x <= top:
        raise InvalidInput("x", x, f"tile columns [0, {top}] at z={z}")
    return z, y, x


def _lat_of_row(v: np.ndarray) -> np.ndarray:
    """Latitude (degrees) of fractional rows v of the unit Web Mercator square (0 = north)."""
    return np.degrees(np.arctan(np.sinh(np.pi * (1.0 - 2.0 * v))))


def tile_bounds(z: int, y: int, x: int) -> tuple[float, float, float, float]:
    """(west, south, east, north) of a tile in degrees.

    >>> [round(v, 4) for v in tile_bounds(0, 0, 0)]
    [-180.0, -85.0511, 180.0, 85.0511]
    >>> [round(v, 4) for v in tile_bounds(1, 0, 1)]
    [0.0, 0.0, 180.0, 85.0511]
    """
    z, y, x = check_tile(z, y, x)
    n = float(1 << z)
    west, east = x / n * 360.0 - 180.0, (x + 1) / n * 360.0 - 180.0
    north, south = _lat_of_row(np.array([y / n, (y + 1) / n])).tolist()
    return west, south, east, north


def pixel_centres(
    z: int, y: int, x: int, *, size: int = TILE_SIZE, pad: int = 0
) -> tuple[np.ndarray, np.ndarray]:
    """(lat, lon) in degrees of a tile's pixel centres, arrays of shape (size+pad, size+pad).

    Row r, column c is the pixel centre (c + 0.5, r + 0.5) from the tile's north-west
    corner. ``pad`` extra rows and columns continue past the south and east edges (into
    the next tile; longitudes past 180° are given unwrapped).

    >>> lat, lon = pixel_centres(0, 0, 0)
    >>> lat.shape, round(float(lon[0, 0]), 6), round(float(lon[0, -1]), 6)
    ((256, 256), -179.296875, 179.296875)
    """
    z, y, x = check_tile(z, y, x)
    world = float(size << z)
    steps = np.arange(size + pad, dtype=np.float64) + 0.5
    lon_c = (x * size + steps) / world * 360.0 - 180.0
    lat_r = _lat_of_row((y * size + steps) / world)
    lat, lon = np.broadcast_arrays(lat_r[:, None], lon_c[None, :])
    return np.ascontiguousarray(lat), np.ascontiguousarray(lon)


def pixel_size(z: int, y: int) -> float:
    """Ground size in metres of one pixel at the latitude of the centre of tile row y.

    On the Web Mercator sphere: 2πR·cos(lat) / (256·2^z).

    >>> round(pixel_size(0, 0), 1)  # the equator at zoom 0
    156543.0
    """
    z, y, _ = check_tile(z, y, 0)
    lat = float(_lat_of_row(np.array([(y + 0.5) / (1 << z)]))[0])
    return 2.0 * math.pi * WEB_MERCATOR_RADIUS * math.cos(math.radians(lat)) / (TILE_SIZE << z)


def _zone_width(level: int) -> float:
    """Width across flats, in metres, of a regular hexagon with the zones' area."""
    return math.sqrt(2.0 * grid.zone_area(level) / math.sqrt(3.0))


def zone_pixels(z: int, y: int, level: int) -> float:
    """How many pixels a zone of ``level`` spans on tile row y at zoom z.

    >>> round(zone_pixels(0, 0, 0), 1)  # the twelve coarsest zones on the zoom-0 tile
    49.0
    """
    return _zone_width(level) / pixel_size(z, y)


def default_level(
    z: int, y: int, levels: tuple[int, ...] | list[int], *, target: float = TARGET_PIXELS
) -> int:
    """The level whose zones are about ``target`` pixels across on tile row y at zoom z.

    Zone widths halve from one level to the next, so the chosen level gives zones of
    target/√2 to target·√2 pixels (2.5 to 4.9 for the default 3.5). The result is clamped
    to ``levels`` (the cube's levels): the nearest one, the coarser on a tie.

    >>> default_level(0, 0, range(0, 25))
    4
    >>> default_level(12, 1500, [3, 7, 10])  # zones would be level 16: clamped to 10
    10
    >>> default_level(2, 1, [3, 7, 10])  # level 6 wanted: 7 is nearest
    7
    >>> default_level(0, 0, [3, 5])  # level 4 wanted: a tie, the coarser wins
    3
    """
    have = sorted({int(v) for v in levels})
    if not have:
        raise InvalidInput("levels", list(levels), "at least one level")
    if not target > 0:
        raise InvalidInput("target", target, "a positive number of pixels")
    ideal = math.log2(_zone_width(0) / (target * pixel_size(z, y)))
    wanted = min(max(round(ideal), 0), grid.MAX_LEVEL)
    return min(have, key=lambda lv: (abs(lv - wanted), lv))


def tile_intersects(z: int, y: int, x: int, bbox: tuple[float, float, float, float]) -> bool:
    """Whether a tile overlaps a (west, south, east, north) box; west > east crosses 180°.

    A tile outside a cube's coverage needs no read at all.

    >>> tile_intersects(1, 0, 1, (10.0, 40.0, 20.0, 50.0))
    True
    >>> tile_intersects(1, 1, 1, (10.0, 40.0, 20.0, 50.0))
    False
    >>> tile_intersects(2, 1, 0, (170.0, -10.0, -170.0, 10.0))  # across the antimeridian
    True
    """
    west, south, east, north = (float(v) for v in bbox)
    tw, ts, te, tn = tile_bounds(z, y, x)
    if north < ts or south > tn:
        return False
    if west <= east:
        return not (east < tw or west > te)
    return not (te < west and tw > east)


@dataclass(frozen=True, eq=False)
class TileZones:
    """The zones under a tile's pixels.

    Attributes
    ----------
    zones:
        uint64 (n,): the distinct zones, ascending.
    index:
        uint16 (256, 256): for each pixel, its zone's position in ``zones``.
    edges:
        bool (256, 256): pixels whose right or lower neighbour (possibly in the next
        tile) lies in another zone.
    """

    z: int
    y: int
    x: int
    level: int
    zones: np.ndarray
    index: np.ndarray
    edges: np.ndarray

    @property
    def nbytes(self) -> int:
        """Memory held by the arrays, in bytes."""
        return int(self.zones.nbytes + self.index.nbytes + self.edges.nbytes)

    @property
    def draw_edges(self) -> bool:
        """Whether zones span more than :data:`EDGE_PIXELS` pixels here (outlines help)."""
        return zone_pixels(self.z, self.y, self.level) > EDGE_PIXELS


def tile_zones(z: int, y: int, x: int, level: int) -> TileZones:
    """The pixel-to-zone map of a tile at a level (uncached; see :class:`PixelZoneCache`).

    >>> tz = tile_zones(5, 11, 17, 6)
    >>> tz.index.shape, tz.zones.size == np.unique(tz.zones).size
    ((256, 256), True)
    >>> bool(tz.zones[tz.index[0, 0]] == grid.point_to_zone(*[a[0, 0] for a in pixel_centres(5, 11, 17)], 6))
    True
    """  # noqa: E501
    z, y, x = check_tile(z, y, x)
    lat, lon = pixel_centres(z, y, x, pad=1)
    # the pixel centres are a raster: rows share a latitude, columns a longitude
    ids = np.asarray(grid.raster_to_zone(lat[:, 0], lon[0, :], level), dtype=np.uint64)
    # Hash-based factorisation: O(pixels), and only the distinct zones are sorted.
    codes, uniques = pd.factorize(ids.reshape(-1), sort=True)
    full = codes.astype(np.int32).reshape(ids.shape)
    edges = (full[:-1, :-1] != full[:-1, 1:]) | (full[:-1, :-1] != full[1:, :-1])
    inner = full[:-1, :-1]
    used = np.zeros(len(uniques), dtype=bool)
    used[inner.reshape(-1)] = True
    if used.all():
        zones, index = np.asarray(uniques, dtype=np.uint64), inner
    else:  # zones met only by the padding row or column are not part of the tile
        remap = np.cumsum(used, dtype=np.int32) - 1
        zones = np.asarray(uniques, dtype=np.uint64)[used]
        index = remap[inner]
    # 256 × 256 pixels hold at most 65 536 zones: positions fit in 16 bits
    index = np.ascontiguousarray(index, dtype=np.uint16)
    return TileZones(z, y, x, int(level), zones, index, np.ascontiguousarray(edges))


class PixelZoneCache:
    """Pixel-to-zone maps by (z, y, x, level), least recently used first out, bounded in bytes.

    Safe to share between threads (two threads missing the same tile at once both compute
    it; the maps are equal). ``hits`` and ``misses`` count lookups.

    >>> cache = PixelZoneCache(8 << 20)
    >>> a = cache.get(4, 5, 6, 5); b = cache.get(4, 5, 6, 5)
    >>> a is b, cache.hits, cache.misses
    (True, 1, 1)
    """

    def __init__(self, max_bytes: int = 64 << 20) -> None:
        if max_bytes < 0:
            raise InvalidInput("max_bytes", max_bytes, ">= 0")
        self.max_bytes = int(max_bytes)
        self._lru: LRUCache[tuple[int, int, int, int], TileZones] = LRUCache(
            maxsize=max(self.max_bytes, 1), getsizeof=lambda tz: tz.nbytes
        )
        self._lock = threading.Lock()
        self.hits = 0
        self.misses = 0

    def __len__(self) -> int:
        return len(self._lru)

    @property
    def nbytes(self) -> int:
        """Bytes held now."""
        return int(self._lru.currsize)

    def get(self, z: int, y: int, x: int, level: int) -> TileZones:
        """The map of tile (z, y, x) at ``level``, computed on a miss."""
        key = (*check_tile(z, y, x), int(level))
        with self._lock:
            found = self._lru.get(key)
            if found is not None:
                self.hits += 1
                return found
            self.misses += 1
        made = tile_zones(*key)
        if 0 < made.nbytes <= self.max_bytes:
            with self._lock:
                self._lru[key] = made
        return made

    def clear(self) -> None:
        with self._lock:
            self._lru.clear()


def tile_zone_candidates(z: int, y: int, x: int, level: int) -> np.ndarray:
    """Zones that may overlap a tile (for vector tiles): centres within one zone of it.

    A superset: every zone with any part inside the tile is included (the box is widened
    by more than a zone's largest centre-to-corner distance); clipping drops the others.

    >>> zones = tile_zone_candidates(6, 20, 30, 7)
    >>> bool(np.isin(tile_zones(6, 20, 30, 7).zones, zones).all())
    True
    """
    west, south, east, north = tile_bounds(z, y, x)
    # Centre-to-corner of a hexagon is width/√3; 1.3 of the width covers it with the
    # projection's largest scale (1.163) to spare.
    reach = 1.3 * _zone_width(level)
    dlat = math.degrees(reach / 6_356_752.0)
    s, n = max(south - dlat, -90.0), min(north + dlat, 90.0)
    far = max(abs(s), abs(n))
    if far >= 89.0:
        return grid.zones_in_bbox(-180.0, s, 180.0, n, level)
    dlon = math.degrees(reach / (6_378_137.0 * math.cos(math.radians(far))))
    if east - west + 2.0 * dlon >= 360.0:
        return grid.zones_in_bbox(-180.0, s, 180.0, n, level)
    return grid.zones_in_bbox(west - dlon, s, east + dlon, n, level)
