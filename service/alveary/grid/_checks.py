"""Argument checks shared by the grid's functions, and the public latitude/longitude check.

Every check raises :class:`alveary.GridError` naming the parameter, the first bad value,
the allowed range and, for arrays, the bad value's position.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
import numpy.typing as npt

from alveary._errors import GridError
from alveary.grid import _ids

Floats = npt.NDArray[np.float64]


def _floats(name: str, value: Any) -> Floats:
    try:
        return np.asarray(value, dtype=np.float64)
    except (TypeError, ValueError):
        raise GridError(name, value, "numbers") from None


def finite(name: str, value: Any) -> float:
    """One finite number."""
    try:
        number = float(value)
    except (TypeError, ValueError):
        raise GridError(name, value, "a finite number") from None
    if not math.isfinite(number):
        raise GridError(name, number, "a finite number")
    return number


def steps(k: Any, parameter: str = "k") -> int:
    """A whole number of lattice steps, >= 0."""
    try:
        value = int(k)
        ok = value == k and value >= 0 and not isinstance(k, bool)
    except (TypeError, ValueError, OverflowError):
        ok = False
    if not ok:
        raise GridError(parameter, k, "an integer >= 0")
    return value


_LAT = "[-90, 90] degrees"
_LON = "[-180, 180] degrees"
_ANY_LON = "a finite number of degrees"


def scalar_lat_lon(lat: float, lon: float, wrap: bool) -> tuple[float, float]:
    """:func:`check_lat_lon` for one point given as Python floats (no arrays made)."""
    if not -90.0 <= lat <= 90.0:
        raise GridError("lat", lat, _LAT)
    if wrap:
        if not math.isfinite(lon):
            raise GridError("lon", lon, _ANY_LON)
        if not -180.0 <= lon < 180.0:
            lon = (lon + 180.0) % 360.0 - 180.0
    elif not -180.0 <= lon <= 180.0:
        raise GridError("lon", lon, _LON)
    return lat, lon


def check_lat_lon(lat: Any, lon: Any, *, wrap: bool = False) -> tuple[Floats, Floats]:
    """Check WGS84 latitudes and longitudes in degrees; return them as float64 arrays.

    Latitudes must lie in [-90, 90] and longitudes in [-180, 180]; with ``wrap`` any
    finite longitude is accepted and returned in [-180, 180) (190 is -170). The two
    broadcast against each other.

    Raises
    ------
    GridError
        Naming ``lat`` or ``lon``, the first bad value, the allowed range and, for arrays,
        the bad value's position.

    Examples
    --------
    >>> lat, lon = check_lat_lon([10.0, -20.5], 190.0, wrap=True)
    >>> lat.tolist(), lon.tolist()
    ([10.0, -20.5], [-170.0, -170.0])
    >>> check_lat_lon([10.0, 91.0], [0.0, 0.0])
    Traceback (most recent call last):
    ...
    alveary._errors.GridError: lat at position 1 is 91.0; allowed: [-90, 90] degrees
    """
    la, lo = _floats("lat", lat), _floats("lon", lon)
    bad = ~(np.abs(la) <= 90.0)
    if bad.any():
        raise _ids.refuse("lat", la, bad, _LAT)
    bad = ~np.isfinite(lo) if wrap else ~(np.abs(lo) <= 180.0)
    if bad.any():
        raise _ids.refuse("lon", lo, bad, _ANY_LON if wrap else _LON)
    try:
        la, lo = np.broadcast_arrays(la, lo)
    except ValueError:
        raise GridError("lon", lo.shape, f"an array broadcastable to lat's {la.shape}") from None
    if wrap:
        lo = np.where((lo >= -180.0) & (lo < 180.0), lo, (lo + 180.0) % 360.0 - 180.0)
    return la, lo
