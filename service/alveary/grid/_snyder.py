"""Snyder's equal-area projection of the icosahedron's faces onto planar triangles.

J. P. Snyder (1992), "An Equal-Area Map Projection for Polyhedral Globes",
Cartographica 29(1):10-21; equation numbers in brackets. Each face is projected into its
own plane, seen from outside the globe: vertex k of face f lands at
``C (cos 120°k, sin 120°k)`` with ``C = R_AUTHALIC * R' * tan(g)``.

The forward map has a closed form; the inverse needs Newton's method for the azimuth.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
import numpy.typing as npt

from alveary.grid._authalic import R_AUTHALIC
from alveary.grid._icosahedron import FACE_CENTERS, FACE_E1, FACE_E2, FACES, VERTICES
from alveary.grid._xp import ARRAYS

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

_G = float(np.radians(36.0))  # G: half the angle of a spherical face at its vertex (360°/10)
_THETA = float(np.radians(30.0))  # theta: half the angle of the planar triangle at its vertex
_COT_THETA = float(1.0 / np.tan(_THETA))
#: g: arc from a face centre to its vertices.
G_ARC = float(np.arccos(np.dot(FACE_CENTERS[0], VERTICES[FACES[0, 0]])))
_TAN_G = float(np.tan(G_ARC))
#: R'/R, chosen so the planar triangle has the spherical face's area (Snyder [5]).
RPRIME = float(np.sqrt(4.0 * np.pi / 20.0 / (3.0 * np.sqrt(3.0) / 4.0)) / _TAN_G)
#: Distance from a face centre to its vertices in the plane, in units of the sphere radius.
CIRCUMRADIUS = RPRIME * _TAN_G
#: Edge of a planar face in units of the sphere radius.
EDGE = float(CIRCUMRADIUS * np.sqrt(3.0))
_K = (RPRIME * _TAN_G) ** 2

Floats = npt.NDArray[np.float64]
Ints = npt.NDArray[np.int64]
_SECTOR = 2.0 * math.pi / 3.0


def lonlat_to_xyz(lat: Any, lon: Any) -> Floats:
    """Unit vectors (..., 3) of spherical latitude/longitude in degrees."""
    la, lo = np.radians(lat), np.radians(lon)
    c = np.cos(la)
    return np.stack([c * np.cos(lo), c * np.sin(lo), np.sin(la)], axis=-1)


def lonlat_of(x: Any, y: Any, z: Any, xp: Any) -> tuple[Any, Any]:
    """Spherical (lat, lon) in degrees of a vector's components; longitude in [-180, 180],
    and 0 at the poles (where rounding would make it anything)."""
    off_axis = xp.hypot(x, y)
    lon = xp.where(off_axis < 1e-14, 0.0, xp.degrees(xp.arctan2(y, x)))
    return xp.degrees(xp.arctan2(z, off_axis)), lon


def xyz_to_lonlat(xyz: Floats) -> tuple[Floats, Floats]:
    """Spherical (lat, lon) in degrees of vectors (..., 3); longitude in [-180, 180]."""
    lat, lon = lonlat_of(xyz[..., 0], xyz[..., 1], xyz[..., 2], ARRAYS)
    return lat, lon


def face_of(xyz: Floats) -> Ints:
    """The face whose centre is nearest: the face that holds the point."""
    face: Ints = np.argmax(xyz @ FACE_CENTERS.T, axis=-1)
    return face


def _reduce(az: Any, xp: Any) -> tuple[Any, Any]:
    """Split an azimuth in [0, 2π) into a 120° sector number and the rest."""
    sector = xp.clip(xp.floor(az / _SECTOR), 0, 2)
    return sector, az - sector * _SECTOR


_SIN_G, _COS_G, _COS_GARC = float(np.sin(_G)), float(np.cos(_G)), float(np.cos(G_ARC))
_CENTERS_T, _E1_T, _E2_T = (np.ascontiguousarray(a.T) for a in (FACE_CENTERS, FACE_E1, FACE_E2))
_TAN_G2 = _TAN_G * _TAN_G
_RT = RPRIME * _TAN_G
_TWO_PI = 2.0 * np.pi


def plane_of(px: Any, py: Any, half_chord: Any, xp: Any) -> tuple[Any, Any, Any]:
    """Snyder's forward map within a face's 120° sector, from the point's position in the
    face's tangent frame (px, py) and half its chord to the face centre, sin(z / 2).

    Returns (x, y, sector): the plane point with its azimuth reduced to [0°, 120°) from
    the face's vertex ``sector`` (units of the radius), so that the full plane point is
    (x, y) rotated by 120°·sector.
    """
    sector, az = _reduce(xp.arctan2(py, px) % _TWO_PI, xp)
    cos_az, sin_az = xp.cos(az), xp.sin(az)
    dist = cos_az + sin_az * _COT_THETA  # tan(g) / tan(q), eq. [9]
    sin_q2 = xp.sqrt(0.5 * (1.0 - dist / xp.sqrt(_TAN_G2 + dist * dist)))  # sin(q / 2)
    h = xp.arccos(xp.clip(sin_az * _SIN_G * _COS_GARC - cos_az * _COS_G, -1.0, 1.0))  # [6]
    area = az + _G + h - np.pi  # [7], on the unit sphere
    # [8]: tan Az' = u / w; [10]-[12] then reduce to rho (cos Az', sin Az') = (w, u) * scale.
    u = 2.0 * area
    w = _K - u * _COT_THETA
    scale = half_chord / (_RT * sin_q2)
    return w * scale, u * scale, sector


def forward_sector(xyz: Floats, face: Ints) -> tuple[Floats, Floats, Floats]:
    """:func:`plane_of` for unit vectors (..., 3) on the given faces."""
    c, e1, e2 = FACE_CENTERS[face], FACE_E1[face], FACE_E2[face]
    px = np.einsum("...i,...i->...", xyz, e1)
    py = np.einsum("...i,...i->...", xyz, e2)
    half_chord = 0.5 * np.linalg.norm(xyz - c, axis=-1)  # sin(z / 2), z the arc from centre
    x, y, sector = plane_of(px, py, half_chord, ARRAYS)
    return x, y, sector


_ROT = np.array(
    [[[np.cos(a), -np.sin(a)], [np.sin(a), np.cos(a)]] for a in (0, _SECTOR, 2 * _SECTOR)]
)


def forward(xyz: Floats, face: Ints) -> tuple[Floats, Floats]:
    """Project unit vectors onto the planes of the given faces (units of the radius)."""
    x, y, sector = forward_sector(xyz, face)
    rot = _ROT[sector.astype(np.int64)]
    return rot[..., 0, 0] * x + rot[..., 0, 1] * y, rot[..., 1, 0] * x + rot[..., 1, 1] * y


def sphere_of(x: Any, y: Any, xp: Any) -> tuple[Any, Any]:
    """The inverse map on a face: (azimuth from the face's E1 axis, arc from its centre),
    radians, of a plane point (units of the radius). Newton's method solves
    Az + G + H(Az) - pi = area for Az [6, 7], quadratically from Az'."""
    rho = xp.hypot(x, y)
    sector, az_p = _reduce(xp.arctan2(y, x) % _TWO_PI, xp)
    cos_ap, sin_ap = xp.cos(az_p), xp.sin(az_p)
    denom = cos_ap + sin_ap * _COT_THETA
    area = _K * sin_ap / (2.0 * denom)  # [8] solved for the area
    az = az_p
    for _ in range(4):
        ca, sa = xp.cos(az), xp.sin(az)
        w = xp.clip(sa * _SIN_G * _COS_GARC - ca * _COS_G, -1.0, 1.0)
        h = xp.arccos(w)
        dh = -(ca * _SIN_G * _COS_GARC + sa * _COS_G) / xp.sqrt(xp.maximum(1.0 - w * w, 1e-300))
        az = xp.clip(az - (az + _G + h - np.pi - area) / (1.0 + dh), 0.0, _SECTOR)
    q = xp.arctan2(_TAN_G, xp.cos(az) + xp.sin(az) * _COT_THETA)  # [9]
    d_p = RPRIME * _TAN_G / denom  # [10]
    f = d_p / (2.0 * RPRIME * xp.sin(q / 2.0))  # [11]
    z = 2.0 * xp.arcsin(xp.clip(rho / (2.0 * RPRIME * f), 0.0, 1.0))  # [12]
    return az + sector * _SECTOR, z


def inverse(face: Ints, x: Floats, y: Floats) -> Floats:
    """Unit vectors of plane points (units of the radius) on the given faces."""
    az, z = sphere_of(x, y, ARRAYS)
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
