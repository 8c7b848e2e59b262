"""The public grid functions: thin, validated, vectorised wrappers over the private modules."""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any, overload

import numpy as np
import numpy.typing as npt

from alveary._errors import GridError
from alveary.grid import _geojson, _hierarchy, _ids, _lattice, _one, _outline, _regions
from alveary.grid._authalic import EARTH_AREA, authalic_to_geodetic, geodetic_to_xyz
from alveary.grid._checks import check_lat_lon, scalar_lat_lon, steps
from alveary.grid._disk import disk as _disk
from alveary.grid._ids import MAX_LEVEL, check_level
from alveary.grid._snyder import xyz_to_lonlat

Ids = npt.NDArray[np.uint64]
Ints = npt.NDArray[np.int64]
Floats = npt.NDArray[np.float64]
Bools = npt.NDArray[np.bool_]
#: One zone id, or one coordinate.
OneId = int | np.integer[Any]
One = float | np.floating[Any] | int | np.integer[Any]
#: Many zone ids, or many coordinates.
Many = npt.NDArray[Any] | Sequence[Any]

_ALL_ZONES_MAX = 10
#: A pentagon's area as a share of a hexagon's at the same level.
PENTAGON_SHARE = 5.0 / 6.0


def _fields(zones: Any) -> tuple[Any, ...] | None:
    """(level, region, i, j) of one zone or a few, decoded as ints; None for big arrays.

    Scalars give np.int64 scalars, a small 1-d array gives int64 arrays.
    """
    few = _one.zone_ints(zones)
    if few is None:
        return None
    columns = tuple(
        np.array(c, dtype=np.int64) for c in zip(*map(_ids.decode_int, few), strict=True)
    )
    return columns if isinstance(zones, np.ndarray) else tuple(c[0] for c in columns)


def _one_zone(zone: Any, parameter: str = "zone") -> Ids:
    ids = _ids.as_zones(zone, parameter)
    if ids.size != 1:
        raise GridError(parameter, f"array of shape {ids.shape}", "a single zone id")
    return ids.reshape(())


def zone_count(level: int) -> int:
    """Number of zones at a refinement level: 10·4^level + 2.

    >>> zone_count(0), zone_count(3)
    (12, 642)
    """
    return int(10 * 4 ** check_level(level) + 2)


def zone_area(level: int) -> float:
    """Area of a hexagonal zone in m² (pentagons have 5/6 of it).

    >>> round(zone_area(10) / 1e6, 3)  # km²
    48.644
    """
    return float(EARTH_AREA / (10 * 4 ** check_level(level)))


def zone_areas(zones: Any) -> Floats:
    """Area in m² of each zone: ``zone_area(level)`` for hexagons, 5/6 of it for pentagons.

    >>> a = zone_areas(all_zones(1))
    >>> round(float(a.sum()) / 1e12, 3)  # the WGS84 ellipsoid's area, million km²
    510.066
    """
    ids = _ids.as_zones(zones)
    level = _ids.decode(ids)[0]
    full = EARTH_AREA / (10.0 * np.power(4.0, level))
    areas: Floats = np.where(is_pentagon(ids), full * PENTAGON_SHARE, full)
    return areas


@overload
def point_to_zone(lat: One, lon: One, level: int) -> np.uint64: ...
@overload
def point_to_zone(lat: Many, lon: Many | One, level: int) -> Ids: ...
@overload
def point_to_zone(lat: Any, lon: Any, level: int) -> Any: ...  # checked when run
def point_to_zone(lat: Any, lon: Any, level: int) -> Ids | np.uint64:
    """Zone ids (uint64) of WGS84 geodetic points, in degrees, at a level.

    Longitudes wrap, so 190 is -170.

    >>> int(point_to_zone(52.52, 13.405, 9))
    5251621
    >>> zone_to_text(point_to_zone([52.52, -33.9], [13.405, 151.2], 9)).tolist()
    ['9c-17-37', '9a-829-376']
    """
    level = check_level(level)
    if _one.is_number(lat) and _one.is_number(lon):  # one point: no arrays at all
        return np.uint64(_one.point_to_id(*scalar_lat_lon(float(lat), float(lon), True), level))
    la, lo = check_lat_lon(lat, lon, wrap=True)
    shape = la.shape
    la, lo = la.reshape(-1), lo.reshape(-1)
    if 0 < la.size <= _one.SMALL:  # a handful of points: one by one in plain floats
        ids = [_one.point_to_id(a, b, level) for a, b in zip(la.tolist(), lo.tolist(), strict=True)]
        return np.array(ids, dtype=np.uint64).reshape(shape)
    out = np.empty(la.shape, dtype=np.uint64)
    for s in range(0, la.size, _lattice.BLOCK):  # blocks that stay in cache
        block = slice(s, s + _lattice.BLOCK)
        out[block] = _lattice.xyz_to_ids(geodetic_to_xyz(la[block], lo[block]), level)
    return out.reshape(shape) if shape else out[0]


