"""OGC API - EDR on a live service: a real ``alveary serve`` (uvicorn) process serving the
analytic cube from the S3-protocol test server, asked by a real EDR client.

Judges, each named beside its check:
- OWSLib's ``EnvironmentalDataRetrieval`` (a widely used OGC API client) asks every
  question: ``conformance()``, ``collections()``, ``collection(id)`` and
  ``query_data(id, "position" | "radius" | "area" | "cube", ...)``;
- the native API's answers for the same places and times (same zones, same numbers);
- ``edr-pydantic`` (KNMI's EDR 1.1 models, extra members refused) for the landing page,
  conformance and collection documents; ``covjson-pydantic`` and the specification's
  NdArray shape rules for every CoverageJSON answer (``support.covjson_checks``);
- the analytic field (``support.analytic.field``) evaluated here at the zone centres the
  answers state, and its area mean over a box integrated here on the WGS84 ellipsoid;
- pyarrow for Arrow answers, the S3 server's own request log for the chunk GETs.
"""

from __future__ import annotations

import io

import httpx
import numpy as np
import openapi_spec_validator
import orjson
import pyarrow as pa
import pytest
from edr_pydantic.capabilities import ConformanceModel, LandingPageModel
from edr_pydantic.collections import Collection, Collections
from owslib.ogcapi.edr import EnvironmentalDataRetrieval

from alveary import grid
from alveary.api._edr_docs import CONFORMANCE
from support.analytic import NTIMES, TIMES, build_cube, field, rain
from support.covjson_checks import checked_coverage, range_array
from support.server import ServiceProcess

pytestmark = pytest.mark.server

CUBE = "analytic"
ALL = "../.."
WEEK = "2024-05-02T00:00:00Z/2024-05-04T00:00:00Z"
COVJSON = "application/vnd.cov+json"


@pytest.fixture(scope="module")
def http(service):
    with httpx.Client(base_url=service.url, timeout=30) as client:
        yield client


@pytest.fixture(scope="module")
def edr(service):
    """OWSLib's EDR client on the live service (it reads the landing page first)."""
    return EnvironmentalDataRetrieval(service.url, timeout=30)


def covjson(doc):
    """A document as OWSLib returns it (parsed JSON), validated and shape-checked."""
    return checked_coverage(orjson.dumps(doc))


def native_rows(body, var):
    """zones, lat, lon and values (zone, time) of a native JSON answer."""
    rows = body["zones"]
    zones = np.array([r["zone"] for r in rows], dtype=np.uint64)
    lat = np.array([r["lat"] for r in rows])
    lon = np.array([r["lon"] for r in rows])
    values = np.array([[np.nan if v is None else v for v in r["values"][var]] for r in rows])
    return zones, lat, lon, values


def days_of(doc):
    times = np.array([t.rstrip("Z") for t in doc["domain"]["axes"]["t"]["values"]], "M8[s]")
    return ((times - TIMES[0]) / np.timedelta64(1, "D")).astype(float)


def composite(doc):
    xy = np.array(doc["domain"]["axes"]["composite"]["values"], dtype=float)
    return xy[:, 0], xy[:, 1]


# --- documents ------------------------------------------------------------------------


def test_landing_page(http, edr, service):
    r = http.get("/")
    LandingPageModel.model_validate_json(r.content)  # edr-pydantic: no extra members
    rels = {}
    for link in r.json()["links"]:
        rels.setdefault(link["rel"], []).append(link["href"].removeprefix(service.url))
    # Links are absolute, built from the request's base URL.
    assert all(link["href"].startswith(service.url + "/") for link in r.json()["links"])
    # OGC 19-086r6 /req/core/root-success: service-desc/-doc, conformance, data.
    assert rels["service-desc"] == ["/openapi.json", "/openapi-3.0.json"]
    assert rels["service-doc"] == ["/docs"]
    assert rels["conformance"] == ["/conformance"]
    assert rels["data"][0] == "/collections" and "/cubes" in rels["data"]
    assert {link["rel"] for link in edr.links} == set(rels)  # what OWSLib read
    for href in ("/openapi.json", "/openapi-3.0.json", "/docs", "/conformance", "/cubes"):
        assert http.get(href).status_code == 200, href


def test_conformance(edr):
    doc = edr.conformance()  # OWSLib
    ConformanceModel.model_validate_json(orjson.dumps(doc))
    assert doc["conformsTo"] == list(CONFORMANCE)


