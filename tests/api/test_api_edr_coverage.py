"""OGC API - EDR outside a cube's coverage: a query that selects no data is 204 with no
body (OGC 19-086r6, /req/edr/query_type/no-data), where the native API answers 404
naming the coverage. In process (Starlette's TestClient) on a small cube of the memory
store whose coverage is a district; inside it the same queries answer with data, judged
by covjson-pydantic and the written field."""

from __future__ import annotations

import numpy as np
import pytest
from fastapi.testclient import TestClient

from alveary import grid
from alveary.api import create_app
from alveary.api._settings import Settings
from alveary.cube import create_cube
from alveary.query import Catalog, CubeSource
from support.covjson_checks import checked_coverage, range_array

COVERAGE = (-36.4, 30.3, -35.8, 30.8)
LEVEL = 10


def moisture(lat):
    return 0.2 + 0.001 * (np.asarray(lat) - 30.0)


@pytest.fixture(scope="module")
def client():
    url = "memory://edr-coverage/district"
    times = np.datetime64("2025-01-01", "s") + np.arange(2) * np.timedelta64(1, "D")
    writer = create_cube(
        url,
        cube_id="district",
        title="A district (invented data)",
        times=times,
        levels=[LEVEL],
        coverage=COVERAGE,
        variables={"moisture": {"units": "1", "long_name": "soil moisture"}},
    )
    zones = grid.zones_in_bbox(*COVERAGE, LEVEL)
    lat, _ = grid.zone_to_point(zones)
    writer.write("moisture", LEVEL, zones, np.repeat(moisture(lat)[None, :], 2, axis=0))
    writer.publish()
    app = create_app(Settings(answer_cache_bytes=0), Catalog([CubeSource("district", url)]))
    with TestClient(app) as c:
        yield c


@pytest.mark.parametrize(
    ("query", "params"),
    [
        ("position", {"coords": "POINT(10 45)"}),
        ("radius", {"coords": "POINT(10 45)", "within": "5", "within-units": "km"}),
        ("area", {"coords": "POLYGON((10 45, 11 45, 11 46, 10 45))"}),
        ("cube", {"bbox": "10,45,11,46"}),
    ],
)
def test_outside_the_coverage_is_204(client, query, params):
    r = client.get(f"/collections/district/{query}", params=params)
    assert r.status_code == 204 and r.content == b""
    # The native API names the coverage instead (404).
    native = client.get("/cubes/district/point", params={"lat": 45, "lon": 10})
    assert native.status_code == 404 and native.json()["coverage"] == list(COVERAGE)


def test_inside_the_coverage_answers(client):
    r = client.get("/collections/district/position", params={"coords": "POINT(-36.1 30.55)"})
    doc = checked_coverage(r.content)  # covjson-pydantic and the NdArray shape rules
    y = doc["domain"]["axes"]["y"]["values"][0]
    # Stored as float32 (the default): the field to float32 precision.
    np.testing.assert_allclose(range_array(doc, "moisture"), moisture(y), rtol=1e-7)
    cube = client.get("/collections/district/cube", params={"bbox": "-36.2,30.5,-36.0,30.6"})
    doc = checked_coverage(cube.content)
    assert doc["domain"]["domainType"] == "MultiPointSeries"
    # An unknown collection is still 404 with the EDR exception body.
    missing = client.get("/collections/elsewhere/position", params={"coords": "POINT(0 0)"})
    assert missing.status_code == 404 and missing.json()["code"] == "NotFound"


def test_unknown_paths_and_methods_under_collections(client):
    # OGC API - EDR exception.yaml: every error body has `code` (required) and
    # `description`; RFC 9457 members stay beside them.
    for method, path, status, code in [
        ("GET", "/collections/district/nowhere", 404, "NotFound"),
        ("GET", "/collections/district/position/extra", 404, "NotFound"),
        ("DELETE", "/collections/district/position", 405, "OperationNotSupported"),
        ("PUT", "/collections/district", 405, "OperationNotSupported"),
    ]:
        r = client.request(method, path)
        assert r.status_code == status, (method, path, r.text)
        assert r.headers["content-type"] == "application/problem+json"
        body = r.json()
        assert body["code"] == code and body["status"] == status
        assert body["description"] == body["detail"]
    # The native paths keep plain problem+json (RFC 9457).
    assert "code" not in client.get("/cubes/district/nowhere").json()


@pytest.mark.parametrize(
    "params",
    [
        {"coords": "POINT(-36.1 30.55)"},
        {"coords": "POINT(-36.1 30.55)", "parameter-name": "moisture", "level": "10"},
        {"coords": "POINT(-36.1 30.55)", "datetime": "2025-01-02T00:00:00Z", "f": "GeoJSON"},
        {"coords": "MULTIPOINT((-36.1 30.55), (-36.0 30.6))"},
        {"coords": "POINT(-36.1 95)"},
        {"coords": "POINT(10 45)"},
        {"coords": "POINT(-36.1 30.55)", "parameter-name": "snow"},
        {},
    ],
)
def test_position_lane_answers_as_the_route(client, params):
    # A plain position request takes the lean lane; with `crs` (CRS84, which changes
    # nothing in the answer) the same request is answered by the route itself. Status,
    # body and ETag must agree (OGC API - EDR: crs=CRS84 is the default).
    lane = client.get("/collections/district/position", params=params)
    route = client.get("/collections/district/position", params={**params, "crs": "OGC:CRS84"})
    assert lane.status_code == route.status_code
    if lane.status_code >= 400:  # error documents differ only in the request's id
        assert {**lane.json(), "request_id": ""} == {**route.json(), "request_id": ""}
    else:
        assert lane.content == route.content
    assert lane.headers.get("etag") == route.headers.get("etag")
    assert lane.headers.get("content-type") == route.headers.get("content-type")
