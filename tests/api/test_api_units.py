"""Display symbols for UDUNITS-2 / CF units strings.

Judges: the expected symbols are written out by hand for units as they appear in the CF
standard name table (canonical units) and in common CF datasets, following the SI
brochure's notation (superscript exponents, a half-high dot for products, a solidus for
division, "°C" for degree Celsius); then a re-reading of each symbol into exponents must
give back the exponents of the original string.
"""

from __future__ import annotations

import re

import pytest

from alveary.api._units import unit_symbol

CASES = [
    # CF standard name table canonical units
    ("K", "K"),
    ("1", "1"),
    ("m", "m"),
    ("Pa", "Pa"),
    ("m s-1", "m/s"),
    ("m s-2", "m/s²"),
    ("kg m-2", "kg/m²"),
    ("kg m-2 s-1", "kg/(m²·s)"),
    ("kg m-3", "kg/m³"),
    ("W m-2", "W/m²"),
    ("W m-2 sr-1", "W/(m²·sr)"),
    ("m2 s-1", "m²/s"),
    ("m3 m-3", "m³/m³"),
    ("kg kg-1", "kg/kg"),
    ("mol m-3", "mol/m³"),
    ("mol mol-1", "mol/mol"),
    ("J kg-1 K-1", "J/(kg·K)"),
    ("K s-1", "K/s"),
    ("Pa s-1", "Pa/s"),
    ("s-1", "s⁻¹"),
    ("m-1", "m⁻¹"),
    ("degree", "°"),
    ("degrees_north", "°N"),
    ("degrees_east", "°E"),
    ("1e-3", "10⁻³"),
    # common in datasets
    ("degC", "°C"),
    ("degree_Celsius", "°C"),
    ("celsius", "°C"),
    ("%", "%"),
    ("percent", "%"),
    ("mm", "mm"),
    ("mm day-1", "mm/d"),
    ("mm/day", "mm/d"),
    ("mm h-1", "mm/h"),
    ("mm/hr", "mm/h"),
    ("hPa", "hPa"),
    ("km h-1", "km/h"),
    ("W/m2", "W/m²"),
    ("W/m^2", "W/m²"),
    ("kg m**-2", "kg/m²"),
    ("m.s-1", "m/s"),
    ("m2.s-1", "m²/s"),
    ("ug m-3", "µg/m³"),
    ("umol m-2 s-1", "µmol/(m²·s)"),
    ("W m-2 um-1", "W/(m²·µm)"),
    ("kg/m2/s", "kg/(m²·s)"),
    ("meters", "m"),
    ("kelvin", "K"),
    ("", ""),
]


@pytest.mark.parametrize(("units", "symbol"), CASES)
def test_symbols(units, symbol):
    assert unit_symbol(units) == symbol


@pytest.mark.parametrize(
    "units",
    ["days since 1970-01-01", "K @ 273.15", "(m s-1)2", "psu", "dBZ", "count", "m0"],
)
def test_outside_the_grammar_is_given_back(units):
    assert unit_symbol(units) == units


def test_none():
    assert unit_symbol(None) == ""


_SUPER = str.maketrans("⁰¹²³⁴⁵⁶⁷⁸⁹⁻", "0123456789-")


def _exponents_of_symbol(symbol):
    """Read a display symbol back: factor -> exponent (a slash negates what follows)."""
    top, _, bottom = symbol.partition("/")
    out = {}
    for part, sign in ((top, 1), (bottom.strip("()"), -1)):
        for factor in filter(None, part.split("·")):
            m = re.fullmatch(r"([^⁰¹²³⁴⁵⁶⁷⁸⁹⁻]+)([⁰¹²³⁴⁵⁶⁷⁸⁹⁻]*)", factor)
            exp = int(m.group(2).translate(_SUPER) or 1)
            out[m.group(1)] = out.get(m.group(1), 0) + sign * exp
    return out


def _exponents_of_udunits(units):
    """The same from a plain UDUNITS product 'a b2 c-1' (names as the table maps them)."""
    out = {}
    for token in units.split():
        m = re.fullmatch(r"([A-Za-z]+)(-?\d+)?", token)
        out[m.group(1)] = out.get(m.group(1), 0) + int(m.group(2) or 1)
    return out


# Products written as 'a b2 c-1' whose names the table keeps (day -> d, um -> µm are
# renamed and left out of this round trip).
PRODUCTS = [
    u
    for u, _ in CASES
    if re.fullmatch(r"[A-Za-z]+-?\d*( [A-Za-z]+-?\d*)+|[A-Za-z]+-?\d+", u)
    and not any(name in u for name in ("day", "um", "ug"))
]


@pytest.mark.parametrize("units", PRODUCTS)
def test_symbol_keeps_every_exponent(units):
    assert _exponents_of_symbol(unit_symbol(units)) == _exponents_of_udunits(units)


def test_round_trip_covers_the_products():
    assert len(PRODUCTS) >= 15
