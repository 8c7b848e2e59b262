"""Zone outlines as GeoJSON geometries (RFC 7946).

Rings are closed, counter-clockwise (exterior) and in (longitude, latitude). A zone that
crosses the antimeridian is cut there into a MultiPolygon (RFC 7946 §3.1.9); a zone that
holds a pole is drawn up to that pole along ±180° as one Polygon.
"""

from __future__ import annotations

import itertools
from typing import Any

import numpy as np
import shapely
from pyproj import Geod
from shapely.geometry import mapping

from alveary import grid

__all__ = ["zone_geometries"]

_WORLD = shapely.box(-180.0, -90.0, 180.0, 90.0)


def _ring_list(lon: np.ndarray, lat: np.ndarray) -> list[list[float]]:
    pts = np.column_stack([lon, lat])
    pts = np.vstack([pts, pts[:1]])
    return pts.tolist()


_GEOD = Geod(ellps="WGS84")


def _crossing_lat(lon1: float, lat1: float, lon2: float, lat2: float, lon: float) -> float:
    """Latitude where the WGS84 geodesic between two points meets meridian ``lon`` (degrees).

    ``lon1`` and ``lon2`` are unwrapped (continuous), ``lon`` lies between them. Found by
    bisection along the geodesic (pyproj.Geod), so the cut points lie on the zone's edge
    and cutting changes neither the outline nor its geodesic area.
    """
    az, _, dist = _GEOD.inv(lon1, lat1, lon2, lat2)
    lo, hi = 0.0, float(dist)
    for _ in range(60):
        mid = 0.5 * (lo + hi)
        x, _, _ = _GEOD.fwd(lon1, lat1, az, mid)
        x = lon1 + (x - lon1 + 180.0) % 360.0 - 180.0
        if (x - lon) * (lon2 - lon1) < 0:
            lo = mid
        else:
            hi = mid
    _, y, _ = _GEOD.fwd(lon1, lat1, az, 0.5 * (lo + hi))
    return float(y)


def _cut(lon: np.ndarray, lat: np.ndarray) -> dict[str, Any]:
    """A ring crossing ±180° (or around a pole) as valid GeoJSON within [-180, 180]."""
    step = (np.diff(np.append(lon, lon[0])) + 180.0) % 360.0 - 180.0
    unwrapped = lon[0] + np.concatenate([[0.0], np.cumsum(step)])  # closed: last = first + turn
    ring = np.column_stack([unwrapped, np.append(lat, lat[0])])
    turn = float(step.sum())
    # Put a vertex where each edge meets an odd multiple of 180°, so the cut below adds
    # no interpolated point.
    pts = [ring[0]]
    for a, b in itertools.pairwise(ring):
        lo, hi = sorted((a[0], b[0]))
        ks = np.arange(np.ceil((lo - 180.0) / 360.0), np.floor((hi - 180.0) / 360.0) + 1)
        cuts = [180.0 + 360.0 * k for k in ks if lo < 180.0 + 360.0 * k < hi]
        for x in sorted(cuts, reverse=bool(b[0] < a[0])):
            pts.append(np.array([x, _crossing_lat(a[0], a[1], b[0], b[1], x)]))
        pts.append(b)
    pts = np.array(pts)
    if abs(turn) > 180.0:  # the zone holds a pole: close the ring over it along meridians
        pole = 90.0 if turn > 0 else -90.0
        pts = np.vstack([pts, [[pts[-1, 0], pole], [pts[0, 0], pole]], pts[:1]])
    shape = shapely.Polygon(pts)
    if not shape.is_valid:
        shape = shapely.make_valid(shape)
    x0, _, x1, _ = shape.bounds
    pieces = []
    for k in range(int(np.floor((x0 + 180.0) / 360.0)), int(np.floor((x1 + 180.0) / 360.0)) + 1):
        moved = shapely.affinity.translate(shape, -360.0 * k)
        piece = shapely.intersection(moved, _WORLD)
        if not piece.is_empty:
            pieces.append(piece)
    merged = shapely.union_all(pieces)
    polys = [g for g in getattr(merged, "geoms", [merged]) if isinstance(g, shapely.Polygon)]
    polys = [shapely.geometry.polygon.orient(p, 1.0) for p in polys if p.area > 0]
    out = polys[0] if len(polys) == 1 else shapely.MultiPolygon(polys)
    return _plain(mapping(out))


def _plain(obj: Any) -> Any:
    if isinstance(obj, dict):
        return {k: _plain(v) for k, v in obj.items()}
    if isinstance(obj, list | tuple):
        return [_plain(v) for v in obj]
    return obj


def zone_geometries(zones: np.ndarray) -> list[dict[str, Any]]:
    """GeoJSON geometry of each zone.

    Examples
    --------
    >>> g = zone_geometries(grid.point_to_zone([10.0], [20.0], 5))[0]
    >>> g["type"], len(g["coordinates"][0])
    ('Polygon', 7)
    >>> zone_geometries(grid.point_to_zone([0.0], [180.0], 4))[0]["type"]
    'MultiPolygon'
    """
    zones = np.asarray(zones, dtype=np.uint64).reshape(-1)
    if zones.size == 0:
        return []
    corners = grid.zone_boundary(zones, face_edges=True)  # (N, m, 2) lat, lon, NaN-padded
    lat, lon = corners[..., 0], corners[..., 1]
    valid = ~np.isnan(lat)
    with np.errstate(invalid="ignore"):
        span = np.nanmax(lon, axis=1) - np.nanmin(lon, axis=1)
    out: list[dict[str, Any]] = []
    for n in range(zones.size):
        m = valid[n]
        if span[n] <= 180.0:
            out.append({"type": "Polygon", "coordinates": [_ring_list(lon[n, m], lat[n, m])]})
        else:
            out.append(_cut(lon[n, m], lat[n, m]))
    return out