def zone_to_point(zones: Any) -> tuple[Any, Any]:
    """(lat, lon) in degrees, WGS84 geodetic, of zone centres.

    >>> lat, lon = zone_to_point(zone_from_text("0n"))
    >>> round(float(lat), 6), float(lon)  # the northern apex: an icosahedron vertex
    (58.397145, 11.25)
    """
    few = _one.zone_ints(zones)
    if few is not None and not isinstance(zones, np.ndarray):  # one zone: plain floats
        lat1, lon1 = _one.id_to_point(few[0])
        return np.float64(lat1), np.float64(lon1)
    if few is not None:  # a handful: one by one in plain floats
        lat, lon = (
            np.array(c, dtype=np.float64) for c in zip(*map(_one.id_to_point, few), strict=True)
        )
        return lat, lon
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


@overload
def zone_level(zones: OneId) -> np.int64: ...
@overload
def zone_level(zones: Many) -> Ints: ...
def zone_level(zones: Any) -> Ints | np.int64:
    """Refinement level of each zone.

    >>> zone_level(point_to_zone(0.0, 0.0, 7)).item()
    7
    """
    fields = _fields(zones)
    level: Ints | np.int64 = fields[0] if fields else _ids.decode(_ids.as_zones(zones))[0]
    return level


@overload
def is_pentagon(zones: OneId) -> np.bool_: ...
@overload
def is_pentagon(zones: Many) -> Bools: ...
def is_pentagon(zones: Any) -> Bools | np.bool_:
    """Whether each zone is one of the twelve pentagons (icosahedron vertices) of its level.

    >>> int(is_pentagon(all_zones(4)).sum())
    12
    """
    few = _one.zone_ints(zones)
    if few is not None:
        flags: Bools = np.array([_one.is_pentagon(z) for z in few])
        return flags if isinstance(zones, np.ndarray) else flags[0]
    level, _strip, a, b = _lattice.ids_to_chart(_ids.as_zones(zones))
    n = np.left_shift(1, level)
    vertex: Bools = (a % n == 0) & (b % n == 0)
    return vertex


def zone_boundary(zone: Any, *, corners_only: bool = False, face_edges: bool = True) -> Floats:
    """The outline of a zone: (lat, lon) points, counter-clockwise seen from outside the Earth.

    By default the true outline. A zone is straight-edged in the plane of each face of the
    projection, so on the globe its edges bend where they cross a face edge or one of the
    lines from a face's centre to its vertices, and at coarse levels they sag away from the
    geodesics between their corners. The outline holds the corners, those bends and, where
    needed, points along the edges, every one on the zone's true edge, so that the
    geodesics between neighbouring points stay within 0.25 m (or 2e-5 of the lattice
    spacing, if smaller) of it: geodesic areas match :func:`zone_areas` to 3e-5 at every
    level, and the outline holds every point that :func:`point_to_zone` puts in the
    zone, but for points closer than that to its edge. With ``corners_only`` just the 6
    corners (5 for pentagons); their geodesic polygon can miss the zone's area by a few
    per cent (pentagons, zones around a face's centre) and its edges by kilometres at
    coarse levels.

    One zone gives an (m, 2) array. An array of N zones gives (N, M, 2), padded with NaN
    to the longest outline (M = 6 with ``corners_only``). ``face_edges=False`` is the old
    spelling of ``corners_only=True``.

    >>> zone_boundary(zone_from_text("12b-20-7")).shape
    (6, 2)
    >>> zone_boundary(zone_from_text("5n"), corners_only=True).shape
    (5, 2)
    >>> zone_boundary(zone_from_text("12n")).shape  # its corners, bent where edges cross faces
    (10, 2)
    """
    ids = _ids.as_zones(zone, "zone")
    flat = ids.reshape(-1)
    if corners_only or not face_edges:
        xyz = _outline.corners(flat)
    else:
        xyz = _outline.padded(*_outline.outlines(flat))
    beta, lon = xyz_to_lonlat(xyz)
    out: Floats = np.stack([authalic_to_geodetic(beta), lon], axis=-1)
    if ids.ndim == 0:
        out = out[0]
        return out[~np.isnan(out[:, 0])]
    return out.reshape(ids.shape + out.shape[1:])


