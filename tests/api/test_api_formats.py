"""Output formats, end to end: the same query gives the same numbers in JSON, GeoJSON, Arrow
and CSV (read back with pyarrow and the csv module), and GeoJSON outlines are valid.

GeoJSON checks: shapely ``is_valid``; exterior rings counter-clockwise and every longitude
within [-180, 180] (RFC 7946 §3.1.6 and §3.1.9); each outline's geodesic area from
pyproj.Geod against ``zone_area`` to 0.1 %.
"""

from __future__ import annotations

import csv
import io

import httpx
import numpy as np
import pyarrow as pa
import pytest
import shapely
from pyproj import Geod
from shapely.geometry import shape

from alveary import grid

GEOD = Geod(ellps="WGS84")
QUERIES = [
    ("get", "/cubes/analytic/disk", {"lat": 45.2, "lon": 7.6, "k": 2, "datetime": "../.."}, None),
    ("get", "/cubes/analytic/radius", {"lat": 44.9, "lon": 7.6, "meters": 40_000}, None),
    ("get", "/cubes/analytic/bbox", {"bbox": "179,-3,-179,3", "datetime": "2024-05-02/.."}, None),
    (
        "post",
        "/cubes/analytic/points",
        {"vars": "rain"},
        {"lat": [44.0, 45.0, 45.0, -10.0], "lon": [7.0, 7.5, 7.5, 100.0]},
    ),
]


@pytest.fixture(scope="module")
def http(service):
    with httpx.Client(base_url=service.url, timeout=30) as client:
        yield client


def fetch(http, method, path, params, body, fmt=None, accept=None):
    params = dict(params)
    if fmt:
        params["f"] = fmt
    headers = {"Accept": accept} if accept else {}
    if method == "get":
        r = http.get(path, params=params, headers=headers)
    else:
        r = http.post(path, params=params, json=body, headers=headers)
    assert r.status_code == 200, r.text
    return r


def long_form_from_json(body):
    """(zone, time, var) -> value, plus the per-zone extras, from a JSON answer."""
    out = {}
    for row in body["zones"]:
        for var, series in row["values"].items():
            for t, v in zip(body["times"], series, strict=True):
                out[(row["zone"], t, var, row.get("point"))] = v
    return out


@pytest.mark.parametrize(("method", "path", "params", "body"), QUERIES)
def test_same_numbers_in_every_format(http, method, path, params, body):
    js = fetch(http, method, path, params, body).json()
    expected = long_form_from_json(js)
    variables = list(js["variables"])
    assert expected

    # Arrow IPC stream, read by pyarrow (the reference reader).
    r = fetch(http, method, path, params, body, accept="application/vnd.apache.arrow.stream")
    assert r.headers["content-type"] == "application/vnd.apache.arrow.stream"
    table = pa.ipc.open_stream(r.content).read_all()
    assert table.column_names[:2] == ["zone", "time"]
    assert table.schema.field("zone").type == pa.uint64()
    assert pa.types.is_timestamp(table.schema.field("time").type)
    assert table.column_names[2 : 2 + len(variables)] == variables
    meta = table.schema.metadata
    assert b"units" in meta
    for var in variables:
        assert table.schema.field(var).metadata[b"units"].decode() == js["variables"][var]["units"]
    got = {}
    rows = table.to_pylist()
    for row in rows:
        t = row["time"].strftime("%Y-%m-%dT%H:%M:%SZ")
        for var in variables:
            got[(row["zone"], t, var, row.get("point"))] = row[var]
    assert got == expected
    if "steps" in js["zones"][0]:
        assert "steps" in table.column_names
    if "distance_m" in js["zones"][0]:
        by_zone = {z["zone"]: z["distance_m"] for z in js["zones"]}
        assert all(by_zone[r["zone"]] == r["distance_m"] for r in rows)

    # CSV, read by the csv module: empty fields are missing data.
    r = fetch(http, method, path, params, body, fmt="csv")
    assert r.headers["content-type"].startswith("text/csv")
    reader = csv.DictReader(io.StringIO(r.text))
    got = {}
    for row in reader:
        point = int(row["point"]) if "point" in row else None
        for var in variables:
            got[(int(row["zone"]), row["time"], var, point)] = float(row[var]) if row[var] else None
    assert got == expected  # floats round-trip exactly through the text

    # GeoJSON: properties carry the same series.
    gj = fetch(http, method, path, params, body, fmt="geojson").json()
    assert gj["type"] == "FeatureCollection"
    got = {}
    for feature in gj["features"]:
        props = feature["properties"]
        for var in variables:
            for t, v in zip(gj["times"], props[var], strict=True):
                got[(props["zone"], t, var, props.get("point"))] = v
    assert got == expected


