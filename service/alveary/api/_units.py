"""Unit strings (UDUNITS-2 / CF conventions) turned into symbols a client can show.

CF variables carry units such as ``"kg m-2 s-1"`` or ``"m3 m-3"``: products of unit
names with integer exponents written after them, ``/`` for division, ``^`` or ``**``
optionally before an exponent, and a few whole-string names (``degC``,
``degrees_north``, ``percent``). :func:`unit_symbol` writes them the way a chart axis
would: exponents as superscripts, factors joined by a middle dot, negative exponents
after a slash, and the common long names as their SI symbols::

    "kg m-2 s-1" -> "kg/(m²·s)"    "m3 m-3" -> "m³/m³"    "degC" -> "°C"    "1" -> "1"

Ratios are not simplified (``m3 m-3`` says volume per volume, which matters to a
reader). Strings the small grammar does not cover (offsets such as ``K @ 273.15``,
``days since ...``, parentheses) are given back unchanged, never guessed at.
"""

from __future__ import annotations

import re
from functools import lru_cache

__all__ = ["unit_symbol"]

# Whole strings with a symbol of their own (compared as written, then in lower case).
_WHOLE = {
    "1": "1",
    "": "",
    "%": "%",
    "percent": "%",
    "degc": "°C",
    "deg_c": "°C",
    "degree_c": "°C",
    "degrees_c": "°C",
    "celsius": "°C",
    "degree_celsius": "°C",
    "degrees_celsius": "°C",
    "degf": "°F",
    "degree_fahrenheit": "°F",
    "degrees_fahrenheit": "°F",
    "degrees_north": "°N",
    "degree_north": "°N",
    "degrees_n": "°N",
    "degree_n": "°N",
    "degreen": "°N",
    "degrees_east": "°E",
    "degree_east": "°E",
    "degrees_e": "°E",
    "degree_e": "°E",
    "degreee": "°E",
    "degrees_south": "°S",
    "degrees_west": "°W",
}

# Unit names inside products: long names and aliases to SI (or customary) symbols.
_NAMES = {
    "meter": "m",
    "meters": "m",
    "metre": "m",
    "metres": "m",
    "kilometer": "km",
    "kilometers": "km",
    "kilometre": "km",
    "kilometres": "km",
    "centimeter": "cm",
    "centimetre": "cm",
    "millimeter": "mm",
    "millimeters": "mm",
    "millimetre": "mm",
    "millimetres": "mm",
    "um": "µm",
    "micron": "µm",
    "microns": "µm",
    "micrometer": "µm",
    "micrometre": "µm",
    "second": "s",
    "seconds": "s",
    "sec": "s",
    "minute": "min",
    "minutes": "min",
    "hour": "h",
    "hours": "h",
    "hr": "h",
    "day": "d",
    "days": "d",
    "week": "wk",
    "weeks": "wk",
    "year": "yr",
    "years": "yr",
    "kelvin": "K",
    "degree": "°",
    "degrees": "°",
    "deg": "°",
    "arc_degree": "°",
    "radian": "rad",
    "radians": "rad",
    "steradian": "sr",
    "gram": "g",
    "grams": "g",
    "kilogram": "kg",
    "kilograms": "kg",
    "ug": "µg",
    "microgram": "µg",
    "mole": "mol",
    "umol": "µmol",
    "micromole": "µmol",
    "pascal": "Pa",
    "hectopascal": "hPa",
    "kilopascal": "kPa",
    "millibar": "mbar",
    "mb": "mbar",
    "watt": "W",
    "watts": "W",
    "joule": "J",
    "joules": "J",
    "newton": "N",
    "hertz": "Hz",
    "volt": "V",
    "ampere": "A",
    "percent": "%",
}

_SUPERSCRIPT = str.maketrans("0123456789-", "⁰¹²³⁴⁵⁶⁷⁸⁹⁻")
_NAME = r"[^\W\d]+|%|°[A-Za-z]?"
_FACTOR = re.compile(rf"(?P<name>{_NAME})(?:\^|\*\*)?(?P<exp>[-+]?\d+)?")
_NUMBER = re.compile(r"(?P<mant>[-+]?(?:\d+(?:\.\d*)?|\.\d+))(?:[eE](?P<exp>[-+]?\d+))?")
# Products: factors separated by spaces, "*", the middle dot, or a "." between two names.
_SPLIT = re.compile(r"(?:\s|·|(?<!\*)\*(?!\*))+|(?<=[^\W\d])\.(?=[^\W\d])|(?<=\d)\.(?=[^\W\deE])")


def _superscript(exponent: int) -> str:
    return "" if exponent == 1 else str(exponent).translate(_SUPERSCRIPT)


def _number(m: re.Match[str]) -> str:
    mant, exp = m.group("mant"), m.group("exp")
    if exp is None:
        return mant
    power = "10" + str(int(exp)).translate(_SUPERSCRIPT)
    return power if float(mant) == 1.0 else f"{mant}×{power}"


def _factors(text: str) -> list[tuple[str, int]] | None:
    """``(symbol, exponent)`` of each factor of a product, or None if unreadable."""
    out: list[tuple[str, int]] = []
    for token in _SPLIT.split(text.strip()):
        if not token:
            continue
        number = _NUMBER.fullmatch(token)
        if number is not None:
            out.append((_number(number), 1))
            continue
        factor = _FACTOR.fullmatch(token)
        if factor is None:
            return None
        name = factor.group("name")
        exponent = int(factor.group("exp") or 1)
        if exponent == 0:
            return None
        out.append((_NAMES.get(name, _NAMES.get(name.lower(), name)), exponent))
    return out or None


def _join(factors: list[tuple[str, int]]) -> str:
    return "·".join(name + _superscript(exp) for name, exp in factors)


@lru_cache(maxsize=1024)
def unit_symbol(units: str | None) -> str:
    """A display symbol for a UDUNITS-2 / CF units string.

    Parameters
    ----------
    units:
        The ``units`` attribute of a variable; None or empty gives ``""``.

    Examples
    --------
    >>> unit_symbol("kg m-2 s-1")
    'kg/(m²·s)'
    >>> unit_symbol("m3 m-3"), unit_symbol("W m-2"), unit_symbol("m s-1")
    ('m³/m³', 'W/m²', 'm/s')
    >>> unit_symbol("K"), unit_symbol("degC"), unit_symbol("1"), unit_symbol("s-1")
    ('K', '°C', '1', 's⁻¹')
    >>> unit_symbol("days since 2000-01-01")
    'days since 2000-01-01'
    """
    if units is None:
        return ""
    text = units.strip()
    whole = _WHOLE.get(text, _WHOLE.get(text.lower()))
    if whole is not None:
        return whole
    if "(" in text or ")" in text or "@" in text:
        return text
    parts = text.split("/")
    head = _factors(parts[0]) if parts[0].strip() else []
    rest = [_factors(p) for p in parts[1:]]
    if head is None or any(r is None for r in rest):
        return text
    factors = list(head)
    for r in rest:
        factors.extend((name, -exp) for name, exp in r or [])
    top = [(n, e) for n, e in factors if e > 0]
    bottom = [(n, -e) for n, e in factors if e < 0]
    if not bottom:
        return _join(top)
    if not top or top == [("1", 1)]:
        return _join([(n, -e) for n, e in bottom])
    under = _join(bottom)
    return f"{_join(top)}/{under if len(bottom) == 1 else '(' + under + ')'}"