@overload
def zone_to_geojson(zones: OneId) -> dict[str, Any]: ...
@overload
def zone_to_geojson(zones: Many) -> list[dict[str, Any]]: ...
def zone_to_geojson(zones: Any) -> dict[str, Any] | list[dict[str, Any]]:
    """The true outline of zones as GeoJSON geometries (RFC 7946), for maps and files.

    Rings are closed, in (longitude, latitude), exterior rings counter-clockwise. A zone
    crossing the antimeridian is cut there into a MultiPolygon (RFC 7946 §3.1.9); a zone
    holding a pole is one Polygon drawn up to the pole along ±180°. One zone gives a
    geometry, an array of zones a list of them (in the order of ``zones.ravel()``).

    >>> g = zone_to_geojson(point_to_zone(10.0, 20.0, 9))
    >>> g["type"], g["coordinates"][0][0] == g["coordinates"][0][-1]
    ('Polygon', True)
    >>> zone_to_geojson(point_to_zone([0.0], [180.0], 4))[0]["type"]
    'MultiPolygon'
    """
    ids = _ids.as_zones(zones, "zones")
    out = _geojson.geometries(ids.reshape(-1))
    return out[0] if ids.ndim == 0 else out


def zone_neighbors(zone: Any) -> Ids:
    """The 6 (or 5 for pentagons) adjacent zones, counter-clockwise.

    An array of N zones gives (N, 6), with 0 in the last column of pentagons.

    >>> len(zone_neighbors(zone_from_text("6c-40-21"))), len(zone_neighbors(zone_from_text("6s")))
    (6, 5)
    """
    ids = _ids.as_zones(zone, "zone")
    out: Ids = _lattice.neighbors(ids.reshape(-1))
    if ids.ndim == 0:
        first: Ids = out[0]
        present: Ids = first[first != 0]
        return present
    return out.reshape((*ids.shape, 6))


def zone_disk(zone: Any, k: int, *, return_steps: bool = False) -> Ids | tuple[Ids, Ints]:
    """Every zone within k steps of a zone (itself included), ids ascending.

    With ``return_steps`` also each zone's step count from the centre zone.

    >>> len(zone_disk(point_to_zone(10.0, 20.0, 12), 3))  # 3k(k+1) + 1
    37
    """
    ids, steps_ = _disk(_one_zone(zone), steps(k))
    return (ids, steps_) if return_steps else ids


def zone_ring(zone: Any, k: int) -> Ids:
    """The zones exactly k steps from a zone, ids ascending.

    >>> len(zone_ring(point_to_zone(10.0, 20.0, 12), 3))  # 6k
    18
    """
    ids, steps_ = _disk(_one_zone(zone), steps(k))
    ring: Ids = ids[steps_ == k]
    return ring


def zone_parent(zones: Any) -> Ids:
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
        raise _ids.refuse("zones", ids, level == 0, "zones of level >= 1")
    return _hierarchy.parents(ids)


