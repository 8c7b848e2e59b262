"""WGS84 geodetic latitude <-> authalic latitude, and the authalic sphere's radius.

The authalic sphere has the surface area of the WGS84 ellipsoid; mapping geodetic latitude
to authalic latitude (longitude unchanged) is an equal-area map from the ellipsoid onto it
(Snyder, *Map Projections: A Working Manual*, 1987, eqs. 3-11 to 3-12).

Everything is computed from the pole, so that nothing cancels near it: with
u = 1 - sin|phi| (= 2 sin^2 of half the colatitude, exact), the gap q_p - q(phi) is
2 (1 - e^2) times the integral of (1 - e^2 x^2)^-2 over [1 - u, 1], whose integrand is
smooth and nearly constant, so an 8-point Gauss-Legendre rule gives it to full precision.
Then sin|beta| = 1 - gap / q_p, again with the colatitude taken straight from the gap.
"""

from __future__ import annotations

import numpy as np


def _clip(x, lo, hi):
    """np.clip without its wrapper's overhead (it dominates for scalars)."""
    return np.minimum(np.maximum(x, lo), hi)


# WGS84 defining constants (NGA.STND.0036, common practice).
WGS84_A = 6378137.0
WGS84_F = 1.0 / 298.257223563
_E2 = WGS84_F * (2.0 - WGS84_F)
_E = np.sqrt(_E2)

_NODES, _WEIGHTS = np.polynomial.legendre.leggauss(8)


def _gap(u: np.ndarray) -> np.ndarray:
    """q_p - q(phi) as a function of u = 1 - sin|phi| (Snyder's q, eq. 3-12)."""
    u = np.asarray(u, dtype=np.float64)
    x = 1.0 - 0.5 * u[..., None] * (1.0 - _NODES)  # nodes mapped onto [1 - u, 1]
    w = 1.0 - _E2 * x * x
    return (1.0 - _E2) * u * np.sum(_WEIGHTS / (w * w), axis=-1)


_QP = float(_gap(np.float64(2.0)) / 2.0)  # q_p: half the gap from pole to pole

#: Radius of the sphere with the WGS84 ellipsoid's surface area, metres.
R_AUTHALIC = float(WGS84_A * np.sqrt(_QP / 2.0))

#: Surface area of the WGS84 ellipsoid, square metres.
EARTH_AREA = 4.0 * np.pi * R_AUTHALIC**2


def _half_colat(lat_deg: np.ndarray) -> np.ndarray:
    return np.radians(90.0 - np.abs(np.asarray(lat_deg, dtype=np.float64))) / 2.0


def _beta_half_colat(lat: np.ndarray) -> np.ndarray:
    """Half the authalic colatitude of |lat| (radians)."""
    u = 2.0 * np.sin(_half_colat(lat)) ** 2
    return np.arcsin(np.sqrt(_clip(_gap(u) / (2.0 * _QP), 0.0, 1.0)))


def geodetic_to_authalic(lat: np.ndarray) -> np.ndarray:
    """Authalic latitude (degrees) of a geodetic latitude (degrees).

    >>> float(geodetic_to_authalic(45.0))  # doctest: +ELLIPSIS
    44.87170...
    >>> float(geodetic_to_authalic(-90.0))
    -90.0
    """
    lat = np.asarray(lat, dtype=np.float64)
    return np.copysign(90.0 - np.degrees(2.0 * _beta_half_colat(lat)), lat)


def authalic_to_geodetic(beta: np.ndarray) -> np.ndarray:
    """Geodetic latitude (degrees) of an authalic latitude (degrees), to full precision.

    Newton's method on u = 1 - sin|phi|, where the gap's derivative is never small.

    >>> float(authalic_to_geodetic(geodetic_to_authalic(45.0)))  # doctest: +ELLIPSIS
    45.0000000...
    """
    beta = np.asarray(beta, dtype=np.float64)
    target = 2.0 * _QP * np.sin(_half_colat(beta)) ** 2  # the gap q_p - q we need
    u = target * (1.0 - _E2) / 2.0  # exact slope at the pole
    for _ in range(4):
        w = 1.0 - _E2 * (1.0 - u) ** 2
        u = _clip(u - (_gap(u) - target) * w * w / (2.0 * (1.0 - _E2)), 0.0, 1.0)
    colat = 2.0 * np.arcsin(np.sqrt(u / 2.0))
    return np.copysign(90.0 - np.degrees(colat), beta)


def geodetic_to_xyz(lat: np.ndarray, lon: np.ndarray) -> np.ndarray:
    """Unit vectors (..., 3) on the authalic sphere of geodetic (lat, lon) in degrees."""
    half = _beta_half_colat(lat)
    cos_beta = np.sin(2.0 * half)
    sin_beta = np.copysign(np.cos(2.0 * half), lat)
    lo = np.radians(lon)
    return np.stack([cos_beta * np.cos(lo), cos_beta * np.sin(lo), sin_beta], axis=-1)
