"""The public region functions: zones in a radius, a box or a polygon, and box areas."""

from __future__ import annotations

import math
from typing import Any

import numpy as np
import numpy.typing as npt

from alveary._errors import GridError
from alveary.grid import _regions
from alveary.grid._authalic import R_AUTHALIC, geodetic_to_authalic
from alveary.grid._checks import check_lat_lon, finite
from alveary.grid._ids import check_level
from alveary.grid._polygon import Footprint, read_polygon

Ids = npt.NDArray[np.uint64]


def zones_in_radius(
    lat: Any, lon: Any, meters: Any, level: int, *, return_distance: bool = False
) -> Ids | tuple[Ids, npt.NDArray[np.float64]]:
    """Zones whose centres lie within ``meters`` (WGS84 geodesic) of a point, and the
    zone that holds the point, ids ascending.

    The zone the point lies in always belongs to the answer, even when its centre is
    farther than ``meters``. With ``return_distance`` also each centre's geodesic
    distance from the point in metres (for the point's own zone, its real distance).

    >>> ids, d = zones_in_radius(45.0, 7.0, 2000.0, 13, return_distance=True)
    >>> len(ids), bool(d.max() <= 2000.0)  # about 12.6 km² / 0.76 km²
    (17, True)
    >>> from alveary.grid import point_to_zone, zone_to_text
    >>> here = zones_in_radius(30.55, -36.1, 100.0, 12)  # its centre is 970 m away
    >>> here.tolist() == [point_to_zone(30.55, -36.1, 12)]
    True
    """
    level = check_level(level)
    la, lo = check_lat_lon(lat, lon, wrap=True)
    if la.ndim != 0:
        raise GridError("lat", "an array", "a single point")
    m = finite("meters", meters)
    if m < 0:
        raise GridError("meters", m, ">= 0")
    ids, dist = _regions.in_radius(float(la), float(lo), m, level)
    return (ids, dist) if return_distance else ids


def _check_bbox(west: Any, south: Any, east: Any, north: Any) -> tuple[float, ...]:
    """(west, south, east, north) as floats; longitudes wrapped, east = 180 kept."""
    w, e = finite("west", west), finite("east", east)
    s, n = finite("south", south), finite("north", north)
    for name, v in (("south", s), ("north", n)):
        if abs(v) > 90.0:
            raise GridError(name, v, "[-90, 90] degrees")
    if s > n:
        raise GridError("south", s, f"<= north ({n})")
    if e - w >= 360.0:
        return -180.0, s, 180.0, n
    w2, e2 = (w + 180.0) % 360.0 - 180.0, (e + 180.0) % 360.0 - 180.0
    if e2 == -180.0 and e > w:
        e2 = 180.0
    return w2, s, e2, n


def zones_in_bbox(west: Any, south: Any, east: Any, north: Any, level: int) -> Ids:
    """Zones whose centres lie in a longitude/latitude box, ids ascending.

    ``west > east`` means the box crosses the antimeridian.

    >>> len(zones_in_bbox(5.0, 45.0, 6.0, 46.0, 9))  # about 8 750 km² / 194.6 km²
    45
    """
    level = check_level(level)
    w, s, e, n = _check_bbox(west, south, east, north)
    return _regions.in_bbox(w, s, e, n, level)


def bbox_area(west: Any, south: Any, east: Any, north: Any) -> float:
    """Area in m² of a longitude/latitude box on WGS84 (exact: a band of the authalic sphere).

    ``west > east`` crosses the antimeridian; ``east - west >= 360`` is every longitude.

    >>> round(bbox_area(-180, -90, 180, 90) / 1e12, 3)  # the Earth, million km²
    510.066
    >>> round(bbox_area(170, -1, -170, 1) / 1e9, 1)  # 20° x 2° on the equator, thousand km²
    492.3
    """
    w, s, e, n = _check_bbox(west, south, east, north)
    span = 360.0 if e - w >= 360.0 else (e - w) % 360.0
    sin_s, sin_n = np.sin(np.radians(geodetic_to_authalic(np.array([s, n]))))
    return float(R_AUTHALIC**2 * math.radians(span) * (sin_n - sin_s))


def zones_in_polygon(geometry: Footprint | dict[str, Any], level: int) -> Ids:
    """Zones whose centres lie in a polygon, ids ascending.

    ``geometry`` is a :class:`Footprint` or anything :func:`read_polygon` reads (a GeoJSON
    Polygon, MultiPolygon or a Feature holding one). Holes are respected; rings crossing
    the antimeridian or winding round a pole are read as :func:`read_polygon` describes.

    >>> square = {"type": "Polygon", "coordinates": [[[5, 45], [6, 45], [6, 46], [5, 46], [5, 45]]]}
    >>> len(zones_in_polygon(square, 9))
    45
    """
    level = check_level(level)
    return _regions.in_shape(read_polygon(geometry).shape, level)
