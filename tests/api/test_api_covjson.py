"""CoverageJSON answers (OGC 21-069r2) built from columnar results.

Judges: ``covjson-pydantic`` (KNMI's models of the CoverageJSON specification) validates
every document; the ranges' shapes are checked against the domain's axes as the
specification's NdArray rules state; values are compared with the analytic field
evaluated by the test at the coordinates the document itself states; the area mean with
the field's mean over the box, integrated in closed form; distances with pyproj.Geod;
time bounds with calendar arithmetic.
"""

from __future__ import annotations

import math

import numpy as np
import orjson
import pytest
from covjson_pydantic.coverage import Coverage
from covjson_pydantic.domain import DomainType
from pyproj import Geod

from alveary import grid
from alveary.api._covjson import (
    COVJSON,
    COVJSON_LEGACY,
    PREFIX,
    covjson_media_type,
    encode_covjson,
    has_data,
    multi_point_series,
    point_series,
    polygon_series,
    to_coverage,
    unit_object,
)
from alveary.cube import VariableInfo as CubeVariable
from alveary.query import ResultVariable, StatsResult, ZoneResult
from support.analytic import field, rain

LEVEL = 9
AXIS = np.datetime64("2024-05-01T00:00:00", "s") + np.arange(8) * np.timedelta64(1, "D")
VARIABLES = {
    "temp": CubeVariable("temp", units="K", long_name="analytic temperature"),
    "rain": ResultVariable("rain", "mm day-1", "analytic rain with gaps"),
}
BOX = (6.0, 44.0, 8.0, 46.0)  # west, south, east, north; rain is missing south of 44.8


def _days(times):
    return ((times - AXIS[0]) / np.timedelta64(1, "D")).astype(float)


def _values(zones, times):
    """The cube's stored values: the field at the zone centres (grid.zone_to_point)."""
    lat, lon = grid.zone_to_point(zones)
    d = _days(times)[:, None]
    return {
        "temp": field(lat[None, :], lon[None, :], d),
        "rain": rain(lat[None, :], lon[None, :], d),
    }


def _result(zones, times, kind, extra=None):
    zones = np.asarray(zones, dtype=np.uint64)
    return ZoneResult(
        "analytic", "v7", LEVEL, VARIABLES, times, zones, _values(zones, times), extra or {}, kind
    )


def _validated(result, **kwargs):
    """Encode, check the media-independent rules, validate with covjson-pydantic."""
    body = encode_covjson(result, **kwargs)
    doc = orjson.loads(body)
    Coverage.model_validate_json(body)  # raises on any violation of the models
    _check_shapes(doc)
    return doc


def _axis_length(axis):
    return axis["num"] if "num" in axis else len(axis["values"])


def _check_shapes(doc):
    """OGC 21-069r2 §7.2/§7.4: every range's shape and axisNames match the domain's axes;
    axes left out of axisNames have one value; values has prod(shape) elements."""
    axes = doc["domain"]["axes"]
    assert set(doc["ranges"]) == set(doc["parameters"])
    for name, nd in doc["ranges"].items():
        assert nd["type"] == "NdArray", name
        assert set(nd["axisNames"]) <= set(axes)
        assert nd["shape"] == [_axis_length(axes[a]) for a in nd["axisNames"]]
        assert len(nd["values"]) == math.prod(nd["shape"])
        for a in set(axes) - set(nd["axisNames"]):
            assert _axis_length(axes[a]) == 1, (name, a)
        kind = int if nd["dataType"] == "integer" else float
        assert all(v is None or isinstance(v, kind) for v in nd["values"])
    t = axes["t"]
    assert len(t["bounds"]) == 2 * len(t["values"])
    assert t["bounds"][0::2] == t["values"]


def _field_at(doc, x, y):
    """The field evaluated by the test at the document's positions and times."""
    times = np.array(
        [v.rstrip("Z") for v in doc["domain"]["axes"]["t"]["values"]], dtype="datetime64[s]"
    )
    d = _days(times)[:, None]
    y, x = np.asarray(y, dtype=float)[None, :], np.asarray(x, dtype=float)[None, :]
    return field(y, x, d), rain(y, x, d)


def _range(doc, name):
    nd = doc["ranges"][name]
    return np.array([np.nan if v is None else v for v in nd["values"]]).reshape(nd["shape"])