def rings(geometry):
    polys = (
        geometry["coordinates"] if geometry["type"] == "MultiPolygon" else [geometry["coordinates"]]
    )
    return polys


def check_outline(geometry, level, pentagon=False):
    geom = shape(geometry)
    assert geom.is_valid, shapely.is_valid_reason(geom)  # shapely
    for poly in rings(geometry):
        exterior = shapely.LinearRing(poly[0])
        assert exterior.is_ccw  # RFC 7946 §3.1.6: exterior rings counter-clockwise
        assert poly[0][0] == poly[0][-1]
        assert all(-180 <= x <= 180 and -90 <= y <= 90 for x, y in poly[0])
    area = abs(GEOD.geometry_area_perimeter(geom)[0])  # pyproj.Geod, WGS84
    expected = grid.zone_area(level) * (5 / 6 if pentagon else 1)
    assert area == pytest.approx(expected, rel=1e-3)


def test_geojson_outlines_are_valid(http):
    gj = http.get(
        "/cubes/analytic/disk", params={"lat": 45.2, "lon": 7.6, "k": 3, "f": "geojson"}
    ).json()
    assert len(gj["features"]) == 37
    for feature in gj["features"]:
        assert feature["geometry"]["type"] == "Polygon"
        check_outline(feature["geometry"], 7)


def test_geojson_antimeridian_zones_are_multipolygons(http):
    gj = http.get(
        "/cubes/analytic/bbox", params={"bbox": "179.5,-2,-179.5,2", "f": "geojson"}
    ).json()
    kinds = {f["geometry"]["type"] for f in gj["features"]}
    assert "MultiPolygon" in kinds  # zones straddling ±180° are cut (RFC 7946 §3.1.9)
    for feature in gj["features"]:
        check_outline(feature["geometry"], 7)


@pytest.mark.parametrize("lat", [90.0, -90.0])
def test_zone_at_a_pole_and_pentagons(http, lat):
    body = http.get("/zones", params={"lat": lat, "lon": 0, "level": 3, "f": "geojson"}).json()
    check_outline(body["geometry"], 3, body["properties"]["pentagon"])
    for zone in grid.zone_from_text(["5n", "5s"]):
        info = http.get(f"/zones/{int(zone)}").json()
        assert info["pentagon"] is True and len(info["neighbours"]) == 5
        check_outline(info["geometry"], 5, pentagon=True)


def test_stats_in_every_format(http):
    params = {"bbox": "7,45,8,46", "stats": "mean,count", "datetime": "../.."}
    js = http.get("/cubes/analytic/bbox", params=params).json()
    table = pa.ipc.open_stream(
        http.get("/cubes/analytic/bbox", params={**params, "f": "arrow"}).content
    ).read_all()
    temp = table.filter(pa.compute.equal(table["variable"], "temp"))
    np.testing.assert_array_equal(temp["mean"].to_numpy(), js["stats"]["temp"]["mean"])
    assert temp["count"].to_pylist() == js["stats"]["temp"]["count"]
    text = http.get("/cubes/analytic/bbox", params={**params, "f": "csv"}).text
    rows = [r for r in csv.DictReader(io.StringIO(text)) if r["variable"] == "temp"]
    assert [float(r["mean"]) for r in rows] == js["stats"]["temp"]["mean"]
    gj = http.get("/cubes/analytic/bbox", params={**params, "f": "geojson"}).json()
    assert gj["type"] == "Feature" and gj["properties"]["stats"] == js["stats"]
    assert shape(gj["geometry"]).is_valid
