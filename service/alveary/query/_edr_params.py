"""The OGC API - EDR query parameters other than ``coords`` and ``datetime``, checked.

Each function takes a parameter as sent and gives the value the query layer uses, or
raises :class:`alveary.InvalidInput` naming the parameter and what is allowed (the EDR
routes answer those with 400):

- ``parameter-name``: a comma-separated list of variables; ``parameter_names`` is taken
  as an alias, because a widely used Python client sends that spelling;
- ``within`` and ``within-units`` (``m``, ``km``, ``mi``): the radius in metres;
- ``crs``: CRS84 only, the CRS of every cube and answer;
- ``z``: refused, since cubes are surface fields without a vertical axis.
"""

from __future__ import annotations

import math

from alveary._errors import InvalidInput

__all__ = [
    "CRS84",
    "CRS84_NAMES",
    "WITHIN_UNITS",
    "check_crs",
    "check_z",
    "parse_parameter_names",
    "within_metres",
]

#: The one CRS of coordinates in requests and answers: WGS 84 longitude, latitude.
CRS84 = "http://www.opengis.net/def/crs/OGC/1.3/CRS84"
#: Spellings of CRS84 accepted in ``crs`` (compared case-insensitively).
CRS84_NAMES: tuple[str, ...] = (
    CRS84,
    "https://www.opengis.net/def/crs/OGC/1.3/CRS84",
    "http://www.opengis.net/def/crs/OGC/0/CRS84",
    "https://www.opengis.net/def/crs/OGC/0/CRS84",
    "CRS84",
    "OGC:CRS84",
    "[OGC:CRS84]",
)
#: ``within-units`` values (case-insensitive) and their length in metres; ``mi`` is the
#: international mile.
WITHIN_UNITS: dict[str, float] = {"m": 1.0, "km": 1000.0, "mi": 1609.344}
_UNIT_ALIASES = {
    "meter": "m",
    "meters": "m",
    "metre": "m",
    "metres": "m",
    "kilometer": "km",
    "kilometers": "km",
    "kilometre": "km",
    "kilometres": "km",
    "mile": "mi",
    "miles": "mi",
}
_UNITS_ALLOWED = "m, km or mi"
_MAX_METRES = 20_037_509.0  # half the equator: farther than any point on Earth


def parse_parameter_names(value: str | None, alias: str | None = None) -> tuple[str, ...] | None:
    """The variables a query asks for, in order, without repeats; None for all of them.

    Parameters
    ----------
    value:
        ``parameter-name`` as sent.
    alias:
        ``parameter_names`` as sent; it may stand in for ``parameter-name`` or repeat
        it, but not contradict it.

    Examples
    --------
    >>> parse_parameter_names("soil_moisture, canopy_temperature,soil_moisture")
    ('soil_moisture', 'canopy_temperature')
    >>> parse_parameter_names(None, "soil_moisture")
    ('soil_moisture',)
    >>> parse_parameter_names(None) is None
    True
    >>> parse_parameter_names("a", "b")
    Traceback (most recent call last):
    ...
    alveary._errors.InvalidInput: parameter_names is 'b'; allowed: the same list as parameter-name ('a'), or only one of the two
    """  # noqa: E501
    names = _names("parameter-name", value)
    other = _names("parameter_names", alias)
    if names is not None and other is not None and names != other:
        raise InvalidInput(
            "parameter_names",
            alias,
            f"the same list as parameter-name ({value!r}), or only one of the two",
        )
    return names if names is not None else other


def _names(parameter: str, text: str | None) -> tuple[str, ...] | None:
    if text is None:
        return None
    names = [t.strip() for t in text.split(",")]
    if not any(names) or not all(names):
        raise InvalidInput(parameter, text, "a comma-separated list of parameter names")
    return tuple(dict.fromkeys(names))


def within_metres(within: str | float | None, units: str | None) -> float:
    """The ``radius`` query's distance in metres, from ``within`` and ``within-units``.

    Both are required (OGC 19-086r6, /req/queries/radius F-I).

    Examples
    --------
    >>> within_metres("2.5", "km")
    2500.0
    >>> within_metres(1, "MI")
    1609.344
    >>> within_metres("5", None)
    Traceback (most recent call last):
    ...
    alveary._errors.InvalidInput: within-units is None; allowed: m, km or mi
    """
    if within is None or (isinstance(within, str) and not within.strip()):
        raise InvalidInput("within", within, "a distance >= 0 in within-units")
    if units is None or not units.strip():
        raise InvalidInput("within-units", units, _UNITS_ALLOWED)
    key = units.strip().lower()
    key = _UNIT_ALIASES.get(key, key)
    if key not in WITHIN_UNITS:
        raise InvalidInput("within-units", units, _UNITS_ALLOWED)
    try:
        distance = float(within)
    except (TypeError, ValueError):
        raise InvalidInput("within", within, "a distance >= 0 in within-units") from None
    metres = distance * WITHIN_UNITS[key]
    if not (math.isfinite(distance) and 0.0 <= metres <= _MAX_METRES):
        top = _MAX_METRES / WITHIN_UNITS[key]
        raise InvalidInput("within", within, f"[0, {top:.6g}] {key}")
    return metres


def check_crs(value: str | None) -> None:
    """Accept an absent ``crs`` or one naming CRS84; refuse every other CRS.

    >>> check_crs("OGC:CRS84")
    >>> check_crs("EPSG:4326")
    Traceback (most recent call last):
    ...
    alveary._errors.InvalidInput: crs is 'EPSG:4326'; allowed: CRS84 (http://www.opengis.net/def/crs/OGC/1.3/CRS84), longitude then latitude in degrees
    """  # noqa: E501
    if value is None:
        return
    if value.strip().lower() not in {n.lower() for n in CRS84_NAMES}:
        raise InvalidInput("crs", value, f"CRS84 ({CRS84}), longitude then latitude in degrees")


def check_z(value: str | None) -> None:
    """Refuse ``z``: the cubes are surface fields and publish no vertical extent.

    >>> check_z(None)
    >>> check_z("850")
    Traceback (most recent call last):
    ...
    alveary._errors.InvalidInput: z is '850'; allowed: no z: the collections are surface fields without vertical levels
    """  # noqa: E501
    if value is not None:
        raise InvalidInput(
            "z", value, "no z: the collections are surface fields without vertical levels"
        )