def test_point_series_at_the_zone_centre():
    zone = grid.point_to_zone(45.3, 7.2, LEVEL).reshape(1)
    result = _result(zone, AXIS[2:6], "point")
    doc = _validated(result, time_axis=AXIS)
    domain = doc["domain"]
    assert domain["domainType"] == "PointSeries"
    x, y = domain["axes"]["x"]["values"], domain["axes"]["y"]["values"]
    lat, lon = grid.zone_to_point(zone)
    assert (x, y) == ([float(lon[0])], [float(lat[0])])  # the centre, not the point asked
    assert (x[0], y[0]) != (7.2, 45.3)
    temp, wet = _field_at(doc, x, y)
    np.testing.assert_allclose(_range(doc, "temp"), temp[:, 0], rtol=1e-15)
    np.testing.assert_allclose(_range(doc, "rain"), wet[:, 0], rtol=1e-15)
    assert doc["ranges"]["temp"]["axisNames"] == ["t"]
    assert domain[f"{PREFIX}:zone"] == [int(zone[0])]
    assert domain[f"{PREFIX}:zone_text"] == grid.zone_to_text(zone).tolist()
    assert (doc[f"{PREFIX}:cube"], doc[f"{PREFIX}:version"], doc[f"{PREFIX}:level"]) == (
        "analytic",
        "v7",
        LEVEL,
    )
    assert Coverage.model_validate(doc).domain.domainType == DomainType.point_series


def test_time_bounds_follow_the_cube_axis():
    zone = grid.point_to_zone(45.3, 7.2, LEVEL).reshape(1)
    # One step from the middle: it stands until the next step of the cube, a day later.
    doc = _validated(_result(zone, AXIS[3:4], "point"), time_axis=AXIS)
    assert doc["domain"]["axes"]["t"]["bounds"] == ["2024-05-04T00:00:00Z", "2024-05-05T00:00:00Z"]
    # The last step stands as long as the one before it.
    doc = _validated(_result(zone, AXIS[-1:], "point"), time_axis=AXIS)
    assert doc["domain"]["axes"]["t"]["bounds"] == ["2024-05-08T00:00:00Z", "2024-05-09T00:00:00Z"]
    # A monthly cube: the last step, December, ends with the calendar month.
    months = np.array(["2023-11-01", "2023-12-01"], dtype="datetime64[s]")
    monthly = ZoneResult(
        "m",
        "v",
        LEVEL,
        {"temp": VARIABLES["temp"]},
        months[1:],
        zone,
        {"temp": np.array([[1.0]])},
        {},
        "point",
    )
    doc = _validated(monthly, time_axis=months)
    assert doc["domain"]["axes"]["t"]["bounds"] == ["2023-12-01T00:00:00Z", "2024-01-01T00:00:00Z"]


def _check_multipoint(doc, zones):
    domain = doc["domain"]
    assert domain["domainType"] == "MultiPointSeries"
    composite = domain["axes"]["composite"]
    assert composite["dataType"] == "tuple" and composite["coordinates"] == ["x", "y"]
    x, y = np.array(composite["values"]).T
    lat, lon = grid.zone_to_point(np.asarray(zones, dtype=np.uint64))
    np.testing.assert_array_equal(x, lon)
    np.testing.assert_array_equal(y, lat)
    assert domain[f"{PREFIX}:zone"] == [int(z) for z in zones]
    temp, wet = _field_at(doc, x, y)
    np.testing.assert_allclose(_range(doc, "temp"), temp, rtol=1e-15)
    np.testing.assert_allclose(_range(doc, "rain"), wet, rtol=1e-15)
    # Missing data is null exactly where the field has none (south of 44.8°).
    nulls = np.array([v is None for v in doc["ranges"]["rain"]["values"]]).reshape(wet.shape)
    np.testing.assert_array_equal(nulls, np.isnan(wet))
    assert doc["ranges"]["temp"]["axisNames"] == ["t", "composite"]


def test_radius_as_multipoint_series_with_distances():
    lat0, lon0, metres = 44.8, 7.0, 40_000.0
    zones = grid.zones_in_radius(lat0, lon0, metres, LEVEL)
    lat, lon = grid.zone_to_point(zones)
    _, _, dist = Geod(ellps="WGS84").inv(np.full(lat.size, lon0), np.full(lat.size, lat0), lon, lat)
    order = np.argsort(dist, kind="stable")
    zones, dist = zones[order], dist[order]
    result = _result(zones, AXIS[:3], "radius", {"distance_m": dist})
    doc = _validated(result, time_axis=AXIS)
    _check_multipoint(doc, zones)
    assert zones.size > 20 and np.isnan(_range(doc, "rain")).any()  # some rows are missing
    np.testing.assert_allclose(doc["domain"][f"{PREFIX}:distance_m"], dist, rtol=1e-15)
    assert max(doc["domain"][f"{PREFIX}:distance_m"]) <= metres