def test_collections_and_collection(edr, http):
    docs = edr.collections()  # OWSLib
    Collections.model_validate_json(orjson.dumps(docs))  # edr-pydantic
    assert [c["id"] for c in docs["collections"]] == [CUBE]
    assert edr.data() == [CUBE]  # OWSLib's filter of collections that offer data
    doc = edr.collection(CUBE)
    Collection.model_validate_json(orjson.dumps(doc))
    assert doc == docs["collections"][0]
    native = http.get(f"/cubes/{CUBE}").json()
    assert doc["title"] == native["title"]
    assert set(doc["parameter_names"]) == set(native["variables"])
    for name, meta in native["variables"].items():
        p = doc["parameter_names"][name]
        assert p["observedProperty"]["label"] == meta["long_name"]
        assert p["unit"]["label"] == meta["units"]
    assert doc["extent"]["spatial"]["bbox"] == [native["coverage"]]
    interval = doc["extent"]["temporal"]["interval"][0]
    assert interval[0] == native["time"]["start"]
    assert interval[1] == "2024-05-07T00:00:00Z"  # the daily axis's last step ends a day on
    for query in ("position", "radius", "area", "cube"):
        link = doc["data_queries"][query]["link"]
        assert link["variables"]["alveary:levels"] == native["levels"]
        assert link["href"].startswith(f"/collections/{CUBE}/{query}")
    missing = http.get("/collections/nowhere")
    assert missing.status_code == 404 and missing.json()["code"] == "NotFound"


# --- position -------------------------------------------------------------------------


@pytest.mark.parametrize(("lat", "lon"), [(45.2, 7.6), (-33.9, 151.2), (0.0, 179.99)])
def test_position_against_native_and_field(edr, http, lat, lon):
    doc = edr.query_data(
        CUBE, "position", coords=f"POINT({lon} {lat})", datetime_=WEEK, parameter_names=["temp"]
    )
    doc = covjson(doc)
    domain = doc["domain"]
    assert domain["domainType"] == "PointSeries" and list(doc["parameters"]) == ["temp"]
    native = http.get(
        f"/cubes/{CUBE}/point", params={"lat": lat, "lon": lon, "datetime": WEEK, "vars": "temp"}
    ).json()
    zones, clat, clon, values = native_rows(native, "temp")
    assert domain["alveary:zone"] == zones.tolist()
    assert domain["axes"]["x"]["values"] == clon.tolist()
    assert domain["axes"]["y"]["values"] == clat.tolist()
    assert domain["axes"]["t"]["values"] == native["times"]
    got = range_array(doc, "temp")
    np.testing.assert_array_equal(got, values[0])  # the native API's numbers
    # The field at the zone centre (evaluated here), for each day asked.
    expected = field(clat[0], clon[0], days_of(doc))
    np.testing.assert_allclose(got, expected, rtol=1e-12)
    assert doc["parameters"]["temp"]["unit"]["symbol"] == "K"


def test_position_time_selection(edr, http):
    point = "POINT(7.6 45.2)"
    # No datetime: every step (the native API answers the latest unless asked).
    doc = covjson(edr.query_data(CUBE, "position", coords=point))
    native = http.get(
        f"/cubes/{CUBE}/point", params={"lat": 45.2, "lon": 7.6, "datetime": ALL}
    ).json()
    assert doc["domain"]["axes"]["t"]["values"] == native["times"] and len(native["times"]) == 6
    for var in ("temp", "rain"):
        np.testing.assert_array_equal(range_array(doc, var), native_rows(native, var)[3][0])
    # An instant: the step in force then; its bounds are that day.
    doc = covjson(edr.query_data(CUBE, "position", coords=point, datetime_="2024-05-03T12:00:00Z"))
    t = doc["domain"]["axes"]["t"]
    assert t["values"] == ["2024-05-03T00:00:00Z"]
    assert t["bounds"] == ["2024-05-03T00:00:00Z", "2024-05-04T00:00:00Z"]
    # An interval meets the steps whose day it overlaps (here the 2nd to the 4th).
    doc = covjson(
        edr.query_data(CUBE, "position", coords=point, datetime_="2024-05-02T06:00:00Z/2024-05-04")
    )
    assert doc["domain"]["axes"]["t"]["values"] == [
        "2024-05-02T00:00:00Z",
        "2024-05-03T00:00:00Z",
        "2024-05-04T00:00:00Z",
    ]
    # Before the first step or after the end of the last: no data, 204 (OWSLib: {}).
    assert edr.query_data(CUBE, "position", coords=point, datetime_="2024-04-30T00:00:00Z") == {}
    r = http.get(
        f"/collections/{CUBE}/position",
        params={"coords": point, "datetime": "2024-05-07T00:00:00Z"},
    )
    assert r.status_code == 204 and r.content == b""


