"""GeoJSON Polygon / MultiPolygon -> a valid shapely geometry in [-180, 180] x [-90, 90].

Rings are read as RFC 7946 says: positions are (longitude, latitude), edges are straight in
longitude/latitude, and a ring may cross the antimeridian either by being cut in two
(§3.1.9, a MultiPolygon) or by an edge whose longitudes jump by more than 180°, which is
read as the short way across ±180. A ring that winds once around a pole (its unwrapped
longitudes gain or lose 360°) is closed over that pole: eastward-winding rings enclose the
north pole, westward ones the south pole.
"""

from __future__ import annotations

import math

import numpy as np
import shapely
from shapely.validation import explain_validity

from alveary._errors import GridError

_PARAM = "geometry"


def _fail(detail: str, value=None) -> GridError:
    return GridError(_PARAM, value, message=f"geometry: {detail}")


def _ring(coords, where: str) -> np.ndarray:
    if not isinstance(coords, (list, tuple)) or len(coords) < 4:
        raise _fail(f"{where} must be a list of at least 4 positions")
    try:
        arr = np.array([[float(p[0]), float(p[1])] for p in coords], dtype=np.float64)
    except (TypeError, ValueError, IndexError):
        raise _fail(f"{where} holds a position that is not [longitude, latitude]") from None
    if not np.isfinite(arr).all():
        raise _fail(f"{where} holds a coordinate that is not finite")
    bad = np.abs(arr[:, 1]) > 90.0
    if bad.any():
        k = int(np.argmax(bad))
        raise _fail(f"{where} position {k} has latitude {arr[k, 1]}; allowed: [-90, 90]")
    if not np.array_equal(arr[0], arr[-1]):
        raise _fail(f"{where} is not closed (RFC 7946: first and last positions equal)")
    return arr


def _unwrap(ring: np.ndarray) -> np.ndarray:
    lon = ring[:, 0].copy()
    if abs(lon[0]) > 180.0:
        lon[0] = (lon[0] + 180.0) % 360.0 - 180.0
    d = np.diff(ring[:, 0])
    # A step of more than 180° (but not a full 360°, which is an edge along a pole or a
    # side of a world-wide rectangle) crosses the antimeridian the short way.
    jump = (np.abs(d) > 180.0) & (np.abs(d) < 360.0)
    d = np.where(jump, (d + 180.0) % 360.0 - 180.0, d)
    lon[1:] = lon[0] + np.cumsum(d)
    out = np.stack([lon, ring[:, 1]], axis=1)
    turn = out[-1, 0] - out[0, 0]
    if abs(turn) > 1e-9:  # winds around a pole: close the ring over it
        pole = 90.0 if turn > 0 else -90.0
        cap = np.array([[out[-1, 0], pole], [out[0, 0], pole], out[0]])
        out = np.vstack([out, cap])
    return out


def _polygon(rings, where: str) -> shapely.Polygon:
    if not isinstance(rings, (list, tuple)) or not rings:
        raise _fail(f"{where} must be a non-empty list of rings")
    shell = _unwrap(_ring(rings[0], f"{where} exterior ring"))
    centre = shell[:, 0].mean()
    holes = []
    for k, hole in enumerate(rings[1:], start=1):
        h = _unwrap(_ring(hole, f"{where} ring {k}"))
        h[:, 0] += 360.0 * round((centre - h[:, 0].mean()) / 360.0)
        holes.append(h)
    poly = shapely.Polygon(shell, holes)
    if not poly.is_valid:
        raise _fail(f"{where} is not a valid polygon ({explain_validity(poly)})")
    return poly


def parse(geometry) -> shapely.Geometry:
    """Validate a GeoJSON geometry dict and return it folded into [-180, 180]."""
    if not isinstance(geometry, dict):
        raise _fail("must be a GeoJSON Polygon or MultiPolygon object", type(geometry).__name__)
    kind = geometry.get("type")
    coords = geometry.get("coordinates")
    if kind == "Polygon":
        parts = [_polygon(coords, "Polygon")]
    elif kind == "MultiPolygon":
        if not isinstance(coords, (list, tuple)) or not coords:
            raise _fail("MultiPolygon coordinates must be a non-empty list of polygons")
        parts = [_polygon(p, f"MultiPolygon polygon {k}") for k, p in enumerate(coords)]
    else:
        raise _fail("type must be 'Polygon' or 'MultiPolygon'", kind)
    world = shapely.box(-180.0, -90.0, 180.0, 90.0)
    pieces = []
    for part in parts:
        x0, _, x1, _ = part.bounds
        for shift in range(math.floor((x0 + 180.0) / 360.0), math.floor((x1 + 180.0) / 360.0) + 1):
            moved = shapely.affinity.translate(part, -360.0 * shift)
            piece = shapely.intersection(moved, world)
            if not piece.is_empty:
                pieces.append(piece)
    merged = shapely.union_all(pieces) if pieces else shapely.Polygon()
    return shapely.make_valid(merged) if not merged.is_valid else merged


def vertex_count(geometry) -> int:
    """Number of positions in a GeoJSON Polygon/MultiPolygon (for request limits)."""
    coords = geometry.get("coordinates") if isinstance(geometry, dict) else None
    if geometry.get("type") == "Polygon":
        return sum(len(r) for r in coords or [])
    return sum(len(r) for p in coords or [] for r in p)
