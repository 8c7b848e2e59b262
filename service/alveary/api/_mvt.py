"""Zones as Mapbox Vector Tiles (``application/vnd.mapbox-vector-tile``), for clients that
style on their side.

Each zone is one polygon feature: its true outline (``grid.zone_boundary`` with the
face-edge crossings) in Web Mercator tile coordinates, clipped to the tile plus a small
buffer, with the zone id as the feature id and as property ``zone``, its text form as
``zone_text`` and one property per variable (left out where the value is missing). The
encoding is done by the ``mapbox-vector-tile`` package.

Outlines are unwrapped across the antimeridian and placed on the copy of the world nearest
the tile; a zone around a pole is closed over the pole (Web Mercator shows it as a band
up to the tile's edge).
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

import mapbox_vector_tile  # type: ignore[import-untyped]
import numpy as np
import shapely

from alveary import grid
from alveary._errors import InvalidInput

__all__ = ["MVT_EXTENT", "MVT_MEDIA_TYPE", "zone_tile_mvt", "zone_tile_shapes"]

MVT_MEDIA_TYPE = "application/vnd.mapbox-vector-tile"
#: Tile coordinates run from 0 to this along each side.
MVT_EXTENT = 4096
_BUFFER = 64
_POLE_LAT = 89.9  # Web Mercator is infinite at the pole; anything past the tile is clipped
_MAX_STEP = 0.5  # degrees of arc between points along a zone edge


def _mercator(
    lat: np.ndarray, lon: np.ndarray, z: int, y: int, x: int, extent: int
) -> tuple[np.ndarray, np.ndarray]:
    """Tile coordinates (y down) of lat/lon in degrees; lon may run past ±180."""
    n = float(1 << z)
    phi = np.radians(np.clip(lat, -_POLE_LAT, _POLE_LAT))
    u = (lon + 180.0) / 360.0 * n - x
    v = (0.5 - np.log(np.tan(np.pi / 4 + phi / 2)) / (2 * np.pi)) * n - y
    return u * extent, v * extent


def _densify(ring: np.ndarray, max_step: float = _MAX_STEP) -> np.ndarray:
    """Points along each edge of a (lat, lon) ring, on the great circle between its ends.

    Zone edges are straight in the face plane and close to great circles on the globe;
    Web Mercator bends great circles, so long edges (coarse levels) need points between
    their corners to keep their shape.
    """
    lat, lon = np.radians(ring[:, 0]), np.radians(ring[:, 1])
    xyz = np.column_stack([np.cos(lat) * np.cos(lon), np.cos(lat) * np.sin(lon), np.sin(lat)])
    a, b = xyz, np.roll(xyz, -1, axis=0)
    angle = np.arccos(np.clip(np.einsum("ij,ij->i", a, b), -1.0, 1.0))
    pieces = np.maximum(np.ceil(angle / np.radians(max_step)).astype(np.int64), 1)
    if (pieces == 1).all():
        return ring
    out = []
    for i in range(len(ring)):
        t = np.arange(pieces[i])[:, None] / pieces[i]
        if pieces[i] == 1 or angle[i] == 0:
            out.append(a[i : i + 1])
            continue
        w0 = np.sin((1 - t) * angle[i]) / np.sin(angle[i])
        w1 = np.sin(t * angle[i]) / np.sin(angle[i])
        out.append(w0 * a[i] + w1 * b[i])
    p = np.vstack(out)
    return np.column_stack(
        [np.degrees(np.arcsin(np.clip(p[:, 2], -1, 1))), np.degrees(np.arctan2(p[:, 1], p[:, 0]))]
    )


def _rings(zones: np.ndarray, centre_lon: float) -> list[np.ndarray]:
    """(lat, lon) rings of each zone, longitudes unwrapped and brought near ``centre_lon``.

    A ring that winds around a pole is closed over it.
    """
    outlines = grid.zone_boundary(zones, face_edges=True).reshape(len(zones), -1, 2)
    # edges longer than the step (by a generous flat estimate) get points between corners
    dlat = np.roll(outlines[:, :, 0], -1, axis=1) - outlines[:, :, 0]
    dlon = (np.roll(outlines[:, :, 1], -1, axis=1) - outlines[:, :, 1] + 180.0) % 360.0 - 180.0
    arc = np.hypot(dlat, dlon * np.cos(np.radians(outlines[:, :, 0])))
    long_edges = (np.nan_to_num(arc) > 0.7 * _MAX_STEP).any(axis=1)
    long_edges |= np.nanmax(np.abs(outlines[:, :, 0]), axis=1) > 80.0
    rings = []
    for outline, dense in zip(outlines, long_edges, strict=True):
        ring = outline[~np.isnan(outline[:, 0])]
        if dense:
            ring = _densify(ring)
        lat, lon = ring[:, 0], ring[:, 1]
        step = (np.diff(lon) + 180.0) % 360.0 - 180.0
        lon = lon[0] + np.concatenate([[0.0], np.cumsum(step)])
        back = (lon[0] - lon[-1] + 180.0) % 360.0 - 180.0
        turn = lon[-1] + back - lon[0]  # 0, or ±360 for a ring around a pole
        if abs(turn) > 180.0:
            pole = math.copysign(90.0, float(lat.mean()))
            # back to the first corner one turn on, up to the pole, along it, and down
            lat = np.concatenate([lat, [lat[0], pole, pole]])
            lon = np.concatenate([lon, [lon[0] + turn, lon[0] + turn, lon[0]]])
        shift = 360.0 * round((float(lon.mean()) - centre_lon) / 360.0)
        rings.append(np.column_stack([lat, lon - shift]))
    return rings


def _polygonal(shape: Any) -> Any:
    """The polygon parts of a clipped shape (clipping can leave stray lines or points)."""
    if shape.geom_type in ("Polygon", "MultiPolygon") or shape.is_empty:
        return shape
    parts = [g for g in shapely.get_parts(shape) if g.geom_type in ("Polygon", "MultiPolygon")]
    return shapely.union_all(parts) if parts else shapely.Polygon()


def zone_tile_shapes(
    z: int, y: int, x: int, zones: np.ndarray, *, extent: int = MVT_EXTENT, buffer: int = _BUFFER
) -> list[Any]:
    """Each zone's outline clipped to the tile (plus ``buffer``), in tile coordinates.

    Shapely geometries (empty where a zone misses the tile), y pointing down.
    """
    ids = np.asarray(zones, dtype=np.uint64).reshape(-1)
    if ids.size == 0:
        return []
    n = 1 << z
    centre = (x + 0.5) / n * 360.0 - 180.0
    rings = _rings(ids, centre)
    lo, hi = -buffer, extent + buffer
    clip = shapely.box(lo, lo, hi, hi)
    world = float(n * extent)
    empty = shapely.Polygon()
    shapes = []
    for ring in rings:
        u, v = _mercator(ring[:, 0], ring[:, 1], z, y, x, extent)
        if v.max() < lo or v.min() > hi:
            shapes.append(empty)
            continue
        parts = []
        # the copy of the zone on this world, or one world to either side of it (a tile at
        # the map's edge), wherever it meets the clip box
        for shift in (0.0, -world, world):
            umin, umax = u.min() + shift, u.max() + shift
            if umax < lo or umin > hi:
                continue
            polygon = shapely.make_valid(shapely.Polygon(np.column_stack([u + shift, v])))
            inside = umin >= lo and umax <= hi and v.min() >= lo and v.max() <= hi
            parts.append(polygon if inside else shapely.intersection(polygon, clip))
        parts = [p for p in parts if not p.is_empty]
        if not parts:
            shapes.append(empty)
        else:
            shapes.append(_polygonal(parts[0] if len(parts) == 1 else shapely.union_all(parts)))
    return shapes


def zone_tile_mvt(
    z: int,
    y: int,
    x: int,
    zones: np.ndarray,
    values: Mapping[str, np.ndarray] | None = None,
    *,
    layer: str = "zones",
    extent: int = MVT_EXTENT,
) -> bytes:
    """A vector tile of zones with their values.

    Parameters
    ----------
    z, y, x:
        The tile (WebMercatorQuad).
    zones:
        uint64 (n,): the zones to draw (zones that miss the tile are left out).
    values:
        variable -> float (n,): one value per zone (NaN: property left out).
    layer:
        The layer name.
    """
    ids = np.asarray(zones, dtype=np.uint64).reshape(-1)
    columns: dict[str, np.ndarray] = {}
    for name, column in (values or {}).items():
        arr = np.asarray(column, dtype=np.float64).reshape(-1)
        if arr.shape != ids.shape:
            raise InvalidInput(name, f"{arr.size} values", f"one per zone ({ids.size})")
        columns[name] = arr
    shapes = zone_tile_shapes(z, y, x, ids, extent=extent)
    texts = grid.zone_to_text(ids).tolist() if ids.size else []
    features = []
    for row, shape in enumerate(shapes):
        if shape.is_empty or shape.area <= 0:
            continue
        zone = int(ids[row])
        props: dict[str, Any] = {"zone": zone, "zone_text": texts[row]}
        for name, arr in columns.items():
            if not math.isnan(arr[row]):
                props[name] = float(arr[row])
        features.append({"geometry": shape, "properties": props, "id": zone})
    options = {"extents": extent, "y_coord_down": True, "quantize_bounds": None}
    return bytes(
        mapbox_vector_tile.encode({"name": layer, "features": features}, default_options=options)
    )