def test_position_at_several_points(edr, http):
    lat = np.array([45.2, 45.21, -10.5, 60.0])
    lon = np.array([7.6, 7.61, 20.25, -150.0])
    wkt = "MULTIPOINT(" + ", ".join(f"({x} {y})" for x, y in zip(lon, lat, strict=True)) + ")"
    doc = covjson(edr.query_data(CUBE, "position", coords=wkt, datetime_=WEEK))
    assert doc["domain"]["domainType"] == "MultiPointSeries"
    native = http.post(
        f"/cubes/{CUBE}/points",
        params={"datetime": WEEK},
        json={"lat": lat.tolist(), "lon": lon.tolist()},
    ).json()
    zones, clat, clon, values = native_rows(native, "temp")
    assert doc["domain"]["alveary:zone"] == zones.tolist()
    assert doc["domain"]["alveary:point"] == [0, 1, 2, 3]
    x, y = composite(doc)
    np.testing.assert_array_equal(x, clon)
    np.testing.assert_array_equal(y, clat)
    got = range_array(doc, "temp")  # (t, composite)
    np.testing.assert_array_equal(got, values.T)
    np.testing.assert_allclose(got, field(y[None, :], x[None, :], days_of(doc)[:, None]))
    # POST with the same parameters in a JSON body: the same document.
    body = {"coords": wkt, "datetime": WEEK}
    posted = http.post(f"/collections/{CUBE}/position", json=body)
    assert posted.status_code == 200 and orjson.loads(posted.content) == doc


# --- radius, area, cube -----------------------------------------------------------------


@pytest.mark.parametrize(
    ("within", "units", "metres"), [("120", "km", 120_000.0), ("50", "mi", 80_467.2)]
)
def test_radius_against_native(edr, http, within, units, metres):
    # OWSLib's query_data has no mapping for within-units (which the standard requires):
    # the query goes through the client's own request helper.
    params = {"coords": "POINT(7.6 45.2)", "within": within, "within-units": units}
    doc = covjson(edr._request(path=f"collections/{CUBE}/radius", kwargs=params))
    native = http.get(
        f"/cubes/{CUBE}/radius",
        params={"lat": 45.2, "lon": 7.6, "meters": metres, "datetime": ALL},
    ).json()
    zones, _clat, clon, values = native_rows(native, "temp")
    assert doc["domain"]["alveary:zone"] == zones.tolist()
    dist = [row["distance_m"] for row in native["zones"]]
    assert doc["domain"]["alveary:distance_m"] == dist
    x, y = composite(doc)
    np.testing.assert_array_equal(x, clon)
    np.testing.assert_array_equal(range_array(doc, "temp"), values.T)
    np.testing.assert_allclose(
        range_array(doc, "temp"), field(y[None, :], x[None, :], days_of(doc)[:, None])
    )
    # owslib alone sends no within-units: 400, naming the parameter.
    r = http.get(f"/collections/{CUBE}/radius", params={"coords": "POINT(7.6 45.2)", "within": 5})
    assert r.status_code == 400 and r.json()["code"] == "MissingParameterValue"
    assert r.json()["parameter"] == "within-units"


POLYGON = {
    "type": "Polygon",
    "coordinates": [
        [[6.0, 44.0], [9.0, 44.2], [8.5, 46.5], [6.5, 46.0], [6.0, 44.0]],
        [[7.0, 45.0], [7.5, 45.0], [7.5, 45.5], [7.0, 45.5], [7.0, 45.0]],
    ],
}


def wkt_polygon(geometry):
    rings = ", ".join(
        "(" + ", ".join(f"{x} {y}" for x, y in ring) + ")" for ring in geometry["coordinates"]
    )
    return f"POLYGON({rings})"


def test_area_against_native(edr, http):
    wkt = wkt_polygon(POLYGON)
    doc = covjson(edr.query_data(CUBE, "area", coords=wkt, datetime_=WEEK))
    native = http.post(f"/cubes/{CUBE}/polygon", params={"datetime": WEEK}, json=POLYGON).json()
    for var in ("temp", "rain"):
        zones, _clat, _clon, values = native_rows(native, var)
        assert doc["domain"]["alveary:zone"] == zones.tolist()
        np.testing.assert_array_equal(range_array(doc, var), values.T)  # null where native null
    x, y = composite(doc)
    np.testing.assert_allclose(
        range_array(doc, "temp"), field(y[None, :], x[None, :], days_of(doc)[:, None])
    )
    posted = http.post(f"/collections/{CUBE}/area", json={"coords": wkt, "datetime": WEEK})
    assert orjson.loads(posted.content) == doc


