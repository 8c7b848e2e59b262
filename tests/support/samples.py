"""Shared sample places, zones and geometries for the grid and the layers on top of it.

Zones are named by the contract's array layout (grid-api.md): level r, n = 2**r, region
0..4 = strip (rows i in [0, 2n), columns j in [0, n)), 5 = northern apex, 6 = southern apex.
In strip coordinates s = (i + 1) / n, t = j / n the strip is the parallelogram
0 <= s <= 2, 0 <= t <= 1 (design notes, section 2). From that alone every kind of place
can be named: the seams between strips, the face edges inside a strip, the twelve
pentagons and both apexes. Ids are computed with the contract's bit layout, not with the
code under test.
"""

from __future__ import annotations

import numpy as np

NORTH_APEX = 5
SOUTH_APEX = 6

#: WGS84 ellipsoid surface area in m² (the design figure; also what pyproj.Geod("WGS84") gives).
WGS84_AREA_M2 = 510_065_621.724e6


def layout_id(level: int, region: int, i: int, j: int) -> int:
    """Zone id from the contract's bit layout: level bit, region, row, column."""
    return (1 << (2 * level + 4)) | (region << (2 * level + 1)) | (i << level) | j


def layout_index(zone: int) -> tuple[int, int, int, int]:
    """(level, region, i, j) of an id by the contract's bit layout (no validation)."""
    zone = int(zone)
    level = (zone.bit_length() - 5) // 2
    n = 1 << level
    return (
        level,
        (zone >> (2 * level + 1)) & 7,
        (zone >> level) & (2 * n - 1),
        zone & (n - 1),
    )


def apexes(level: int) -> list[int]:
    return [layout_id(level, NORTH_APEX, 0, 0), layout_id(level, SOUTH_APEX, 0, 0)]


def pentagons(level: int) -> list[int]:
    """The twelve pentagons: both apexes and, in every strip, N_{k+1} = (s, t) = (1, 0) and
    S_{k+1} = (2, 0) (design notes: each strip holds exactly two of the other ten)."""
    n = 1 << level
    out = apexes(level)
    for k in range(5):
        out += [layout_id(level, k, n - 1, 0), layout_id(level, k, 2 * n - 1, 0)]
    return sorted(out)


