"""The public grid functions: thin, validated, vectorised wrappers over the private modules."""

from __future__ import annotations

import numpy as np

from alveary._errors import GridError
from alveary.grid import _geojson, _hierarchy, _ids, _lattice, _regions
from alveary.grid._authalic import EARTH_AREA, authalic_to_geodetic, geodetic_to_xyz
from alveary.grid._disk import disk as _disk
from alveary.grid._ids import MAX_LEVEL, check_level
from alveary.grid._snyder import xyz_to_lonlat

_ALL_ZONES_MAX = 10
#: A pentagon's area as a share of a hexagon's at the same level.
PENTAGON_SHARE = 5.0 / 6.0


def _finite(name: str, value) -> np.ndarray:
    try:
        arr = np.asarray(value, dtype=np.float64)
    except (TypeError, ValueError):
        raise GridError(name, value, "finite numbers") from None
    bad = ~np.isfinite(arr)
    if bad.any():
        idx = None if arr.ndim == 0 else _ids._first_bad(bad)
        raise GridError(name, _ids._pick(arr, bad), "a finite number", index=idx)
    return arr


def _latlon(lat, lon) -> tuple[np.ndarray, np.ndarray]:
    la, lo = _finite("lat", lat), _finite("lon", lon)
    bad = np.abs(la) > 90.0
    if bad.any():
        idx = None if la.ndim == 0 else _ids._first_bad(bad)
        raise GridError("lat", _ids._pick(la, bad), "[-90, 90] degrees", index=idx)
    try:
        la, lo = np.broadcast_arrays(la, lo)
    except ValueError:
        raise GridError(
            "lon", lo.shape, f"an array broadcastable to lat's shape {la.shape}"
        ) from None
    return la, (lo + 180.0) % 360.0 - 180.0


def _one_zone(zone, parameter: str = "zone") -> np.uint64:
    ids = _ids.as_zones(zone, parameter)
    if ids.size != 1:
        raise GridError(parameter, f"array of shape {ids.shape}", "a single zone id")
    return ids.reshape(())


def _steps(k, parameter: str = "k") -> int:
    try:
        value = int(k)
        ok = value == k and value >= 0 and not isinstance(k, bool)
    except (TypeError, ValueError, OverflowError):
        ok = False
    if not ok:
        raise GridError(parameter, k, "an integer >= 0")
    return value


def zone_count(level: int) -> int:
    """Number of zones at a refinement level: 10·4^level + 2.

    >>> zone_count(0), zone_count(3)
    (12, 642)
    """
    return 10 * 4 ** check_level(level) + 2


def zone_area(level: int) -> float:
    """Area of a hexagonal zone in m² (pentagons have 5/6 of it).

    >>> round(zone_area(10) / 1e6, 3)  # km²
    48.644
    """
    return float(EARTH_AREA / (10 * 4 ** check_level(level)))


def zone_areas(zones) -> np.ndarray:
    """Area in m² of each zone: ``zone_area(level)`` for hexagons, 5/6 of it for pentagons.

    >>> a = zone_areas(all_zones(1))
    >>> round(float(a.sum()) / 1e12, 3)  # the WGS84 ellipsoid's area, million km²
    510.066
    """
    ids = _ids.as_zones(zones)
    level = _ids.decode(ids)[0]
    full = EARTH_AREA / (10.0 * np.power(4.0, level))
    return np.where(is_pentagon(ids), full * PENTAGON_SHARE, full)


def point_to_zone(lat, lon, level: int) -> np.ndarray:
    """Zone ids (uint64) of WGS84 geodetic points, in degrees, at a level.

    Longitudes wrap, so 190 is -170.

    >>> int(point_to_zone(52.52, 13.405, 9))
    5251621
    >>> zone_to_text(point_to_zone([52.52, -33.9], [13.405, 151.2], 9)).tolist()
    ['9c-17-37', '9a-829-376']
    """
    level = check_level(level)
    la, lo = _latlon(lat, lon)
    shape = la.shape
    la, lo = la.reshape(-1), lo.reshape(-1)
    out = np.empty(la.shape, dtype=np.uint64)
    for s in range(0, la.size, _lattice.BLOCK):  # blocks that stay in cache
        block = slice(s, s + _lattice.BLOCK)
        out[block] = _lattice.xyz_to_ids(geodetic_to_xyz(la[block], lo[block]), level)
    return out.reshape(shape) if shape else out[0]


