"""Reading GeoJSON polygons (RFC 7946) into a :class:`Footprint`, and area estimates.

This is the one place where a request polygon is read. Positions are (longitude,
latitude) in degrees, longitudes in [-180, 180], latitudes in [-90, 90], and edges are
straight in longitude/latitude (RFC 7946 §3.1.1). A ring may cross the antimeridian in
two ways: already cut in two at ±180 (§3.1.9, a MultiPolygon), or by an edge whose
longitudes jump by more than 180°, which is read as the short way across. An edge of
exactly 360° (from -180 to 180 or back) runs once round its parallel, the way a
whole-world rectangle is written. A ring whose unwrapped longitudes gain or lose 360° winds
round a pole and is closed over it: eastward-winding rings enclose the north pole,
westward ones the south pole. Holes are kept. The result is cut at ±180 into parts whose
longitudes lie in [-180, 180].
"""

from __future__ import annotations

import json
import math
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np
import numpy.typing as npt
import shapely
from shapely.geometry import mapping

from alveary._errors import GridError, LimitExceeded
from alveary.grid._authalic import R_AUTHALIC, geodetic_to_authalic

_PARAM = "geometry"
_KINDS = "a GeoJSON Polygon or MultiPolygon, or a Feature whose geometry is one"
_POSITION = "[longitude, latitude], longitude in [-180, 180], latitude in [-90, 90]"
_WORLD = shapely.box(-180.0, -90.0, 180.0, 90.0)

Where = tuple[int, ...]
Float64s = npt.NDArray[np.float64]


@dataclass(frozen=True)
class Footprint:
    """A polygon read from GeoJSON, ready for the grid and for request limits.

    Attributes
    ----------
    geometry:
        The normalised GeoJSON (Polygon or MultiPolygon): longitudes in [-180, 180], cut
        at the antimeridian, exterior rings counter-clockwise and holes clockwise
        (RFC 7946 §3.1.6), parts and rings in a canonical order.
    shape:
        The same as a shapely geometry (longitude, latitude).
    area_m2:
        An estimate of its area on the authalic sphere, m² (exact for longitude/latitude
        boxes; for refusing oversized requests before counting zones).
    vertices:
        The number of positions in the request (a ring's closing position not counted).
    key:
        A canonical text form of ``geometry``, for cache keys and ETags.

    Examples
    --------
    >>> cut = {"type": "MultiPolygon", "coordinates": [
    ...     [[[170, 0], [180, 0], [180, 5], [170, 5], [170, 0]]],
    ...     [[[-180, 0], [-170, 0], [-170, 5], [-180, 5], [-180, 0]]]]}
    >>> jump = {"type": "Polygon", "coordinates": [[[170, 0], [-170, 0], [-170, 5], [170, 5], [170, 0]]]}
    >>> read_polygon(cut).key == read_polygon(jump).key  # one box, written two ways
    True
    """  # noqa: E501

    geometry: dict[str, Any]
    shape: shapely.Polygon | shapely.MultiPolygon
    area_m2: float
    vertices: int
    key: str


def _short(value: Any) -> str:
    text = json.dumps(value, default=str)
    return text if len(text) <= 80 else text[:77] + "..."


def _fail(value: Any, allowed: str, where: Where | None = None) -> GridError:
    index = None if not where else (where[0] if len(where) == 1 else where)
    return GridError(_PARAM, value, allowed, index=index)


def _geometry_of(body: Any) -> tuple[str, list[Any]]:
    """(type, list of polygons' coordinates) of a Polygon, MultiPolygon or Feature."""
    if isinstance(body, Mapping) and body.get("type") == "Feature":
        body = body.get("geometry")
    if not isinstance(body, Mapping):
        raise _fail(_short(body), _KINDS)
    kind, coords = body.get("type"), body.get("coordinates")
    if kind not in ("Polygon", "MultiPolygon"):
        raise _fail(_short(kind), _KINDS)
    if not isinstance(coords, list) or not coords:
        raise _fail(_short(coords), f"{kind} coordinates: a non-empty list")
    polygons = [coords] if kind == "Polygon" else coords
    for k, rings in enumerate(polygons):
        if not isinstance(rings, list) or not rings or not isinstance(rings[0], list):
            raise _fail(_short(rings), "a polygon: a non-empty list of linear rings", (k,))
    return kind, polygons


