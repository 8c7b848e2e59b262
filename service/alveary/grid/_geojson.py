"""Zone outlines as GeoJSON geometries (RFC 7946).

Rings are the zones' true outlines (see ``_outline``), closed, in (longitude, latitude),
exterior rings counter-clockwise (§3.1.6). A zone that crosses the antimeridian is cut
there into a MultiPolygon (§3.1.9), the cut points put on the WGS84 geodesic between
the outline's neighbouring points so that cutting changes neither the outline nor its
geodesic area; a zone that holds a pole is drawn up to that pole along ±180° as one
Polygon.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import numpy.typing as npt
import pyproj
import shapely
from shapely.geometry import mapping

from alveary.grid._authalic import authalic_to_geodetic
from alveary.grid._outline import outlines
from alveary.grid._polygon import fold, plain
from alveary.grid._snyder import xyz_to_lonlat

Floats = npt.NDArray[np.float64]
_GEOD = pyproj.Geod(ellps="WGS84")
_HALVINGS = 56  # bisection along a geodesic, down to a few nanometres


def _meridian_crossings(start: Floats, end: Floats, meridian: Floats) -> Floats:
    """Latitudes where WGS84 geodesics start -> end (lon, lat; longitudes unwrapped) meet
    the meridians ``meridian`` that lie between their ends (bisection along each)."""
    az, _, dist = _GEOD.inv(start[:, 0], start[:, 1], end[:, 0], end[:, 1])
    lo, hi = np.zeros(dist.shape), np.asarray(dist, dtype=np.float64)
    east = end[:, 0] > start[:, 0]
    for _ in range(_HALVINGS):
        mid = 0.5 * (lo + hi)
        x, _, _ = _GEOD.fwd(start[:, 0], start[:, 1], az, mid)
        x = start[:, 0] + (np.asarray(x) - start[:, 0] + 180.0) % 360.0 - 180.0
        short = (x < meridian) == east  # not yet at the meridian
        lo, hi = np.where(short, mid, lo), np.where(short, hi, mid)
    _, y, _ = _GEOD.fwd(start[:, 0], start[:, 1], az, 0.5 * (lo + hi))
    return np.asarray(y, dtype=np.float64)


def _from_cut(ring: Floats, edge: npt.NDArray[np.intp], turn: float) -> Floats:
    """A closed ring round a pole (unwrapped longitudes spanning ``turn`` = ±360°, cut
    points inserted after ``edge``) restarted at its cut point, so that it runs from a
    meridian at an odd multiple of 180° to the same meridian ``turn`` further on: its
    closure over the pole then lies along ±180°, and the ring folds into one piece."""
    start = int(edge[0]) + 1 if edge.size else 0  # no crossing: it starts on the meridian
    body = ring[:-1]
    later = body[:start] + np.array([turn, 0.0])
    rolled = np.vstack([body[start:], later])
    return np.vstack([rolled, rolled[:1] + np.array([turn, 0.0])])


def _cut(lon: Floats, lat: Floats) -> dict[str, Any]:
    """One zone's ring that crosses ±180 (or winds round a pole) as valid GeoJSON."""
    step = (np.diff(np.append(lon, lon[0])) + 180.0) % 360.0 - 180.0
    x = lon[0] + np.concatenate([[0.0], np.cumsum(step)])
    turn = 360.0 * round(float(x[-1] - x[0]) / 360.0)  # 0, or ±360 round a pole
    x[-1] = x[0] + turn  # closed exactly, whatever the rounding of the sum
    ring = np.column_stack([x, np.append(lat, lat[0])])
    # A vertex where an edge meets an odd multiple of 180°, so that cutting adds no other.
    k0 = np.floor((ring[:-1, 0] - 180.0) / 360.0)
    k1 = np.floor((ring[1:, 0] - 180.0) / 360.0)
    edge = np.flatnonzero(k0 != k1)  # an outline's pieces are far shorter than 360°
    meridian = 180.0 + 360.0 * np.maximum(k0, k1)[edge]
    cut = np.column_stack([meridian, _meridian_crossings(ring[edge], ring[edge + 1], meridian)])
    ring = np.insert(ring, edge + 1, cut, axis=0)
    if turn:  # the zone holds a pole: close the ring over it along ±180°
        ring = _from_cut(ring, edge, turn)
        pole = 90.0 if turn > 0 else -90.0
        ring = np.vstack([ring, [[ring[-1, 0], pole], [ring[0, 0], pole]], ring[:1]])
    parts = fold(shapely.Polygon(ring))
    shape = parts[0] if len(parts) == 1 else shapely.MultiPolygon(parts)
    result: dict[str, Any] = plain(mapping(shapely.orient_polygons(shape, exterior_cw=False)))
    return result


def geometries(ids: npt.NDArray[np.uint64]) -> list[dict[str, Any]]:
    """GeoJSON geometry of each of some validated zones (a flat array)."""
    if ids.size == 0:
        return []
    points, counts = outlines(ids)
    beta, lon = xyz_to_lonlat(points)
    lat = authalic_to_geodetic(beta)
    first = np.cumsum(counts) - counts
    # the closed ring of each zone: its points, then its first point again
    size = counts + 1
    rank = np.arange(int(size.sum())) - np.repeat(first + np.arange(ids.size), size)
    idx = np.repeat(first, size) + np.where(rank == np.repeat(counts, size), 0, rank)
    jump = np.abs(np.diff(lon[idx])) > 180.0
    jump[np.cumsum(size)[:-1] - 1] = False  # from one ring to the next
    crossing = np.zeros(ids.size, dtype=bool)
    crossing[np.repeat(np.arange(ids.size), size)[:-1][jump]] = True
    closed = np.column_stack([lon[idx], lat[idx]]).tolist()
    bounds = np.concatenate([[0], np.cumsum(size)]).tolist()
    out: list[dict[str, Any]] = []
    for z in range(ids.size):
        if crossing[z]:
            s, e = int(first[z]), int(first[z] + counts[z])
            out.append(_cut(lon[s:e], lat[s:e]))
        else:
            out.append({"type": "Polygon", "coordinates": [closed[bounds[z] : bounds[z + 1]]]})
    return out
