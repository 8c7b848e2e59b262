"""Request geometries: GeoJSON polygons and bounding boxes, checked and normalised.

A polygon arrives as a GeoJSON Polygon, MultiPolygon or a Feature holding one (RFC 7946).
Each ring is read with its edges taken the short way round, so a ring that steps from
170° to -170° crosses the antimeridian; such a polygon is cut there into parts whose
longitudes lie in [-180, 180], as RFC 7946 §3.1.9 asks of producers. A ring that winds
once around a pole is closed over it (eastward: the north pole), as the grid reads it.
Holes are kept. An invalid polygon (self-intersecting, overlapping parts, ...) is refused
with the reason.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np
import orjson
import shapely
from shapely.geometry import MultiPolygon, Polygon, box, mapping

from alveary._errors import InvalidInput, LimitExceeded

__all__ = ["Area", "bbox_area", "parse_bbox", "parse_polygon"]

# Authalic sphere radius (WGS84 surface area), common practice for equal-area estimates.
_R_AUTHALIC = 6_371_007.1809
_GEOMETRY_ALLOWED = "a GeoJSON Polygon or MultiPolygon, or a Feature whose geometry is one"


@dataclass(frozen=True)
class Area:
    """A request area: GeoJSON geometry with longitudes in [-180, 180], and its key.

    ``geometry`` is a GeoJSON dict (Polygon or MultiPolygon) ready for the grid;
    ``shape`` the same as a shapely geometry; ``area_m2`` an estimate of its area on the
    authalic sphere (used to refuse oversized requests before enumerating zones);
    ``vertices`` the number of distinct positions in the request; ``key`` a canonical
    text form for cache keys.
    """

    geometry: dict[str, Any]
    shape: Polygon | MultiPolygon
    area_m2: float
    vertices: int
    key: str


def parse_bbox(text: str) -> tuple[float, float, float, float]:
    """Parse ``bbox=west,south,east,north`` (degrees; west > east crosses the antimeridian).

    Examples
    --------
    >>> parse_bbox("10,40,12.5,41")
    (10.0, 40.0, 12.5, 41.0)
    >>> parse_bbox("170,-10,-170,10")
    (170.0, -10.0, -170.0, 10.0)
    >>> parse_bbox("0,50,1,40")
    Traceback (most recent call last):
    ...
    alveary._errors.InvalidInput: bbox is '0,50,1,40'; allowed: south <= north
    """
    parts = text.split(",")
    allowed = "west,south,east,north in degrees, longitudes in [-180, 180], latitudes in [-90, 90]"
    if len(parts) != 4:
        raise InvalidInput("bbox", text, allowed)
    try:
        west, south, east, north = (float(p) for p in parts)
    except ValueError:
        raise InvalidInput("bbox", text, allowed) from None
    values = np.array([west, south, east, north])
    if not np.all(np.isfinite(values)):
        raise InvalidInput("bbox", text, allowed)
    if not (
        -180 <= west <= 180 and -180 <= east <= 180 and -90 <= south <= 90 and -90 <= north <= 90
    ):
        raise InvalidInput("bbox", text, allowed)
    if south > north:
        raise InvalidInput("bbox", text, "south <= north")
    return (west, south, east, north)


def bbox_area(west: float, south: float, east: float, north: float) -> float:
    """Area of a longitude-latitude box on the authalic sphere, in m² (an estimate).

    >>> round(bbox_area(-180, -90, 180, 90) / 1e12)  # the Earth: 510.07 million km²
    510
    """
    span = (east - west) % 360.0 or (360.0 if east != west else 0.0)
    band = math.sin(math.radians(north)) - math.sin(math.radians(south))
    return _R_AUTHALIC**2 * math.radians(span) * band


def _ring(raw: Any, where: str) -> np.ndarray:
    """A ring as an (m, 2) float array of (lon, lat), checked for shape and range."""
    if not isinstance(raw, list) or len(raw) < 4:
        raise InvalidInput(where, _short(raw), "a closed ring of at least 4 positions")
    try:
        arr = np.array([[float(p[0]), float(p[1])] for p in raw], dtype=float)
    except (TypeError, ValueError, IndexError, KeyError):
        raise InvalidInput(where, _short(raw), "positions [longitude, latitude]") from None
    if not np.all(np.isfinite(arr)):
        raise InvalidInput(where, _short(raw), "finite coordinates")
    bad = np.nonzero((np.abs(arr[:, 1]) > 90) | (np.abs(arr[:, 0]) > 180))[0]
    if bad.size:
        i = int(bad[0])
        raise InvalidInput(
            where,
            arr[i].tolist(),
            "longitude in [-180, 180], latitude in [-90, 90]",
            index=i,
        )
    if not np.array_equal(arr[0], arr[-1]):
        raise InvalidInput(where, _short(raw), "a closed ring (first position == last)")
    return arr


def _short(value: Any) -> str:
    text = orjson.dumps(value, default=str).decode()
    return text if len(text) <= 80 else text[:77] + "..."


def _unwrap(ring: np.ndarray, reference: float | None) -> np.ndarray:
    """Make longitudes continuous (edges the short way round), near ``reference``."""
    lon = ring[:, 0].copy()
    step = np.diff(lon)
    step = (step + 180.0) % 360.0 - 180.0
    lon = np.concatenate([[lon[0]], lon[0] + np.cumsum(step)])
    if reference is not None:
        lon += 360.0 * round((reference - lon.mean()) / 360.0)
    return np.column_stack([lon, ring[:, 1]])


def _polygon(rings_raw: Any, where: str) -> Polygon:
    if not isinstance(rings_raw, list) or not rings_raw:
        raise InvalidInput(where, _short(rings_raw), "a list of linear rings")
    rings = []
    reference = None
    for r, raw in enumerate(rings_raw):
        name = f"{where}[{r}]"
        ring = _unwrap(_ring(raw, name), reference)
        turn = ring[-1, 0] - ring[0, 0]
        if abs(turn) > 1e-9:  # winds once around a pole: close it over that pole
            pole = 90.0 if turn > 0 else -90.0
            ring = np.vstack([ring, [[ring[-1, 0], pole], [ring[0, 0], pole], ring[:1]]])
        if reference is None:
            reference = float(ring[:, 0].mean())
        rings.append(ring)
    poly = Polygon(rings[0], rings[1:])
    if not poly.is_valid:
        raise InvalidInput(
            where, shapely.is_valid_reason(poly), "a valid polygon (OGC simple features)"
        )
    return poly


def _wrap(shape: Polygon | MultiPolygon) -> Polygon | MultiPolygon:
    """Cut a geometry with unwrapped longitudes at ±180° and bring every part into range."""
    west, _, east, _ = shape.bounds
    if west >= -180 and east <= 180:
        return shape
    parts = []
    for shift in range(-720, 721, 360):
        piece = shape.intersection(box(-180 - shift, -90, 180 - shift, 90))
        if piece.is_empty:
            continue
        piece = shapely.transform(piece, lambda xy, s=shift: xy + np.array([s, 0.0]))
        parts.extend(getattr(piece, "geoms", [piece]))
    polys = [p for p in parts if isinstance(p, Polygon) and p.area > 0]
    return polys[0] if len(polys) == 1 else MultiPolygon(polys)


def parse_polygon(body: Any, max_vertices: int) -> Area:
    """Check and normalise a GeoJSON polygon request body.

    Parameters
    ----------
    body:
        A decoded JSON value: Polygon, MultiPolygon or a Feature of one.
    max_vertices:
        The configured limit on the number of positions.

    Raises
    ------
    InvalidInput
        Malformed GeoJSON, coordinates out of range, an unclosed ring, an invalid polygon.
    LimitExceeded
        More positions than ``max_vertices``.

    Examples
    --------
    >>> sq = {"type": "Polygon", "coordinates": [[[0, 0], [1, 0], [1, 1], [0, 1], [0, 0]]]}
    >>> area = parse_polygon(sq, 100)
    >>> area.geometry["type"], area.vertices, round(area.area_m2 / 1e9)
    ('Polygon', 4, 12)
    >>> cross = {"type": "Polygon", "coordinates": [[[170, 0], [-170, 0], [-170, 5], [170, 5], [170, 0]]]}
    >>> parse_polygon(cross, 100).geometry["type"]
    'MultiPolygon'
    >>> bow = {"type": "Polygon", "coordinates": [[[0, 0], [1, 1], [1, 0], [0, 1], [0, 0]]]}
    >>> parse_polygon(bow, 100)
    Traceback (most recent call last):
    ...
    alveary._errors.InvalidInput: geometry is 'Self-intersection[0.5 0.5]'; allowed: a valid polygon (OGC simple features)
    """  # noqa: E501
    if not isinstance(body, dict):
        raise InvalidInput("geometry", _short(body), _GEOMETRY_ALLOWED)
    geometry = body
    if body.get("type") == "Feature":
        geometry = body.get("geometry")
        if not isinstance(geometry, dict):
            raise InvalidInput("geometry", _short(geometry), _GEOMETRY_ALLOWED)
    kind = geometry.get("type")
    coords = geometry.get("coordinates")
    if kind not in ("Polygon", "MultiPolygon") or not isinstance(coords, list):
        raise InvalidInput("geometry", _short(kind), _GEOMETRY_ALLOWED)
    polygons = [coords] if kind == "Polygon" else coords
    vertices = 0
    for p in polygons:
        if not isinstance(p, list):
            raise InvalidInput("geometry", _short(p), "a list of linear rings")
        for ring in p:
            vertices += max(len(ring) - 1, 0) if isinstance(ring, list) else 0
    if vertices > max_vertices:
        raise LimitExceeded("polygon vertices", vertices, max_vertices)
    if not polygons:
        raise InvalidInput("geometry", "[]", "at least one polygon")
    shapes = [
        _polygon(p, "geometry" if kind == "Polygon" else f"geometry[{i}]")
        for i, p in enumerate(polygons)
    ]
    shape = shapes[0] if len(shapes) == 1 else MultiPolygon(shapes)
    if not shape.is_valid:
        raise InvalidInput("geometry", shapely.is_valid_reason(shape), "parts that do not overlap")
    shape = shapely.normalize(_wrap(shape))
    normal = mapping(shape)
    normal = orjson.loads(orjson.dumps(normal))  # tuples -> lists, plain floats
    area = _spherical_area(shape)
    key = orjson.dumps(normal).decode()
    return Area(normal, shape, area, vertices, key)


def _spherical_area(shape: Polygon | MultiPolygon) -> float:
    """Area estimate on the authalic sphere: each part's planar area in (lon, sin lat)."""
    projected = shapely.transform(
        shape, lambda xy: np.column_stack([np.radians(xy[:, 0]), np.sin(np.radians(xy[:, 1]))])
    )
    return float(projected.area) * _R_AUTHALIC**2
