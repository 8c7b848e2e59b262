"""One point or one zone at a time: the grid's steps on Python floats and ints.

A field app asks about one GPS fix at a time. Through numpy, a single point costs some
hundred tiny array operations of about a microsecond each; here the same formulas
(``_authalic``, ``_snyder`` and ``_lattice`` with the ``FLOATS`` namespace) run on plain
floats and ids are decoded with integer arithmetic, validated as strictly as for arrays.
Rare cases (a lattice point beyond its strip's edge) are handed to the array code.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from alveary._errors import GridError
from alveary.grid import _ids, _lattice
from alveary.grid._authalic import geodetic_unit, to_geodetic
from alveary.grid._icosahedron import FACE_CENTERS, FACE_E1, FACE_E2, VERTICES
from alveary.grid._snyder import lonlat_of, plane_of, sphere_of
from alveary.grid._xp import FLOATS

_CENTRES, _E1, _E2 = FACE_CENTERS.tolist(), FACE_E1.tolist(), FACE_E2.tolist()
_TO_ST = _lattice._TO_ST_SECTOR.tolist()  # per 3 * face + sector: plane -> chart
_TO_XY = _lattice._TO_XY.tolist()  # per face: chart -> plane
_OFFSET = _lattice._OFFSET.tolist()
_APEX = {_ids.NORTH: VERTICES[0].tolist(), _ids.SOUTH: VERTICES[11].tolist()}
SMALL = 8  # arrays of up to this many zones are handled one by one


def is_number(value: Any) -> bool:
    """A single real number (not a bool, not an array)."""
    return isinstance(value, float | int | np.floating | np.integer) and not isinstance(
        value, bool | np.bool_
    )


def zone_ints(zones: Any, parameter: str = "zones") -> list[int] | None:
    """Validated ids of one integer zone id or a small 1-d integer array, else None.

    Raises the same errors as the array check for a bad id.
    """
    if isinstance(zones, int | np.integer) and not isinstance(zones, bool | np.bool_):
        values = [int(zones)]
    elif (
        isinstance(zones, np.ndarray)
        and zones.ndim == 1
        and 0 < zones.size <= SMALL
        and zones.dtype.kind in "ui"
    ):
        values = zones.tolist()
    else:
        return None
    for k, value in enumerate(values):
        if _ids.decode_int(value) is None:
            index = None if isinstance(zones, int | np.integer) else k
            raise GridError(parameter, value, "a valid zone id", index=index)
    return values


def _nearest_face(x: float, y: float, z: float) -> int:
    """The face whose centre is nearest, as the array code chooses it: the largest dot
    product, unless the two largest are too close to call in plain floats, when the
    array code's own product decides (a point on a face edge)."""
    best, second, face = -2.0, -2.0, 0
    for k, (cx, cy, cz) in enumerate(_CENTRES):
        d = x * cx + y * cy + z * cz
        if d > best:
            best, second, face = d, best, k
        elif d > second:
            second = d
    if best - second > 1e-12:
        return face
    return int(np.argmax(np.array([[x, y, z]]) @ FACE_CENTERS.T))


def point_to_id(lat: float, lon: float, level: int) -> int:
    """The zone id of a checked geodetic point (degrees, longitude in [-180, 180])."""
    x, y, z = geodetic_unit(lat, lon, FLOATS)
    face = _nearest_face(x, y, z)
    c, e1, e2 = _CENTRES[face], _E1[face], _E2[face]
    px = x * e1[0] + y * e1[1] + z * e1[2]
    py = x * e2[0] + y * e2[1] + z * e2[2]
    dx, dy, dz = x - c[0], y - c[1], z - c[2]
    u, v, sector = plane_of(px, py, 0.5 * FLOATS.sqrt(dx * dx + dy * dy + dz * dz), FLOATS)
    (m00, m01), (m10, m11) = _TO_ST[3 * face + sector]
    off = _OFFSET[face]
    n = 1 << level
    s, t = m00 * u + m01 * v + off[0], m10 * u + m11 * v + off[1]
    a, b = _lattice.round_hex(s * n, t * n, FLOATS)
    strip, a, b = face // 4, int(a), int(b)
    if 0 < a <= 2 * n and 0 <= b < n:  # owned by its strip: no seam to cross
        return _ids.encode_int(level, strip, a - 1, b)
    return int(_lattice.chart_to_ids(level, np.array([strip]), np.array([a]), np.array([b]))[0])


def id_to_point(zone: int) -> tuple[float, float]:
    """Geodetic (lat, lon) in degrees of a validated zone's centre."""
    level, region, i, j = _ids.decode_int(zone)  # type: ignore[misc]
    if region in _APEX:
        x, y, z = _APEX[region]
    else:
        n = 1 << level
        s, t = (i + 1) / n, j / n
        face = 4 * region + (0 if s + t <= 1.0 else 1 if s <= 1.0 else 2 if s + t < 2.0 else 3)
        off, ((m00, m01), (m10, m11)) = _OFFSET[face], _TO_XY[face]
        ds, dt = s - off[0], t - off[1]
        az, arc = sphere_of(m00 * ds + m01 * dt, m10 * ds + m11 * dt, FLOATS)
        sin_arc = FLOATS.sin(arc)
        a1, a2, up = sin_arc * FLOATS.cos(az), sin_arc * FLOATS.sin(az), FLOATS.cos(arc)
        c, e1, e2 = _CENTRES[face], _E1[face], _E2[face]
        x, y, z = (up * c[k] + a1 * e1[k] + a2 * e2[k] for k in range(3))
    beta, lon = lonlat_of(x, y, z, FLOATS)
    return to_geodetic(beta, FLOATS), lon


def is_pentagon(zone: int) -> bool:
    """Whether a validated zone is one of the twelve pentagons of its level."""
    level, region, i, j = _ids.decode_int(zone)  # type: ignore[misc]
    n = 1 << level
    return region >= _ids.NORTH or ((i + 1) % n == 0 and j == 0)
