"""Snyder's equal-area projection of the icosahedron's faces onto planar triangles.

J. P. Snyder (1992), "An Equal-Area Map Projection for Polyhedral Globes",
Cartographica 29(1):10-21; equation numbers in brackets. Each face is projected into its
own plane, seen from outside the globe: vertex k of face f lands at
``C (cos 120°k, sin 120°k)`` with ``C = R_AUTHALIC * R' * tan(g)``.

The forward map has a closed form; the inverse needs Newton's method for the azimuth.
"""

from __future__ import annotations

import numpy as np

from alveary.grid._authalic import R_AUTHALIC, _clip
from alveary.grid._icosahedron import FACE_CENTERS, FACE_E1, FACE_E2, FACES, VERTICES

__all__ = [
    "CIRCUMRADIUS",
    "EDGE",
    "FACES",
    "RPRIME",
    "R_AUTHALIC",
    "VERTICES",
    "face_of",
    "forward",
    "inverse",
    "lonlat_to_xyz",
    "project",
    "unproject",
    "xyz_to_lonlat",
]

_G = np.radians(36.0)  # G: half the angle of a spherical face at its vertex (360°/10)
_THETA = np.radians(30.0)  # theta: half the angle of the planar triangle at its vertex
_COT_THETA = 1.0 / np.tan(_THETA)
#: g: arc from a face centre to its vertices.
G_ARC = float(np.arccos(np.dot(FACE_CENTERS[0], VERTICES[FACES[0, 0]])))
_TAN_G = np.tan(G_ARC)
#: R'/R, chosen so the planar triangle has the spherical face's area (Snyder [5]).
RPRIME = float(np.sqrt(4.0 * np.pi / 20.0 / (3.0 * np.sqrt(3.0) / 4.0)) / _TAN_G)
#: Distance from a face centre to its vertices in the plane, in units of the sphere radius.
CIRCUMRADIUS = RPRIME * _TAN_G
#: Edge of a planar face in units of the sphere radius.
EDGE = CIRCUMRADIUS * np.sqrt(3.0)
_K = (RPRIME * _TAN_G) ** 2
_SECTOR = 2.0 * np.pi / 3.0


def lonlat_to_xyz(lat: np.ndarray, lon: np.ndarray) -> np.ndarray:
    """Unit vectors (..., 3) of spherical latitude/longitude in degrees."""
    la, lo = np.radians(lat), np.radians(lon)
    c = np.cos(la)
    return np.stack([c * np.cos(lo), c * np.sin(lo), np.sin(la)], axis=-1)