def ellipsoid_box_mean(west, south, east, north):
    """The area mean over a longitude-latitude box on the WGS84 ellipsoid of the field's
    space-dependent part, by quadrature in latitude (area element M N cos(phi), in closed
    form in longitude)."""
    e2 = 6.69437999014e-3
    phi = np.radians(np.linspace(south, north, 200_001))
    phi = (phi[1:] + phi[:-1]) / 2
    weight = np.cos(phi) / (1 - e2 * np.sin(phi) ** 2) ** 2  # M N cos(phi), up to a constant
    cos_mean = np.sum(np.cos(phi) * weight) / np.sum(weight)
    l0, l1 = np.radians(west), np.radians(east)
    sin_mean = (np.cos(2 * l0) - np.cos(2 * l1)) / (2 * (l1 - l0))
    return 280.0 + 10.0 * cos_mean + 3.0 * sin_mean


def test_area_mean_is_the_field_area_mean(http):
    west, south, east, north = 0.0, 40.0, 20.0, 50.0
    ring = [[west, south], [east, south], [east, north], [west, north], [west, south]]
    box = {"type": "Polygon", "coordinates": [ring]}
    r = http.get(
        f"/collections/{CUBE}/area",
        params={"coords": wkt_polygon(box), "stats": "mean,count", "parameter-name": "temp"},
    )
    assert r.status_code == 200 and r.headers["content-type"] == COVJSON
    doc = checked_coverage(r.content)
    assert doc["domain"]["domainType"] == "PolygonSeries"
    assert doc["domain"]["axes"]["composite"]["values"] == [[ring]]
    mean = range_array(doc, "temp_mean")
    # The native statistics of the same polygon: the same numbers.
    native = http.post(
        f"/cubes/{CUBE}/polygon",
        params={"datetime": ALL, "stats": "mean", "vars": "temp"},
        json=box,
    ).json()
    np.testing.assert_array_equal(mean, native["stats"]["temp"]["mean"])
    # The field's area mean, integrated here: the 564 zone centres of level 7 (about 56 km
    # apart) sample the box to 5e-3 K (measured; edge sampling), against a spread of f
    # over the box of 3.1 K.
    expected = ellipsoid_box_mean(west, south, east, north) + 0.5 * np.arange(NTIMES)
    np.testing.assert_allclose(mean, expected, atol=0.01)
    assert doc["ranges"]["temp_count"]["dataType"] == "integer"


def test_cube_against_native(edr, http):
    bbox = [5.0, 43.0, 11.0, 48.0]
    doc = covjson(edr.query_data(CUBE, "cube", bbox=bbox, datetime_=WEEK))
    native = http.get(
        f"/cubes/{CUBE}/bbox", params={"bbox": ",".join(map(str, bbox)), "datetime": WEEK}
    ).json()
    zones, _, clon, values = native_rows(native, "temp")
    assert doc["domain"]["alveary:zone"] == zones.tolist() and zones.size > 10
    np.testing.assert_array_equal(composite(doc)[0], clon)
    np.testing.assert_array_equal(range_array(doc, "temp"), values.T)
    # Across the antimeridian, at the coarse level.
    doc = covjson(edr.query_data(CUBE, "cube", bbox=[170, -10, -170, 10], datetime_=WEEK))
    native = http.get(
        f"/cubes/{CUBE}/bbox", params={"bbox": "170,-10,-170,10", "datetime": WEEK}
    ).json()
    assert doc["domain"]["alveary:zone"] == native_rows(native, "temp")[0].tolist()


def test_level_vendor_parameter(http):
    r = http.get(f"/collections/{CUBE}/position", params={"coords": "POINT(7.6 45.2)", "level": 3})
    doc = checked_coverage(r.content)
    assert doc["alveary:level"] == 3
    assert doc["domain"]["alveary:zone"] == [int(grid.point_to_zone(45.2, 7.6, 3))]
    r = http.get(f"/collections/{CUBE}/position", params={"coords": "POINT(7.6 45.2)", "level": 5})
    assert r.status_code == 400 and r.json()["parameter"] == "level"


