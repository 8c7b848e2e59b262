"""The EDR query parameters parameter-name (and its alias), within/within-units, crs, z.

Judges: the international yard and pound agreement (1959: 1 yd = 0.9144 m, so a mile of
1760 yd is 1609.344 m), the half-circumference of the equator for the largest radius,
PROJ (through pyproj) for which CRS strings name CRS84, and OGC 19-086r6's rules
(/req/queries/radius F-I: within and within-units required; parameter-name a comma list).
"""

from __future__ import annotations

import pyproj
import pytest

from alveary import InvalidInput
from alveary.query._edr_params import (
    CRS84,
    CRS84_NAMES,
    WITHIN_UNITS,
    check_crs,
    check_z,
    parse_parameter_names,
    within_metres,
)


def test_parameter_names_and_alias():
    assert parse_parameter_names("a,b, a") == ("a", "b")
    assert parse_parameter_names(None, "a,b") == ("a", "b")  # the alias a Python client sends
    with pytest.raises(InvalidInput) as info:  # the two must not disagree
        parse_parameter_names("a,b", "c")
    assert info.value.parameter == "parameter_names"
    assert parse_parameter_names("a,b", "a,b") == ("a", "b")
    assert parse_parameter_names(None, None) is None


@pytest.mark.parametrize("text", ["", ",", "a,,b", " "])
def test_parameter_names_empty_items(text):
    with pytest.raises(InvalidInput) as info:
        parse_parameter_names(text)
    assert info.value.parameter == "parameter-name"


@pytest.mark.parametrize(
    ("within", "units", "metres"),
    [
        ("250", "m", 250.0),
        (2.5, "km", 2500.0),
        ("1", "mi", 1760 * 0.9144),  # 1959 international mile
        ("3", "KM", 3000.0),
        ("2", "miles", 2 * 1760 * 0.9144),
        ("0", "m", 0.0),
        ("1e3", "metres", 1000.0),
    ],
)
def test_within_in_metres(within, units, metres):
    assert within_metres(within, units) == pytest.approx(metres, rel=1e-15)


def test_within_units_offered():
    assert list(WITHIN_UNITS) == ["m", "km", "mi"]


@pytest.mark.parametrize(
    ("within", "units", "parameter"),
    [
        (None, "km", "within"),
        ("", "km", "within"),
        ("5", None, "within-units"),
        ("5", "", "within-units"),
        ("5", "furlong", "within-units"),
        ("five", "km", "within"),
        ("-1", "km", "within"),
        ("nan", "m", "within"),
        ("inf", "m", "within"),
        ("20037.6", "km", "within"),  # farther than half the equator (20 037.509 km)
    ],
)
def test_within_refused(within, units, parameter):
    with pytest.raises(InvalidInput) as info:
        within_metres(within, units)
    assert info.value.parameter == parameter


def test_largest_radius_is_half_the_equator():
    # Half the WGS84 equator, pi * a with a = 6 378 137 m.
    half = pyproj.Geod(ellps="WGS84").a * 3.141592653589793
    assert within_metres(str(half / 1000 - 0.001), "km") < half
    with pytest.raises(InvalidInput):
        within_metres(str(half + 1), "m")


@pytest.mark.parametrize("name", CRS84_NAMES)
def test_crs84_spellings_are_crs84_for_proj(name):
    check_crs(name)
    check_crs(name.lower())
    # PROJ reads the URIs and the register:code forms; "CRS84" alone is the short name
    # EDR's crs_details use, and "[OGC:CRS84]" the safe-CURIE form of OGC API.
    text = name.strip("[]")
    text = f"OGC:{text}" if ":" not in text else text
    reference = pyproj.CRS.from_user_input("OGC:CRS84")
    assert pyproj.CRS.from_user_input(text) == reference
    assert [a.direction for a in reference.axis_info] == ["east", "north"]  # lon, lat


@pytest.mark.parametrize(
    "name", ["EPSG:4326", "EPSG:3857", "http://www.opengis.net/def/crs/EPSG/0/4326", "x"]
)
def test_other_crs_refused(name):
    # EPSG:4326 is latitude first for PROJ: not the axis order coords and answers use.
    with pytest.raises(InvalidInput) as info:
        check_crs(name)
    assert info.value.parameter == "crs"
    assert CRS84 in info.value.allowed


def test_epsg_4326_differs_from_crs84_in_axis_order():
    epsg = pyproj.CRS.from_user_input("EPSG:4326")
    assert [a.direction for a in epsg.axis_info] == ["north", "east"]


def test_z_refused_none_accepted():
    check_z(None)
    for value in ("850", "2/100", "R20/100/50", ""):
        with pytest.raises(InvalidInput) as info:
            check_z(value)
        assert info.value.parameter == "z"