def test_cube_query_as_multipoint_series():
    zones = grid.zones_in_bbox(*BOX, LEVEL)
    doc = _validated(_result(zones, AXIS, "bbox"), time_axis=AXIS)
    _check_multipoint(doc, zones)
    assert doc["ranges"]["temp"]["shape"] == [AXIS.size, zones.size]


def test_multipoint_position_keeps_one_row_per_point():
    lat = np.array([45.3, 45.30001, 44.1])  # the first two fall in one zone
    lon = np.array([7.2, 7.2, 6.5])
    zones = grid.point_to_zone(lat, lon, LEVEL)
    assert zones[0] == zones[1]
    doc = _validated(_result(zones, AXIS[:2], "points", {"point": np.arange(3)}), time_axis=AXIS)
    _check_multipoint(doc, zones)
    assert doc["domain"][f"{PREFIX}:point"] == [0, 1, 2]


def test_area_statistics_as_polygon_series():
    west, south, east, north = BOX
    ring = [[west, south], [east, south], [east, north], [west, north], [west, south]]
    polygon = {"type": "Polygon", "coordinates": [ring]}
    zones = grid.zones_in_polygon(polygon, LEVEL)
    values = _values(zones, AXIS)
    # Statistics by numpy over the zone values (the grid is equal-area: plain means).
    stats = {
        v: {
            "mean": np.nanmean(a, axis=1),
            "count": (~np.isnan(a)).sum(axis=1).astype(float),
            "max": np.nanmax(a, axis=1),
            "area_m2": (~np.isnan(a)).sum(axis=1) * grid.zone_area(LEVEL),
        }
        for v, a in values.items()
    }
    result = StatsResult(
        "analytic",
        "v7",
        LEVEL,
        VARIABLES,
        AXIS,
        int(zones.size),
        zones.size * grid.zone_area(LEVEL),
        ("mean", "count", "max"),
        stats,
    )
    doc = _validated(result, geometry=polygon, time_axis=AXIS)
    domain = doc["domain"]
    assert domain["domainType"] == "PolygonSeries"
    assert domain["axes"]["composite"]["values"] == [[[[float(a), float(b)] for a, b in ring]]]
    assert set(doc["parameters"]) == {
        f"{v}_{s}" for v in VARIABLES for s in ("mean", "count", "max", "area_m2")
    }
    for v in VARIABLES:
        np.testing.assert_allclose(_range(doc, f"{v}_mean"), stats[v]["mean"], rtol=1e-15)
        assert doc["ranges"][f"{v}_count"]["dataType"] == "integer"
        assert doc["ranges"][f"{v}_count"]["values"] == stats[v]["count"].astype(int).tolist()
    groups = {g["observedProperty"]["id"]: g["members"] for g in doc["parameterGroups"]}
    assert groups["temp"] == ["temp_mean", "temp_count", "temp_max", "temp_area_m2"]
    assert doc[f"{PREFIX}:zone_count"] == zones.size
    # The area mean of f over the box on the sphere, in closed form: cos-weighted in
    # latitude, plain in longitude, against the mean over zone centres.
    p0, p1 = np.radians(south), np.radians(north)
    l0, l1 = np.radians(west), np.radians(east)
    cos_mean = ((p1 - p0) / 2 + (np.sin(2 * p1) - np.sin(2 * p0)) / 4) / (np.sin(p1) - np.sin(p0))
    sin_mean = (np.cos(2 * l0) - np.cos(2 * l1)) / (2 * (l1 - l0))
    analytic = 280.0 + 10.0 * cos_mean + 3.0 * sin_mean + 0.5 * _days(AXIS)
    # Zone centres sample the box to 6e-4 here, against a spread of f of 0.09.
    np.testing.assert_allclose(_range(doc, "temp_mean"), analytic, atol=0.003)


