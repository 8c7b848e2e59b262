"""A cube's coverage as the query planner uses it: boxes to clip requests to.

A cube stores its coverage as one longitude/latitude box (west > east crosses the
antimeridian), the footprint of its sources. Zones whose centres lie in it are the ones
an ingest writes; a coarser level's zone may have data with its centre a little outside
(its children inside), so the planner widens the box by a margin of 1.5 zone widths of
the level asked for. Requests are clipped to the widened box before zones are counted
and enumerated, and a request that lies wholly outside it is answered "not found", with
the coverage, instead of a table of nulls.
"""

from __future__ import annotations

import functools
import math
from typing import Any

import numpy as np
import orjson
import pyproj
import shapely

from alveary import grid
from alveary._errors import NotFound

__all__ = [
    "Box",
    "clip_bbox",
    "clip_polygon",
    "coverage_boxes",
    "covered",
    "outside",
    "radius_in_coverage",
]

Box = tuple[float, float, float, float]

_WORLD: Box = (-180.0, -90.0, 180.0, 90.0)
_DEG_PER_M = 1.0 / 110_000.0  # a little more than the most degrees of latitude per metre
_GEOD = pyproj.Geod(ellps="WGS84")


def _lon_pieces(west: float, east: float) -> list[tuple[float, float]]:
    """[west, east] as intervals within [-180, 180]; west > east crosses the antimeridian."""
    if west <= east:
        return [(west, east)]
    return [(west, 180.0), (-180.0, east)]


@functools.lru_cache(maxsize=256)
def coverage_boxes(coverage: Box, level: int) -> tuple[Box, ...] | None:
    """The coverage widened by the level's margin, as boxes that do not cross 180°.

    ``None`` when the widened coverage is the whole globe (nothing to clip).

    >>> coverage_boxes((-180.0, -90.0, 180.0, 90.0), 9) is None
    True
    >>> [tuple(round(v, 2) for v in b) for b in coverage_boxes((170.0, 0.0, -170.0, 10.0), 3)]
    [(156.85, -12.17, 180.0, 22.17), (-180.0, -12.17, -156.85, 22.17)]
    """
    w, s, e, n = (float(v) for v in coverage)
    dlat = 1.5 * math.sqrt(grid.zone_area(level)) * _DEG_PER_M
    s2, n2 = max(-90.0, s - dlat), min(90.0, n + dlat)
    span = e - w if w <= e else e - w + 360.0
    steepest = max(abs(s2), abs(n2))
    whole_lon = steepest >= 89.5 or span >= 360.0
    if not whole_lon:
        dlon = dlat / math.cos(math.radians(steepest))
        whole_lon = span + 2.0 * dlon >= 360.0
    if whole_lon:
        if s2 <= -90.0 and n2 >= 90.0:
            return None
        return ((-180.0, s2, 180.0, n2),)
    w2, e2 = w - dlon, e + dlon
    w2 = w2 + 360.0 if w2 < -180.0 else w2
    e2 = e2 - 360.0 if e2 > 180.0 else e2
    return tuple((a, s2, b, n2) for a, b in _lon_pieces(w2, e2))


def outside(cube_id: str, coverage: Box) -> NotFound:
    """The error for a selection wholly outside a cube's coverage."""
    w, s, e, n = (float(v) for v in coverage)
    return NotFound(
        "data",
        cube_id,
        f"the selection lies wholly outside the coverage of cube {cube_id!r}: west {w}, "
        f"south {s}, east {e}, north {n} (degrees; west > east crosses the antimeridian)",
        members={"coverage": [w, s, e, n]},
    )


def covered(boxes: tuple[Box, ...] | None, lat: Any, lon: Any) -> np.ndarray:
    """Which points (degrees) lie in the boxes (``None``: everywhere)."""
    la = np.asarray(lat, dtype=np.float64)
    lo = np.asarray(lon, dtype=np.float64)
    if boxes is None:
        return np.ones(la.shape, dtype=bool)
    out = np.zeros(la.shape, dtype=bool)
    for w, s, e, n in boxes:
        out |= (lo >= w) & (lo <= e) & (la >= s) & (la <= n)
    return out