def place_samples(level: int) -> dict[str, list[int]]:
    """Zones at every kind of place of the layout, by name (level >= 2 for all kinds).

    Positions along an edge are taken at a quarter, half and three quarters so that
    different levels hit different rows.
    """
    n = 1 << level
    out: dict[str, list[int]] = {"north apex": [apexes(level)[0]], "south apex": [apexes(level)[1]]}

    def add(name: str, region: int, i: int, j: int) -> None:
        if 0 <= i < 2 * n and 0 <= j < n:
            out.setdefault(name, [])
            zone = layout_id(level, region, i, j)
            if zone not in out[name]:
                out[name].append(zone)

    fractions = sorted({max(1, n // 4), max(1, n // 2), max(1, 3 * n // 4)})
    for k in range(5):
        add("pentagon N_k+1", k, n - 1, 0)
        add("pentagon S_k+1", k, 2 * n - 1, 0)
        add("next to the north apex", k, 0, 0)
        add("next to the south apex", k, 2 * n - 1, n - 1)
        for m in fractions:
            if m < n:
                # northern cap seam: owned edge t = 0, 0 < s < 1 and the row beside s = 0
                add("northern cap seam (t = 0)", k, m - 1, 0)
                add("beside the northern cap seam (s = 1/n)", k, 0, m)
                # band seam: owned edge t = 0, 1 < s < 2, and the column beside t = 1, s <= 1
                add("band seam (t = 0)", k, n + m - 1, 0)
                add("beside the band seam (t = 1 - 1/n)", k, m - 1, n - 1)
                # southern cap seam: owned edge s = 2, 0 < t < 1, and beside t = 1, s > 1
                add("southern cap seam (s = 2)", k, 2 * n - 1, m)
                add("beside the southern cap seam (t = 1 - 1/n)", k, n + m - 1, n - 1)
                # face edges inside a strip: s + t = 1, s = 1, s + t = 2
                add("cap/band edge (s + t = 1)", k, n - m - 1, m)
                add("band/band edge (s = 1)", k, n - 1, m)
                add("band/cap edge (s + t = 2)", k, 2 * n - m - 1, m)
                # inside the four faces
                add("face interior", k, (n - m) // 2, max(m // 2, 1) if n > 2 else 0)
                add("face interior", k, n + m // 2, n - 1 - m // 2)
    return out


def sample_zones(level: int) -> list[int]:
    """Every zone of :func:`place_samples`, ascending, once."""
    return sorted({z for zs in place_samples(level).values() for z in zs})


#: Geodetic (lat, lon) points at awkward places; both poles, the antimeridian, lon wrap.
AWKWARD_POINTS = [
    (90.0, 0.0),
    (90.0, 123.0),
    (-90.0, 0.0),
    (-90.0, -45.0),
    (0.0, 180.0),
    (0.0, -180.0),
    (45.0, 179.999999),
    (-45.0, -179.999999),
    (12.5, -3.25),
    (-33.9, 18.4),
    (89.999999, 77.0),
    (-89.999999, -77.0),
]

#: A plain polygon with a hole (GeoJSON, lon/lat), invented, in the Atlantic.
POLYGON_WITH_HOLE = {
    "type": "Polygon",
    "coordinates": [
        [[-31.3, 10.2], [-18.7, 9.1], [-15.2, 21.7], [-24.9, 27.3], [-33.6, 19.8], [-31.3, 10.2]],
        [[-27.1, 15.3], [-21.2, 15.9], [-22.3, 20.1], [-27.1, 15.3]],
    ],
}

#: Two disjoint parts, one of them a thin sliver.
MULTIPOLYGON = {
    "type": "MultiPolygon",
    "coordinates": [
        [[[101.1, -12.3], [109.8, -12.9], [111.2, -3.1], [100.7, -4.4], [101.1, -12.3]]],
        [[[120.05, 30.1], [129.9, 30.3], [129.95, 31.4], [120.1, 31.2], [120.05, 30.1]]],
    ],
}

#: A box across the antimeridian, cut in two at +-180 as RFC 7946 section 3.1.9 asks.
ANTIMERIDIAN_CUT = {
    "type": "MultiPolygon",
    "coordinates": [
        [[[172.3, -8.7], [180.0, -8.7], [180.0, 6.1], [172.3, 6.1], [172.3, -8.7]]],
        [[[-180.0, -8.7], [-174.6, -8.7], [-174.6, 6.1], [-180.0, 6.1], [-180.0, -8.7]]],
    ],
}

#: The same box written as one ring whose edges jump from 172.3 to -174.6 (not cut).
ANTIMERIDIAN_JUMP = {
    "type": "Polygon",
    "coordinates": [
        [[172.3, -8.7], [-174.6, -8.7], [-174.6, 6.1], [172.3, 6.1], [172.3, -8.7]],
    ],
}

#: A small ring jumping from 179 to -179.
SMALL_JUMP = {
    "type": "Polygon",
    "coordinates": [[[179.0, -1.0], [-179.0, -1.0], [-179.0, 1.0], [179.0, 1.0], [179.0, -1.0]]],
}

#: A polar cap as a lon/lat rectangle up to the pole.
POLAR_CAP = {
    "type": "Polygon",
    "coordinates": [[[-180.0, 81.3], [180.0, 81.3], [180.0, 90.0], [-180.0, 90.0], [-180.0, 81.3]]],
}

#: (west, south, east, north) boxes: ordinary, across the antimeridian, polar, whole world.
BBOXES = {
    "ordinary": (-12.34, 35.21, 4.56, 47.89),
    "antimeridian": (165.43, -21.09, -171.23, -3.21),
    "arctic": (-180.0, 83.3, 180.0, 90.0),
    "antarctic band": (-180.0, -90.0, 180.0, -81.7),
}


def unit_vectors(lat_deg, lon_deg) -> np.ndarray:
    """Unit vectors of spherical (lat, lon) in degrees."""
    lat = np.radians(np.asarray(lat_deg, dtype=float))
    lon = np.radians(np.asarray(lon_deg, dtype=float))
    return np.stack([np.cos(lat) * np.cos(lon), np.cos(lat) * np.sin(lon), np.sin(lat)], -1)


def icosahedron_vertices() -> np.ndarray:
    """The 12 vertices (unit vectors) in the standard orientation of the design notes:
    one vertex at 58.28252559 N 11.25 E, a neighbour at azimuth 0, the other neighbours
    at azimuths 72, 144, 216, 288, all at the edge arc atan(2) (geometry of the regular
    icosahedron, common practice), and the antipodes of those six.
    """
    a = unit_vectors(58.28252559, 11.25)
    east = np.cross([0.0, 0.0, 1.0], a)
    east /= np.linalg.norm(east)
    north = np.cross(a, east)
    arc = np.arctan(2.0)
    out = [a]
    for az in np.radians([0.0, 72.0, 144.0, 216.0, 288.0]):
        out.append(np.cos(arc) * a + np.sin(arc) * (np.cos(az) * north + np.sin(az) * east))
    out = np.array(out)
    return np.concatenate([out, -out])