def test_polygon_series_needs_one_polygon():
    result = StatsResult(
        "a",
        "v",
        LEVEL,
        VARIABLES,
        AXIS[:1],
        1,
        1.0,
        ("mean",),
        {v: {"mean": np.ones(1), "area_m2": np.ones(1)} for v in VARIABLES},
    )
    square = [[[0, 0], [1, 0], [1, 1], [0, 0]]]
    with pytest.raises(ValueError, match="one Polygon"):
        polygon_series(result, {"type": "MultiPolygon", "coordinates": [square, square]})
    with pytest.raises(ValueError, match="polygon"):
        to_coverage(result)
    doc = _validated(result, geometry={"type": "Polygon", "coordinates": square})
    assert doc["domain"]["domainType"] == "PolygonSeries"


def test_parameters_carry_observed_property_and_units():
    zone = grid.point_to_zone(45.3, 7.2, LEVEL).reshape(1)
    variables = {
        "sm": CubeVariable(
            "sm",
            units="m3 m-3",
            long_name="Root-zone soil moisture",
            standard_name="mass_content_of_water_in_soil_layer",
        ),
        "flag": ResultVariable("flag", "", ""),
    }
    result = ZoneResult(
        "c",
        "v",
        LEVEL,
        variables,
        AXIS[:1],
        zone,
        {"sm": np.array([[0.3]]), "flag": np.array([[1.0]])},
        {},
        "point",
    )
    doc = _validated(result)
    sm = doc["parameters"]["sm"]
    assert sm["observedProperty"] == {
        "id": "http://vocab.nerc.ac.uk/standard_name/mass_content_of_water_in_soil_layer/",
        "label": {"en": "Root-zone soil moisture"},
    }
    assert sm["unit"] == {"label": {"en": "m3 m-3"}, "symbol": "m³/m³"}
    flag = doc["parameters"]["flag"]
    assert "unit" not in flag and flag["observedProperty"]["label"] == {"en": "flag"}


def test_no_data_is_not_encoded():
    zone = grid.point_to_zone(45.3, 7.2, LEVEL).reshape(1)
    empty_time = _result(zone, AXIS[:0], "point")
    empty_zones = _result(np.zeros(0, dtype=np.uint64), AXIS, "radius")
    all_missing = ZoneResult(
        "a",
        "v",
        LEVEL,
        {"rain": VARIABLES["rain"]},
        AXIS[:2],
        zone,
        {"rain": np.full((2, 1), np.nan)},
        {},
        "point",
    )
    for result in (empty_time, empty_zones, all_missing):
        assert not has_data(result)
        with pytest.raises(ValueError, match="204"):
            encode_covjson(result)
    assert has_data(_result(zone, AXIS[:1], "point"))
    no_area = StatsResult(
        "a",
        "v",
        LEVEL,
        VARIABLES,
        AXIS[:1],
        0,
        0.0,
        ("mean",),
        {v: {"mean": np.full(1, np.nan), "area_m2": np.zeros(1)} for v in VARIABLES},
    )
    assert not has_data(no_area)


def test_dispatch_by_answer():
    zone = grid.point_to_zone(45.3, 7.2, LEVEL).reshape(1)
    assert to_coverage(_result(zone, AXIS[:1], "point"))["domain"]["domainType"] == "PointSeries"
    # A one-zone radius answer is still a MultiPointSeries (one row of zones).
    one = to_coverage(_result(zone, AXIS[:1], "radius", {"distance_m": np.zeros(1)}))
    assert one["domain"]["domainType"] == "MultiPointSeries"
    with pytest.raises(ValueError, match="one zone"):
        point_series(_result(np.repeat(zone, 2), AXIS[:1], "points"))
    assert multi_point_series(_result(zone, AXIS[:1], "point"))["domain"]["axes"]["composite"]


def test_media_types():
    assert COVJSON == "application/vnd.cov+json"  # OGC 21-069r2 §8
    assert COVJSON_LEGACY == "application/prs.coverage+json"  # OGC 19-086r6 /req/covjson
    assert covjson_media_type(None) == COVJSON
    assert covjson_media_type("*/*") == COVJSON
    assert covjson_media_type("application/prs.coverage+json") == COVJSON_LEGACY
    assert covjson_media_type("application/prs.coverage+json;q=0") == COVJSON
    assert covjson_media_type(f"{COVJSON};q=0.2, {COVJSON_LEGACY};q=0.8") == COVJSON_LEGACY


def test_unit_object_forms():
    assert unit_object("") is None and unit_object("   ") is None
    assert unit_object("W m-2") == {"label": {"en": "W m-2"}, "symbol": "W/m²"}
    assert unit_object("W m-2", i18n=False) == {"label": "W m-2", "symbol": "W/m²"}