def xyz_to_lonlat(xyz: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Spherical (lat, lon) in degrees of vectors (..., 3); longitude in [-180, 180]."""
    x, y, z = xyz[..., 0], xyz[..., 1], xyz[..., 2]
    lat = np.degrees(np.arctan2(z, np.hypot(x, y)))
    lon = np.degrees(np.arctan2(y, x))
    return lat, lon


def face_of(xyz: np.ndarray) -> np.ndarray:
    """The face whose centre is nearest: the face that holds the point."""
    return np.argmax(xyz @ FACE_CENTERS.T, axis=-1)


def _reduce(az: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Split an azimuth in [0, 2π) into a 120° sector number and the rest."""
    sector = _clip(np.floor(az / _SECTOR), 0, 2)
    return sector, az - sector * _SECTOR


_SIN_G, _COS_G, _COS_GARC = np.sin(_G), np.cos(_G), np.cos(G_ARC)
_CENTERS_T, _E1_T, _E2_T = (np.ascontiguousarray(a.T) for a in (FACE_CENTERS, FACE_E1, FACE_E2))
_TAN_G2 = _TAN_G * _TAN_G
_RT = RPRIME * _TAN_G


def forward_sector(xyz: np.ndarray, face: np.ndarray):
    """Snyder's forward map within a face's 120° sector.

    Returns (x, y, sector): the plane point with its azimuth reduced to [0°, 120°) from
    the face's vertex ``sector`` (units of the radius), so that the full plane point is
    (x, y) rotated by 120°·sector.
    """
    c, e1, e2 = FACE_CENTERS[face], FACE_E1[face], FACE_E2[face]
    px = np.einsum("...i,...i->...", xyz, e1)
    py = np.einsum("...i,...i->...", xyz, e2)
    half_chord = 0.5 * np.linalg.norm(xyz - c, axis=-1)  # sin(z / 2), z the arc from centre
    sector, az = _reduce(np.mod(np.arctan2(py, px), 2.0 * np.pi))
    cos_az, sin_az = np.cos(az), np.sin(az)
    dist = cos_az + sin_az * _COT_THETA  # tan(g) / tan(q), eq. [9]
    sin_q2 = np.sqrt(0.5 * (1.0 - dist / np.sqrt(_TAN_G2 + dist * dist)))  # sin(q / 2)
    h = np.arccos(_clip(sin_az * _SIN_G * _COS_GARC - cos_az * _COS_G, -1.0, 1.0))  # [6]
    area = az + _G + h - np.pi  # [7], on the unit sphere
    # [8]: tan Az' = u / w; [10]-[12] then reduce to rho (cos Az', sin Az') = (w, u) * scale.
    u = 2.0 * area
    w = _K - u * _COT_THETA
    scale = half_chord / (_RT * sin_q2)
    return w * scale, u * scale, sector


_ROT = np.array(
    [[[np.cos(a), -np.sin(a)], [np.sin(a), np.cos(a)]] for a in (0, _SECTOR, 2 * _SECTOR)]
)


def forward(xyz: np.ndarray, face: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Project unit vectors onto the planes of the given faces (units of the radius)."""
    x, y, sector = forward_sector(xyz, face)
    rot = _ROT[sector.astype(np.int64)]
    return rot[..., 0, 0] * x + rot[..., 0, 1] * y, rot[..., 1, 0] * x + rot[..., 1, 1] * y


def inverse(face: np.ndarray, x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """Unit vectors of plane points (units of the radius) on the given faces."""
    rho = np.hypot(x, y)
    sector, az_p = _reduce(np.mod(np.arctan2(y, x), 2.0 * np.pi))
    cos_ap, sin_ap = np.cos(az_p), np.sin(az_p)
    denom = cos_ap + sin_ap * _COT_THETA
    area = _K * sin_ap / (2.0 * denom)  # [8] solved for the area
    sg, cg, cG = np.sin(_G), np.cos(G_ARC), np.cos(_G)
    az = az_p.copy()
    for _ in range(4):  # Newton on Az + G + H(Az) - pi = area [6, 7]; quadratic from Az'
        ca, sa = np.cos(az), np.sin(az)
        w = _clip(sa * sg * cg - ca * cG, -1.0, 1.0)
        h = np.arccos(w)
        dh = -(ca * sg * cg + sa * cG) / np.sqrt(np.maximum(1.0 - w * w, 1e-300))
        az = _clip(az - (az + _G + h - np.pi - area) / (1.0 + dh), 0.0, _SECTOR)
    q = np.arctan2(_TAN_G, np.cos(az) + np.sin(az) * _COT_THETA)  # [9]
    d_p = RPRIME * _TAN_G / denom  # [10]
    f = d_p / (2.0 * RPRIME * np.sin(q / 2.0))  # [11]
    z = 2.0 * np.arcsin(_clip(rho / (2.0 * RPRIME * f), 0.0, 1.0))  # [12]
    az = az + sector * _SECTOR
    sin_z = np.sin(z)
    along1, along2, up = sin_z * np.cos(az), sin_z * np.sin(az), np.cos(z)
    out = np.empty((*np.shape(az), 3))
    for k in range(3):  # component by component: contiguous, no (N, 3) temporaries
        out[..., k] = up * _CENTERS_T[k][face] + along1 * _E1_T[k][face] + along2 * _E2_T[k][face]
    return out


def project(lat: np.ndarray, lon: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Face and plane position in metres of authalic (lat, lon) in degrees.

    >>> face, x, y = project(90.0, 0.0)
    >>> # The pole is on an edge midpoint: half the circumradius from the face centre.
    >>> round(float(np.hypot(x, y) / (CIRCUMRADIUS * R_AUTHALIC)), 9)
    0.5
    """
    xyz = lonlat_to_xyz(np.asarray(lat, dtype=np.float64), np.asarray(lon, dtype=np.float64))
    face = face_of(xyz)
    x, y = forward(xyz, face)
    return face, x * R_AUTHALIC, y * R_AUTHALIC


def unproject(face: np.ndarray, x: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Authalic (lat, lon) in degrees of plane positions in metres on the given faces."""
    face = np.asarray(face, dtype=np.int64)
    x = np.asarray(x, dtype=np.float64) / R_AUTHALIC
    y = np.asarray(y, dtype=np.float64) / R_AUTHALIC
    return xyz_to_lonlat(inverse(face, x, y))