def _count(polygons: list[Any]) -> int:
    return sum(max(len(r) - 1, 0) for rings in polygons for r in rings if isinstance(r, list))


def _ring(raw: Any, where: Where) -> Float64s:
    """A ring as an (m, 2) array of (lon, lat), checked for shape, range and closure."""
    if not isinstance(raw, list) or len(raw) < 4:
        raise _fail(_short(raw), "a closed ring of at least 4 positions", where)
    try:
        arr = np.array([[float(p[0]), float(p[1])] for p in raw], dtype=np.float64)
    except (TypeError, ValueError, IndexError, KeyError):
        raise _fail(_short(raw), f"positions {_POSITION}", where) from None
    bad = ~np.isfinite(arr).all(axis=1) | (np.abs(arr[:, 0]) > 180.0) | (np.abs(arr[:, 1]) > 90.0)
    if bad.any():
        k = int(np.argmax(bad))
        raise _fail(arr[k].tolist(), _POSITION, (*where, k))
    if not np.array_equal(arr[0], arr[-1]):
        raise _fail(_short(raw), "a closed ring (RFC 7946: first and last positions equal)", where)
    return arr


def _unwrap(ring: Float64s) -> Float64s:
    """Continuous longitudes (jumps over 180° the short way); close rings round a pole."""
    step = np.diff(ring[:, 0])
    # An edge of exactly 360° runs once round its parallel; other jumps go the short way.
    jump = (np.abs(step) > 180.0) & (np.abs(step) < 360.0)
    step = np.where(jump, (step + 180.0) % 360.0 - 180.0, step)
    lon = ring[0, 0] + np.concatenate([[0.0], np.cumsum(step)])
    # each position moved by whole turns only, so that sums leave no rounding behind
    lon = ring[:, 0] + 360.0 * np.round((lon - ring[:, 0]) / 360.0)
    out = np.stack([lon, ring[:, 1]], axis=1)
    turn = out[-1, 0] - out[0, 0]
    if turn:  # winds round a pole: close the ring over it
        pole = 90.0 if turn > 0 else -90.0
        out = np.vstack([out, [[out[-1, 0], pole], [out[0, 0], pole], out[0]]])
    return out


def _polygon(rings: list[Any], where: Where) -> shapely.Polygon:
    shell = _unwrap(_ring(rings[0], (*where, 0)))
    centre = float(shell[:, 0].mean())
    holes = []
    for k, raw in enumerate(rings[1:], start=1):
        hole = _unwrap(_ring(raw, (*where, k)))
        hole[:, 0] += 360.0 * round((centre - float(hole[:, 0].mean())) / 360.0)
        holes.append(hole)
    poly = shapely.Polygon(shell, holes)
    if not poly.is_valid:
        raise _fail(shapely.is_valid_reason(poly), "a valid polygon (OGC simple features)", where)
    return poly


def fold(poly: shapely.Polygon) -> list[shapely.Polygon]:
    """Cut a polygon with unwrapped longitudes at ±180 and move every piece into range."""
    west, _, east, _ = poly.bounds
    pieces: list[shapely.Polygon] = []
    for k in range(math.floor((west + 180.0) / 360.0), math.floor((east + 180.0) / 360.0) + 1):
        moved = shapely.affinity.translate(poly, -360.0 * k) if k else poly
        piece = shapely.intersection(moved, _WORLD)
        pieces.extend(g for g in shapely.get_parts(piece) if isinstance(g, shapely.Polygon))
    merged = shapely.union_all(pieces)  # pieces of a ring round a pole meet along a meridian
    return [g for g in shapely.get_parts(merged) if isinstance(g, shapely.Polygon) and g.area > 0]