def zone_to_point(zones) -> tuple[np.ndarray, np.ndarray]:
    """(lat, lon) in degrees, WGS84 geodetic, of zone centres.

    >>> lat, lon = zone_to_point(zone_from_text("0n"))
    >>> round(float(lat), 6), float(lon)  # the northern apex: an icosahedron vertex
    (58.397145, 11.25)
    """
    ids = _ids.as_zones(zones)
    flat = ids.reshape(-1)
    lat, lon = np.empty(flat.shape), np.empty(flat.shape)
    for s in range(0, flat.size, _lattice.BLOCK):  # blocks that stay in cache
        block = slice(s, s + _lattice.BLOCK)
        beta, lon[block] = xyz_to_lonlat(_lattice.ids_to_xyz(flat[block]))
        lat[block] = authalic_to_geodetic(beta)
    if ids.ndim == 0:
        return lat[0], lon[0]
    return lat.reshape(ids.shape), lon.reshape(ids.shape)


def zone_level(zones) -> np.ndarray:
    """Refinement level of each zone.

    >>> zone_level(point_to_zone(0.0, 0.0, 7)).item()
    7
    """
    return _ids.decode(_ids.as_zones(zones))[0]


def is_pentagon(zones) -> np.ndarray:
    """Whether each zone is one of the twelve pentagons (icosahedron vertices) of its level.

    >>> int(is_pentagon(all_zones(4)).sum())
    12
    """
    level, _strip, a, b = _lattice.ids_to_chart(_ids.as_zones(zones))
    n = np.left_shift(1, level)
    return (a % n == 0) & (b % n == 0)


def zone_boundary(zone, *, face_edges: bool = False) -> np.ndarray:
    """Corners (lat, lon) of a zone, counter-clockwise seen from outside the Earth.

    One zone gives an (m, 2) array, m = 6 for hexagons and 5 for pentagons. An array of N
    zones gives (N, 6, 2), with NaN in the sixth row of pentagons.

    A zone is straight-edged in each face's plane, so on the globe its edges bend slightly
    where they cross a face edge. With ``face_edges=True`` those crossing points are
    inserted between the corners, giving the zone's true outline (geodesic areas then
    match :func:`zone_area` closely, pentagons included: their five edges all bend, and
    the corners alone overstate a pentagon's area by about 4 %). Arrays of zones are then
    NaN-padded to the longest outline.

    >>> zone_boundary(zone_from_text("5b-20-7")).shape, zone_boundary(zone_from_text("5n")).shape
    ((6, 2), (5, 2))
    >>> zone_boundary(zone_from_text("5n"), face_edges=True).shape
    (10, 2)
    """
    ids = _ids.as_zones(zone, "zone")
    flat = ids.reshape(-1)
    if face_edges:
        rings = _lattice.exact_boundaries(flat)
        xyz = np.full((flat.size, max(len(r) for r in rings), 3), np.nan)
        for row, ring in enumerate(rings):
            xyz[row, : len(ring)] = ring
    else:
        xyz = _lattice.boundaries(flat)
    beta, lon = xyz_to_lonlat(xyz)
    out = np.stack([authalic_to_geodetic(beta), lon], axis=-1)
    if ids.ndim == 0:
        out = out[0]
        return out[~np.isnan(out[:, 0])]
    return out.reshape(ids.shape + out.shape[1:])


def zone_neighbors(zone) -> np.ndarray:
    """The 6 (or 5 for pentagons) adjacent zones, counter-clockwise.

    An array of N zones gives (N, 6), with 0 in the last column of pentagons.

    >>> len(zone_neighbors(zone_from_text("6c-40-21"))), len(zone_neighbors(zone_from_text("6s")))
    (6, 5)
    """
    ids = _ids.as_zones(zone, "zone")
    out = _lattice.neighbors(ids.reshape(-1))
    if ids.ndim == 0:
        return out[0][out[0] != 0]
    return out.reshape((*ids.shape, 6))