def zone_children(zone: Any) -> tuple[Ids, Floats]:
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
        raise _ids.refuse("zone", ids, level >= MAX_LEVEL, f"zones of level < {MAX_LEVEL}")
    kids, weights = _hierarchy.children(ids.reshape(-1))
    if ids.ndim == 0:
        keep = kids[0] != 0
        return kids[0][keep], weights[0][keep]
    return kids.reshape((*ids.shape, 7)), weights.reshape((*ids.shape, 7))


def all_zones(level: int) -> Ids:
    """Every zone of a level (levels up to 10), ids ascending.

    >>> len(all_zones(2))
    162
    """
    level = check_level(level)
    if level > _ALL_ZONES_MAX:
        raise GridError("level", level, f"[0, {_ALL_ZONES_MAX}] for all_zones")
    return _regions.every_zone(level)


@overload
def zone_to_text(zones: OneId) -> np.str_: ...
@overload
def zone_to_text(zones: Many) -> npt.NDArray[np.object_]: ...
def zone_to_text(zones: Any) -> npt.NDArray[np.object_] | np.str_:
    """The readable text form: level, strip letter, row and column (``"12b-3021-877"``).

    The two apexes are ``"<level>n"`` and ``"<level>s"``.

    >>> str(zone_to_text(index_to_zone(12, 1, 3021, 877)))
    '12b-3021-877'
    """
    if not isinstance(zones, np.ndarray):
        one = _one.zone_ints(zones)
        if one is not None:
            return np.str_(_ids.text_of(*_ids.decode_int(one[0])))  # type: ignore[misc]
    fields = _fields(zones)
    if fields is None:
        return _ids.to_text(_ids.as_zones(zones))
    return np.array(
        [_ids.text_of(*f) for f in zip(*(f.tolist() for f in fields), strict=True)], dtype=object
    )


def zone_from_text(texts: Any) -> Ids:
    """Zone ids of text forms; the inverse of :func:`zone_to_text`.

    >>> int(zone_from_text("0n"))
    26
    """
    return _ids.from_text(texts)


def zone_to_index(zones: Any) -> tuple[Any, Any, Any, Any]:
    """(level, region, i, j): the array position of zones in the five-strip layout.

    Regions 0..4 are strips (i in [0, 2n), j in [0, n), n = 2**level); 5 and 6 are the
    northern and southern apex, with i = j = 0.

    >>> [int(x) for x in zone_to_index(zone_from_text("12b-3021-877"))]
    [12, 1, 3021, 877]
    """
    fields = _fields(zones)
    return fields if fields is not None else _ids.decode(_ids.as_zones(zones))


def zone_fields(zone: Any) -> tuple[int, int, int, int] | None:
    """(level, region, i, j) as Python ints of one valid zone id, given as an int, a numpy
    integer or a one-element integer array; None for anything else (a bad id, many zones),
    which :func:`zone_to_index` then checks and answers. The cheap path for a point query.

    >>> zone_fields(zone_from_text("12b-3021-877")), zone_fields(7), zone_fields([26, 26])
    ((12, 1, 3021, 877), None, None)
    """
    if isinstance(zone, np.ndarray):
        if zone.size != 1 or zone.dtype.kind not in "ui":
            return None
        zone = zone.reshape(-1)[0]
    if isinstance(zone, bool | np.bool_) or not isinstance(zone, int | np.integer):
        return None
    return _ids.decode_int(int(zone))


def index_to_zone(level: Any, region: Any, i: Any, j: Any) -> Ids:
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
            raise GridError(name, _ids.scalar(arr), "integers")
    n = np.left_shift(1, lv.astype(np.int64))
    apex = r >= _ids.NORTH
    checks = (
        ("region", (r < 0) | (r > _ids.SOUTH), "0..6"),
        ("i", np.where(apex, ii != 0, (ii < 0) | (ii >= 2 * n)), "[0, 2^(level+1)), 0 for apexes"),
        ("j", np.where(apex, jj != 0, (jj < 0) | (jj >= n)), "[0, 2^level), 0 for apexes"),
    )
    for name, bad, allowed in checks:
        if bad.any():
            raise _ids.refuse(name, {"region": r, "i": ii, "j": jj}[name], bad, allowed)
    return _ids.encode(lv, r, ii, jj)