def plain(obj: Any) -> Any:
    """GeoJSON from shapely's mapping with lists instead of tuples."""
    if isinstance(obj, dict):
        return {k: plain(v) for k, v in obj.items()}
    if isinstance(obj, list | tuple):
        return [plain(v) for v in obj]
    return obj


def lonlat_area(shape: shapely.Geometry) -> float:
    """Area (m²) of a lon/lat geometry on the authalic sphere, edges straight in lon/lat
    taken as straight in (longitude, sine of the authalic latitude): exact for boxes."""

    def equal_area(xy: Float64s) -> Float64s:
        beta = np.radians(geodetic_to_authalic(xy[:, 1]))
        return np.column_stack([np.radians(xy[:, 0]), np.sin(beta)])

    return float(shapely.area(shapely.transform(shape, equal_area))) * R_AUTHALIC**2


def read_polygon(geometry: Any, *, max_vertices: int | None = None) -> Footprint:
    """Read, check and normalise a GeoJSON Polygon, MultiPolygon or a Feature holding one.

    Parameters
    ----------
    geometry:
        A decoded GeoJSON object (RFC 7946), or a :class:`Footprint` (returned as is).
    max_vertices:
        Refuse more positions than this before reading them (request limits).

    Raises
    ------
    GridError
        Not a polygon; a ring that is too short, not closed, or has a position out of
        range (the error names ``geometry``, the position as (polygon, ring, position) or
        (ring, position), and the allowed range); a self-intersecting polygon or parts
        that overlap (with the reason).
    LimitExceeded
        More positions than ``max_vertices``.

    Examples
    --------
    >>> sq = {"type": "Polygon", "coordinates": [[[0, 0], [1, 0], [1, 1], [0, 1], [0, 0]]]}
    >>> fp = read_polygon(sq)
    >>> fp.geometry["type"], fp.vertices, round(fp.area_m2 / 1e9, 2)  # 1° x 1° on the equator
    ('Polygon', 4, 12.31)
    >>> jump = {"type": "Polygon", "coordinates": [[[170, 0], [-170, 0], [-170, 5], [170, 5], [170, 0]]]}
    >>> read_polygon(jump).geometry["type"]  # cut at the antimeridian
    'MultiPolygon'
    >>> read_polygon({"type": "Polygon", "coordinates": [[[0, 0], [1, 0], [1, 95], [0, 0]]]})
    Traceback (most recent call last):
    ...
    alveary._errors.GridError: geometry at position (0, 2) is [1.0, 95.0]; allowed: [longitude, latitude], longitude in [-180, 180], latitude in [-90, 90]
    """  # noqa: E501
    if isinstance(geometry, Footprint):
        return geometry
    kind, polygons = _geometry_of(geometry)
    vertices = _count(polygons)
    if max_vertices is not None and vertices > max_vertices:
        raise LimitExceeded("polygon vertices", vertices, max_vertices)
    where: list[Where] = [()] if kind == "Polygon" else [(k,) for k in range(len(polygons))]
    parts = [
        piece
        for rings, w in zip(polygons, where, strict=True)
        for piece in fold(_polygon(rings, w))
    ]
    shape: shapely.Polygon | shapely.MultiPolygon = (
        parts[0] if len(parts) == 1 else shapely.MultiPolygon(parts)
    )
    if not shape.is_valid:
        reason = shapely.is_valid_reason(shape)
        raise _fail(reason, "parts that neither overlap nor share an edge")
    shape = shapely.orient_polygons(shapely.normalize(shape), exterior_cw=False)
    normal = plain(mapping(shape))
    key = json.dumps(normal, separators=(",", ":"))
    return Footprint(normal, shape, lonlat_area(shape), vertices, key)