def zone_disk(zone, k: int, *, return_steps: bool = False):
    """Every zone within k steps of a zone (itself included), ids ascending.

    With ``return_steps`` also each zone's step count from the centre zone.

    >>> len(zone_disk(point_to_zone(10.0, 20.0, 12), 3))  # 3k(k+1) + 1
    37
    """
    ids, steps = _disk(_one_zone(zone), _steps(k))
    return (ids, steps) if return_steps else ids


def zone_ring(zone, k: int) -> np.ndarray:
    """The zones exactly k steps from a zone, ids ascending.

    >>> len(zone_ring(point_to_zone(10.0, 20.0, 12), 3))  # 6k
    18
    """
    ids, steps = _disk(_one_zone(zone), _steps(k))
    return ids[steps == k]


def zone_parent(zones) -> np.ndarray:
    """The zone one level coarser that contains each zone's centre.

    An edge child's centre lies on the edge between two coarser zones; its parent is the
    one of the two with the smaller id.

    >>> z = point_to_zone(-12.0, 130.0, 8)
    >>> bool(zone_parent(zone_children(z)[0][0]) == z)  # the central child
    True
    """
    ids = _ids.as_zones(zones)
    level = _ids.decode(ids)[0]
    if (level == 0).any():
        idx = None if ids.ndim == 0 else _ids._first_bad(level == 0)
        raise GridError("zones", _ids._pick(ids, level == 0), "zones of level >= 1", index=idx)
    return _hierarchy.parents(ids)


def zone_children(zone) -> tuple[np.ndarray, np.ndarray]:
    """(ids, weights) of a zone's children one level finer.

    The central child comes first with weight 1; each edge child is cut in half by the
    zone's edge and has weight 1/2 (the fraction of its area inside the zone). Hexagons have
    7 children, pentagons 6. An array of N zones gives (N, 7) arrays; pentagons pad with id
    0 and weight 0.

    >>> ids, w = zone_children(zone_from_text("3a-5-2"))
    >>> len(ids), float(w.sum())
    (7, 4.0)
    """
    ids = _ids.as_zones(zone, "zone")
    level = _ids.decode(ids)[0]
    if (level >= MAX_LEVEL).any():
        raise GridError("zone", "level 24 zone", f"zones of level < {MAX_LEVEL}")
    kids, weights = _hierarchy.children(ids.reshape(-1))
    if ids.ndim == 0:
        keep = kids[0] != 0
        return kids[0][keep], weights[0][keep]
    return kids.reshape((*ids.shape, 7)), weights.reshape((*ids.shape, 7))


def zones_in_radius(lat, lon, meters, level: int, *, return_distance: bool = False):
    """Zones whose centres lie within ``meters`` (WGS84 geodesic) of a point, ids ascending.

    With ``return_distance`` also each centre's distance in metres.

    >>> ids, d = zones_in_radius(45.0, 7.0, 2000.0, 13, return_distance=True)
    >>> len(ids), bool(d.max() <= 2000.0)  # about 12.6 km² / 0.76 km²
    (17, True)
    """
    level = check_level(level)
    la, lo = _latlon(lat, lon)
    if la.ndim != 0:
        raise GridError("lat", "an array", "a single point")
    m = float(_finite("meters", meters))
    if m < 0:
        raise GridError("meters", m, ">= 0")
    ids, dist = _regions.in_radius(float(la), float(lo), m, level)
    return (ids, dist) if return_distance else ids


def zones_in_bbox(west, south, east, north, level: int) -> np.ndarray:
    """Zones whose centres lie in a longitude/latitude box, ids ascending.

    ``west > east`` means the box crosses the antimeridian.

    >>> len(zones_in_bbox(5.0, 45.0, 6.0, 46.0, 9))  # about 8 750 km² / 194.6 km²
    45
    """
    level = check_level(level)
    w, e = (float(_finite(n, v)) for n, v in (("west", west), ("east", east)))
    s, n = (float(_finite(n, v)) for n, v in (("south", south), ("north", north)))
    for name, v in (("south", s), ("north", n)):
        if abs(v) > 90.0:
            raise GridError(name, v, "[-90, 90] degrees")
    if s > n:
        raise GridError("south", s, f"<= north ({n})")
    if e - w >= 360.0:
        w, e = -180.0, 180.0
    else:
        w, e = ((w + 180.0) % 360.0 - 180.0), ((e + 180.0) % 360.0 - 180.0)
        if e == -180.0 and east > west:
            e = 180.0
    return _regions.in_bbox(w, s, e, n, level)


