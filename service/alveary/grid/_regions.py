"""Zones whose centres lie in a region: a spherical cap, a longitude/latitude box, a polygon.

The search refines from a coarse level: a zone is kept while its *reach* (a circle that
holds the centres of all its descendants at every finer level) may meet the region, its
children are tested on the next level, and at the target level each centre is tested
exactly. The children of a zone hold every finer lattice point inside its hexagon, so no
zone is missed; the reach bounds how far descendants stray outside it.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
import numpy.typing as npt
import pyproj
import shapely

from alveary.grid import _ids
from alveary.grid._authalic import (
    R_AUTHALIC,
    authalic_to_geodetic,
    geodetic_to_authalic,
    geodetic_to_xyz,
)
from alveary.grid._hierarchy import children
from alveary.grid._lattice import ids_to_xyz, xyz_to_ids
from alveary.grid._snyder import EDGE, lonlat_to_xyz, xyz_to_lonlat

Floats = npt.NDArray[np.float64]
Bools = npt.NDArray[np.bool_]
Ids = npt.NDArray[np.uint64]
#: near(xyz, beta, lon, reach): may the zones' descendants meet the region?
Near = Callable[[Floats, Floats, Floats, float], Bools]
#: inside(lat, lon): do the centres lie in the region?
Inside = Callable[[Floats, Floats], Bools]

_GEOD = pyproj.Geod(ellps="WGS84")
_START_LEVEL = 3
# Descendants' centres stay within 2/sqrt(3) lattice spacings in the plane; the plane is
# never shrunk by more than the projection's minimum scale (0.860, Snyder 1992): 1.4 covers it.
_REACH = 1.4 * EDGE


def every_zone(level: int) -> Ids:
    n = 1 << level
    i, j = np.meshgrid(np.arange(2 * n), np.arange(n), indexing="ij")
    strips = [_ids.encode(level, r, i.ravel(), j.ravel()) for r in range(5)]
    apexes = _ids.encode(level, np.array([_ids.NORTH, _ids.SOUTH]), 0, 0)
    return np.sort(np.concatenate([*strips, apexes]))


def centres_deg(ids: Ids) -> tuple[Floats, Floats]:
    """Geodetic (lat, lon) of zone centres."""
    beta, lon = xyz_to_lonlat(ids_to_xyz(ids))
    return authalic_to_geodetic(beta), lon


def search(level: int, near: Near, inside: Inside) -> Ids:
    """Refine from a coarse level; ``near(xyz, lat, lon, reach_rad)`` and ``inside(lat, lon)``."""
    start = min(level, _START_LEVEL)
    ids = every_zone(start)
    for lv in range(start, level + 1):
        xyz = ids_to_xyz(ids)
        beta, lon = xyz_to_lonlat(xyz)
        if lv == level:
            lat = authalic_to_geodetic(beta)
            return np.sort(ids[inside(lat, lon)])
        reach = _REACH / (1 << lv)
        keep = near(xyz, beta, lon, reach)
        kids, _ = children(ids[keep])
        kids = kids.ravel()
        ids = np.unique(kids[kids != 0])
    raise AssertionError("unreachable")  # pragma: no cover


def in_radius(lat: float, lon: float, meters: float, level: int) -> tuple[Ids, Floats]:
    """(ids, distances) of zones whose centres lie within ``meters``, and the point's own."""
    beta0 = geodetic_to_authalic(lat)
    centre = lonlat_to_xyz(beta0, lon)
    # WGS84 geodesics and authalic-sphere arcs differ by well under 1 % (common practice).
    arc = meters / R_AUTHALIC * 1.01 + 1e-9

    def near(xyz: Floats, beta: Floats, lo: Floats, reach: float) -> Bools:
        ok: Bools = np.arccos(np.clip(xyz @ centre, -1.0, 1.0)) <= arc + reach
        return ok

    def inside(la: Floats, lo: Floats) -> Bools:
        _, _, dist = _GEOD.inv(np.full(la.shape, lon), np.full(la.shape, lat), lo, la)
        return np.asarray(dist) <= meters

    ids = search(level, near, inside)
    own = xyz_to_ids(geodetic_to_xyz(np.float64(lat), np.float64(lon)), level)
    if own not in ids:  # the point's own zone, whose centre may lie farther away
        ids = np.sort(np.append(ids, own))
    la, lo = centres_deg(ids)
    _, _, dist = _GEOD.inv(np.full(la.shape, lon), np.full(la.shape, lat), lo, la)
    return ids, np.asarray(dist, dtype=np.float64)


def _reach_box(beta: Floats, lon: Floats, reach: float) -> tuple[Floats, Floats, Floats, Floats]:
    """A lon/lat box (geodetic latitude bounds are looser than authalic by < 0.2°)."""
    r = np.degrees(reach) + 0.2
    lat_lo, lat_hi = beta - r, beta + r
    polar = np.maximum(np.abs(lat_lo), np.abs(lat_hi)) >= 89.9
    cos_lat = np.cos(np.radians(np.minimum(np.maximum(np.abs(lat_lo), np.abs(lat_hi)), 89.9)))
    dlon = np.where(polar, 360.0, np.minimum(r / cos_lat, 360.0))
    return lon - dlon, lat_lo, lon + dlon, lat_hi


def in_bbox(west: float, south: float, east: float, north: float, level: int) -> Ids:
    spans = [(west, east)] if west <= east else [(west, 180.0), (-180.0, east)]

    def lon_in(lo: Floats, a: float, b: float) -> Bools:
        return (lo >= a) & (lo <= b)

    def near(xyz: Floats, beta: Floats, lon: Floats, reach: float) -> Bools:
        x0, y0, x1, y1 = _reach_box(beta, lon, reach)
        lat_ok = (y1 >= south) & (y0 <= north)
        lon_ok = np.zeros(lon.shape, dtype=bool)
        for a, b in spans:
            for shift in (-360.0, 0.0, 360.0):
                lon_ok |= (x1 >= a + shift) & (x0 <= b + shift)
        return lat_ok & lon_ok

    def inside(la: Floats, lo: Floats) -> Bools:
        ok = np.zeros(la.shape, dtype=bool)
        for a, b in spans:
            ok |= lon_in(lo, a, b)
        return ok & (la >= south) & (la <= north)

    return search(level, near, inside)


def in_shape(geom: shapely.Geometry, level: int) -> Ids:
    """``geom``: a (Multi)Polygon in lon/lat within [-180, 180] (see _geojson)."""
    shapely.prepare(geom)
    tripled = shapely.union_all(
        [geom, shapely.affinity.translate(geom, 360.0), shapely.affinity.translate(geom, -360.0)]
    )
    shapely.prepare(tripled)
    _x0g, y0g, _x1g, y1g = shapely.bounds(geom)

    def near(xyz: Floats, beta: Floats, lon: Floats, reach: float) -> Bools:
        x0, y0, x1, y1 = _reach_box(beta, lon, reach)
        cand = (y1 >= y0g - 0.5) & (y0 <= y1g + 0.5)
        out = np.zeros(lon.shape, dtype=bool)
        if cand.any():
            boxes = shapely.box(x0[cand], y0[cand], x1[cand], y1[cand])
            out[cand] = shapely.intersects(tripled, boxes)
        return out

    def inside(la: Floats, lo: Floats) -> Bools:
        out = np.zeros(la.shape, dtype=bool)
        cand = (la >= y0g) & (la <= y1g)
        if cand.any():
            out[cand] = shapely.intersects_xy(geom, lo[cand], la[cand])
        return out

    return search(level, near, inside)