def clip_bbox(box: Box, boxes: tuple[Box, ...] | None) -> list[Box]:
    """The parts of a request box (west > east crosses 180°) inside the coverage boxes,
    each within [-180, 180]; empty when they do not meet.

    >>> clip_bbox((-180.0, -90.0, 180.0, 90.0), ((10.0, 40.0, 11.0, 41.0),))
    [(10.0, 40.0, 11.0, 41.0)]
    >>> clip_bbox((170.0, 0.0, -170.0, 5.0), None)
    [(170.0, 0.0, 180.0, 5.0), (-180.0, 0.0, -170.0, 5.0)]
    """
    west, south, east, north = box
    if east - west >= 360.0:
        west, east = -180.0, 180.0
    pieces = [(a, south, b, north) for a, b in _lon_pieces(west, east)]
    if boxes is None:
        return pieces
    out: list[Box] = []
    for a, s, b, n in pieces:
        for cw, cs, ce, cn in boxes:
            lo, hi, s2, n2 = max(a, cw), min(b, ce), max(s, cs), min(n, cn)
            if lo <= hi and s2 <= n2:
                out.append((lo, s2, hi, n2))
    return out


def clip_polygon(area: grid.Footprint, boxes: tuple[Box, ...] | None) -> grid.Footprint | None:
    """The part of a request polygon inside the coverage boxes (the polygon itself when it
    lies inside them); ``None`` when they do not meet."""
    if boxes is None:
        return area
    clip = shapely.union_all([shapely.box(*b) for b in boxes])
    if shapely.covers(clip, area.shape):
        return area
    if not shapely.intersects(clip, area.shape):
        return None
    inside = shapely.intersection(area.shape, clip)
    parts = [g for g in shapely.get_parts(inside) if isinstance(g, shapely.Polygon) and g.area > 0]
    if not parts:
        return None
    shape = parts[0] if len(parts) == 1 else shapely.MultiPolygon(parts)
    return grid.read_polygon(orjson.loads(shapely.to_geojson(shape)))


def radius_in_coverage(
    lat: float, lon: float, meters: float, level: int, boxes: tuple[Box, ...]
) -> tuple[np.ndarray, np.ndarray] | None:
    """(ids, distances) of the zones a radius query answers, enumerated only within the
    coverage boxes: the zones there whose centres lie within ``meters`` (WGS84
    geodesic), and the zone holding the point. ``None`` when the circle does not reach
    the coverage and the point's own zone lies outside it.
    """
    dlat = meters * _DEG_PER_M + 1e-9
    steepest = min(abs(lat) + dlat, 90.0)
    if steepest >= 89.5:
        circle: Box = (-180.0, max(-90.0, lat - dlat), 180.0, min(90.0, lat + dlat))
    else:
        dlon = min(dlat / math.cos(math.radians(steepest)), 180.0)
        west = (lon - dlon + 180.0) % 360.0 - 180.0
        east = (lon + dlon + 180.0) % 360.0 - 180.0
        circle = (
            (-180.0, lat - dlat, 180.0, lat + dlat)
            if dlon >= 180.0
            else (west, lat - dlat, east, lat + dlat)
        )
    pieces = clip_bbox(circle, boxes)
    own = np.atleast_1d(np.asarray(grid.point_to_zone(lat, lon, level), dtype=np.uint64))
    found = [grid.zones_in_bbox(*p, level) for p in pieces]
    ids = np.unique(np.concatenate([*found, np.zeros(0, dtype=np.uint64)]).astype(np.uint64))
    if ids.size:
        clat, clon = grid.zone_to_point(ids)
        _, _, dist = _GEOD.inv(np.full(ids.size, lon), np.full(ids.size, lat), clon, clat)
        ids = ids[np.asarray(dist) <= meters]
    olat, olon = grid.zone_to_point(own)
    if ids.size == 0 and not covered(boxes, olat, olon).any():
        return None
    ids = np.union1d(ids, own)
    clat, clon = grid.zone_to_point(ids)
    _, _, dist = _GEOD.inv(np.full(ids.size, lon), np.full(ids.size, lat), clon, clat)
    return ids.astype(np.uint64), np.asarray(dist, dtype=np.float64)