def zones_in_polygon(geometry: dict, level: int) -> np.ndarray:
    """Zones whose centres lie in a GeoJSON Polygon or MultiPolygon, ids ascending.

    Holes are respected; rings crossing the antimeridian are read as RFC 7946 describes.

    >>> square = {"type": "Polygon", "coordinates": [[[5, 45], [6, 45], [6, 46], [5, 46], [5, 45]]]}
    >>> len(zones_in_polygon(square, 9))
    45
    """
    level = check_level(level)
    return _regions.in_shape(_geojson.parse(geometry), level)


def all_zones(level: int) -> np.ndarray:
    """Every zone of a level (levels up to 10), ids ascending.

    >>> len(all_zones(2))
    162
    """
    level = check_level(level)
    if level > _ALL_ZONES_MAX:
        raise GridError("level", level, f"[0, {_ALL_ZONES_MAX}] for all_zones")
    return _regions.every_zone(level)


def zone_to_text(zones) -> np.ndarray:
    """The readable text form: level, strip letter, row and column (``"12b-3021-877"``).

    The two apexes are ``"<level>n"`` and ``"<level>s"``.

    >>> str(zone_to_text(index_to_zone(12, 1, 3021, 877)))
    '12b-3021-877'
    """
    return _ids.to_text(_ids.as_zones(zones))


def zone_from_text(texts) -> np.ndarray:
    """Zone ids of text forms; the inverse of :func:`zone_to_text`.

    >>> int(zone_from_text("0n"))
    26
    """
    return _ids.from_text(texts)


def zone_to_index(zones) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """(level, region, i, j): the array position of zones in the five-strip layout.

    Regions 0..4 are strips (i in [0, 2n), j in [0, n), n = 2**level); 5 and 6 are the
    northern and southern apex, with i = j = 0.

    >>> [int(x) for x in zone_to_index(zone_from_text("12b-3021-877"))]
    [12, 1, 3021, 877]
    """
    return _ids.decode(_ids.as_zones(zones))


def index_to_zone(level, region, i, j) -> np.ndarray:
    """Zone ids of array positions (level, region, i, j); arguments broadcast.

    >>> str(zone_to_text(index_to_zone(3, 6, 0, 0)))
    '3s'
    """
    lv = np.asarray(level)
    if lv.size and not np.all([check_level(x) == x for x in np.unique(lv).tolist()]):
        raise GridError("level", level, f"integers in [0, {MAX_LEVEL}]")  # pragma: no cover
    lv, r, ii, jj = np.broadcast_arrays(lv, region, i, j)
    r, ii, jj = (np.asarray(x) for x in (r, ii, jj))
    for name, arr in (("region", r), ("i", ii), ("j", jj)):
        if arr.dtype.kind not in "iu":
            raise GridError(name, _ids._scalar(arr), "integers")
    n = np.left_shift(1, lv.astype(np.int64))
    apex = r >= _ids.NORTH
    checks = (
        ("region", (r < 0) | (r > _ids.SOUTH), "0..6"),
        ("i", np.where(apex, ii != 0, (ii < 0) | (ii >= 2 * n)), "[0, 2^(level+1)), 0 for apexes"),
        ("j", np.where(apex, jj != 0, (jj < 0) | (jj >= n)), "[0, 2^level), 0 for apexes"),
    )
    for name, bad, allowed in checks:
        if bad.any():
            arr = {"region": r, "i": ii, "j": jj}[name]
            idx = None if arr.ndim == 0 else _ids._first_bad(bad)
            raise GridError(name, _ids._pick(arr, bad), allowed, index=idx)
    return _ids.encode(lv, r, ii, jj)
