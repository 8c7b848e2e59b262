"""WGS84 geodetic latitude <-> authalic latitude, and the authalic sphere's radius.

The authalic sphere has the surface area of the WGS84 ellipsoid; mapping geodetic latitude
to authalic latitude (longitude unchanged) is an equal-area map from the ellipsoid onto it
(Snyder, *Map Projections: A Working Manual*, 1987, eqs. 3-11 to 3-18).
"""

from __future__ import annotations

import numpy as np

# WGS84 defining constants (NGA.STND.0036, common practice).
WGS84_A = 6378137.0
WGS84_F = 1.0 / 298.257223563
_E2 = WGS84_F * (2.0 - WGS84_F)
_E = np.sqrt(_E2)


def _q(sin_phi: np.ndarray) -> np.ndarray:
    """Snyder's q(phi), eq. 3-12."""
    es = _E * sin_phi
    return (1.0 - _E2) * (sin_phi / (1.0 - es * es) - np.log((1.0 - es) / (1.0 + es)) / (2.0 * _E))


_QP = float(_q(np.float64(1.0)))

#: Radius of the sphere with the WGS84 ellipsoid's surface area, metres.
R_AUTHALIC = WGS84_A * np.sqrt(_QP / 2.0)

#: Surface area of the WGS84 ellipsoid, square metres.
EARTH_AREA = 4.0 * np.pi * R_AUTHALIC**2

# Series for the inverse (Snyder 1987, eq. 3-18), refined by Newton steps below.
_C2 = _E2 / 3.0 + 31.0 * _E2**2 / 180.0 + 517.0 * _E2**3 / 5040.0
_C4 = 23.0 * _E2**2 / 360.0 + 251.0 * _E2**3 / 3780.0
_C6 = 761.0 * _E2**3 / 45360.0


def geodetic_to_authalic(lat: np.ndarray) -> np.ndarray:
    """Authalic latitude (degrees) of a geodetic latitude (degrees).

    >>> float(geodetic_to_authalic(45.0))  # doctest: +ELLIPSIS
    44.87170...
    """
    phi = np.radians(np.asarray(lat, dtype=np.float64))
    ratio = np.clip(_q(np.sin(phi)) / _QP, -1.0, 1.0)
    return np.degrees(np.arcsin(ratio))


def authalic_to_geodetic(beta: np.ndarray) -> np.ndarray:
    """Geodetic latitude (degrees) of an authalic latitude (degrees), to full precision.

    >>> float(authalic_to_geodetic(geodetic_to_authalic(45.0)))  # doctest: +ELLIPSIS
    45.0000000...
    """
    b = np.radians(np.asarray(beta, dtype=np.float64))
    phi = b + _C2 * np.sin(2 * b) + _C4 * np.sin(4 * b) + _C6 * np.sin(6 * b)
    target = np.sin(b) * _QP
    # Newton on q(phi) = target; dq/dphi = 2 (1 - e^2) cos(phi) / (1 - e^2 sin^2 phi)^2.
    for _ in range(2):
        s = np.sin(phi)
        c = np.cos(phi)
        w = 1.0 - _E2 * s * s
        with np.errstate(divide="ignore", invalid="ignore"):
            step = (target - _q(s)) * w * w / (2.0 * (1.0 - _E2) * c)
        phi = np.where(np.abs(c) > 1e-12, phi + step, phi)
    return np.clip(np.degrees(phi), -90.0, 90.0)


def geodetic_to_xyz(lat: np.ndarray, lon: np.ndarray) -> np.ndarray:
    """Unit vectors (..., 3) on the authalic sphere of geodetic (lat, lon) in degrees."""
    sin_beta = np.clip(_q(np.sin(np.radians(lat))) / _QP, -1.0, 1.0)
    cos_beta = np.sqrt(1.0 - sin_beta * sin_beta)
    lo = np.radians(lon)
    return np.stack([cos_beta * np.cos(lo), cos_beta * np.sin(lo), sin_beta], axis=-1)