# --- formats, caching, no data, errors --------------------------------------------------


def test_formats(http):
    params = {"coords": wkt_polygon(POLYGON), "datetime": WEEK}
    path = f"/collections/{CUBE}/area"
    geo = http.get(path, params={**params, "f": "GeoJSON"})
    assert geo.headers["content-type"] == "application/geo+json"
    native = http.post(
        f"/cubes/{CUBE}/polygon", params={"datetime": WEEK, "f": "geojson"}, json=POLYGON
    ).json()
    body = geo.json()
    assert body["features"] == native["features"]
    assert body["links"] == [
        {"href": f"/collections/{CUBE}", "rel": "collection", "type": "application/json"}
    ]
    arrow = http.get(path, params={**params, "f": "Arrow"})
    table = pa.ipc.open_stream(io.BytesIO(arrow.content)).read_all()  # pyarrow
    ref = http.post(f"/cubes/{CUBE}/polygon", params={"datetime": WEEK, "f": "arrow"}, json=POLYGON)
    assert table.equals(pa.ipc.open_stream(io.BytesIO(ref.content)).read_all())
    # The media type EDR 1.1 names, when the client prefers it.
    legacy = http.get(path, params=params, headers={"Accept": "application/prs.coverage+json"})
    assert legacy.headers["content-type"] == "application/prs.coverage+json"
    checked_coverage(legacy.content)
    by_accept = http.get(path, params=params, headers={"Accept": "application/geo+json"})
    assert by_accept.json()["features"] == body["features"]


def test_etag_and_repeat(http):
    params = {"coords": "POINT(7.6 45.2)", "datetime": WEEK}
    first = http.get(f"/collections/{CUBE}/position", params=params)
    again = http.get(f"/collections/{CUBE}/position", params=params)  # from the answer cache
    assert again.content == first.content and again.headers["etag"] == first.headers["etag"]
    r = http.get(
        f"/collections/{CUBE}/position",
        params=params,
        headers={"If-None-Match": first.headers["etag"]},
    )
    assert r.status_code == 304
    native = http.get(f"/cubes/{CUBE}/point", params={"lat": 45.2, "lon": 7.6, "datetime": WEEK})
    assert native.headers["etag"] != first.headers["etag"]


def test_no_data_is_204(http):
    # rain has no data south of 44.8 N: a query that selects only missing values.
    r = http.get(
        f"/collections/{CUBE}/position",
        params={"coords": "POINT(7.6 40.0)", "parameter-name": "rain"},
    )
    assert r.status_code == 204 and r.content == b""
    r = http.get(
        f"/collections/{CUBE}/position",
        params={"coords": "POINT(7.6 40.0)", "parameter-name": "rain,temp"},
    )
    doc = checked_coverage(r.content)
    assert np.isnan(range_array(doc, "rain")).all()  # null for missing data
    assert np.isnan(rain(40.0, 7.6, 0.0))  # missing in the field itself


ERRORS = [
    ("position", {"coords": "POINT(7.6 45.2)", "crs": "EPSG:4326"}, "crs", "InvalidParameterValue"),
    ("position", {"coords": "POINT(7.6 45.2)", "foo": "1"}, "foo", "InvalidParameterValue"),
    ("position", {"coords": "POINT(7.6 45.2)", "z": "850"}, "z", "InvalidParameterValue"),
    ("position", {"coords": "POINT(7.6 95)"}, "coords", "InvalidParameterValue"),
    ("position", {"coords": "LINESTRING(0 0, 1 1)"}, "coords", "InvalidParameterValue"),
    ("position", {}, "coords", "MissingParameterValue"),
    ("position", {"coords": "POINT(7 45)", "f": "netCDF"}, "f", "InvalidParameterValue"),
    ("position", {"coords": "POINT(7 45)", "parameter-name": "snow"}, "parameter-name", None),
    ("position", {"coords": "POINT(7 45)", "datetime": "yesterday"}, "datetime", None),
    ("position", {"coords": "POINT(7 45)", "level": "x"}, "level", None),
    (
        "radius",
        {"coords": "POINT(7 45)", "within": "5", "within-units": "ft"},
        "within-units",
        None,
    ),
    ("area", {"coords": "POLYGON((0 0, 1 1, 1 0, 0 1, 0 0))"}, "coords", None),
    ("cube", {}, "bbox", "MissingParameterValue"),
    ("cube", {"bbox": "170,-1,-170,1", "stats": "mean"}, "stats", None),
]


