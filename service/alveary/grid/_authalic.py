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

from typing import Any

import numpy as np
import numpy.typing as npt

from alveary.grid._xp import ARRAYS

Floats = npt.NDArray[np.float64]

# WGS84 defining constants (NGA.STND.0036, common practice).
WGS84_A = 6378137.0
WGS84_F = 1.0 / 298.257223563
_E2 = WGS84_F * (2.0 - WGS84_F)

# An 8-point Gauss-Legendre rule on [-1, 1], as (node, weight) pairs of Python floats.
_RULE = [(float(x), float(w)) for x, w in zip(*np.polynomial.legendre.leggauss(8), strict=True)]


def _gap(u: Any) -> Any:
    """q_p - q(phi) as a function of u = 1 - sin|phi| (Snyder's q, eq. 3-12).

    Plain arithmetic, so it serves arrays and single floats alike.
    """
    total: Any = 0.0
    for node, weight in _RULE:
        x = 1.0 - 0.5 * u * (1.0 - node)  # the node mapped onto [1 - u, 1]
        w = 1.0 - _E2 * x * x
        total = total + weight / (w * w)
    return (1.0 - _E2) * u * total


_QP = float(_gap(2.0) / 2.0)  # q_p: half the gap from pole to pole

#: Radius of the sphere with the WGS84 ellipsoid's surface area, metres.
R_AUTHALIC = float(WGS84_A * np.sqrt(_QP / 2.0))

#: Surface area of the WGS84 ellipsoid, square metres.
EARTH_AREA = 4.0 * np.pi * R_AUTHALIC**2


def _beta_half_colat(lat: Any, xp: Any) -> Any:
    """Half the authalic colatitude (radians) of |lat| (degrees)."""
    s = xp.sin(xp.radians(90.0 - xp.abs(lat)) / 2.0)
    return xp.arcsin(xp.sqrt(xp.clip(_gap(2.0 * s * s) / (2.0 * _QP), 0.0, 1.0)))


def to_geodetic(beta: Any, xp: Any) -> Any:
    """Geodetic latitude (degrees) of authalic latitude ``beta`` (degrees): Newton's
    method on u = 1 - sin|phi|, where the gap's derivative is never small."""
    s = xp.sin(xp.radians(90.0 - xp.abs(beta)) / 2.0)
    target = 2.0 * _QP * s * s  # the gap q_p - q we need
    u = target * (1.0 - _E2) / 2.0  # exact slope at the pole
    for _ in range(4):
        w = 1.0 - _E2 * (1.0 - u) ** 2
        u = xp.clip(u - (_gap(u) - target) * w * w / (2.0 * (1.0 - _E2)), 0.0, 1.0)
    colat = 2.0 * xp.arcsin(xp.sqrt(u / 2.0))
    return xp.copysign(90.0 - xp.degrees(colat), beta)


def geodetic_unit(lat: Any, lon: Any, xp: Any) -> tuple[Any, Any, Any]:
    """(x, y, z) on the authalic sphere of geodetic (lat, lon) in degrees."""
    half = _beta_half_colat(lat, xp)
    cos_beta = xp.sin(2.0 * half)
    sin_beta = xp.copysign(xp.cos(2.0 * half), lat)
    lo = xp.radians(lon)
    return cos_beta * xp.cos(lo), cos_beta * xp.sin(lo), sin_beta


def geodetic_to_authalic(lat: Any) -> Floats:
    """Authalic latitude (degrees) of a geodetic latitude (degrees).

    >>> float(geodetic_to_authalic(45.0))  # doctest: +ELLIPSIS
    44.87170...
    >>> float(geodetic_to_authalic(-90.0))
    -90.0
    """
    lat = np.asarray(lat, dtype=np.float64)
    half = _beta_half_colat(lat, ARRAYS)
    out: Floats = np.copysign(90.0 - np.degrees(2.0 * half), lat)
    return out


def authalic_to_geodetic(beta: Any) -> Floats:
    """Geodetic latitude (degrees) of an authalic latitude (degrees), to full precision.

    >>> float(authalic_to_geodetic(geodetic_to_authalic(45.0)))  # doctest: +ELLIPSIS
    45.0000000...
    >>> from alveary.grid._xp import FLOATS
    >>> round(to_geodetic(44.8717, FLOATS), 6)  # one float at a time, the same formula
    44.999997
    """
    out: Floats = to_geodetic(np.asarray(beta, dtype=np.float64), ARRAYS)
    return out


def geodetic_to_xyz(lat: Any, lon: Any) -> Floats:
    """Unit vectors (..., 3) on the authalic sphere of geodetic (lat, lon) in degrees."""
    lat = np.asarray(lat, dtype=np.float64)
    return np.stack(geodetic_unit(lat, np.asarray(lon, dtype=np.float64), ARRAYS), axis=-1)