@pytest.mark.parametrize(("query", "params", "parameter", "code"), ERRORS)
def test_errors_are_400_with_the_exception_body(http, query, params, parameter, code):
    r = http.get(f"/collections/{CUBE}/{query}", params=params)
    assert r.status_code == 400, r.text
    assert r.headers["content-type"] == "application/problem+json"
    body = r.json()
    # EDR exception.yaml (code, description) and RFC 9457 (type, title, status, detail).
    assert body["code"] == (code or "InvalidParameterValue")
    assert body["description"] == body["detail"] and body["status"] == 400
    assert body["parameter"] == parameter


def test_limits_are_the_native_limits(http):
    # The service's max_zones is 60 000: a box of more zones is refused before reading.
    r = http.get(f"/collections/{CUBE}/cube", params={"bbox": "-180,-80,180,80"})
    assert r.status_code == 413 and r.json()["code"] == "LimitExceeded"


def test_openapi_lists_the_edr_operations(http, edr):
    document = http.get("/openapi.json").json()
    openapi_spec_validator.validate(document)  # OpenAPI 3.1 schema
    # OWSLib's api() follows the service-desc link of type OpenAPI 3.0 and reads it.
    older = edr.api()
    assert older["openapi"].startswith("3.0.")
    openapi_spec_validator.validate(older)  # valid OpenAPI 3.0 (openapi-spec-validator)
    assert older["paths"].keys() == document["paths"].keys()
    paths = document["paths"]
    for query in ("position", "radius", "area", "cube"):
        assert "get" in paths[f"/collections/{{cube}}/{query}"]
    assert "post" in paths["/collections/{cube}/position"]
    assert "post" in paths["/collections/{cube}/area"]
    names = {p["name"] for p in paths["/collections/{cube}/radius"]["get"]["parameters"]}
    assert {"coords", "within", "within-units", "datetime", "parameter-name", "level"} <= names


# --- no extra I/O -------------------------------------------------------------------------


@pytest.fixture(scope="module")
def counted(s3_server):
    """A service of this module's own on a bucket of its own, with the chunk and answer
    caches off, so every query reads its chunks from the S3 server."""
    bucket = s3_server.create_bucket()
    url = f"s3://{bucket}/small"
    options = s3_server.storage_options()
    build_cube(url, options, cube_id="small", levels=(3, 6))
    cubes = [{"id": "small", "url": url, "storage_options": options}]
    settings = {"cache_bytes": 0, "answer_cache_bytes": 0, "plan_cache_bytes": 0}
    with (
        ServiceProcess(cubes, options=settings) as proc,
        httpx.Client(base_url=proc.url, timeout=30) as client,
    ):
        yield s3_server, url, client


def chunk_gets(s3, url, client, method, path, params=None, json=None):
    mark = s3.mark()
    r = client.request(method, path, params=params, json=json)
    assert r.status_code == 200, r.text
    return sorted(q.path for q in s3.requests(since=mark, bucket=url) if q.is_object_get)


@pytest.mark.parametrize(
    ("edr_query", "native"),
    [
        (
            ("position", {"coords": "POINT(7.6 45.2)", "datetime": WEEK}),
            ("GET", "point", {"lat": 45.2, "lon": 7.6, "datetime": WEEK}, None),
        ),
        (
            ("radius", {"coords": "POINT(7.6 45.2)", "within": "300", "within-units": "km"}),
            ("GET", "radius", {"lat": 45.2, "lon": 7.6, "meters": 300_000, "datetime": ALL}, None),
        ),
        (
            ("area", {"coords": wkt_polygon(POLYGON), "stats": "mean"}),
            ("POST", "polygon", {"datetime": ALL, "stats": "mean"}, POLYGON),
        ),
        (
            ("cube", {"bbox": "5,40,15,50", "datetime": WEEK}),
            ("GET", "bbox", {"bbox": "5,40,15,50", "datetime": WEEK}, None),
        ),
    ],
    ids=["position", "radius", "area", "cube"],
)
def test_edr_reads_what_the_native_query_reads(counted, edr_query, native):
    s3, url, client = counted
    name, params = edr_query
    edr_gets = chunk_gets(s3, url, client, "GET", f"/collections/small/{name}", params)
    method, op, native_params, body = native
    native_gets = chunk_gets(s3, url, client, method, f"/cubes/small/{op}", native_params, body)
    assert edr_gets and edr_gets == native_gets  # the same chunk GETs, one by one
