"""End to end over HTTP: caching, limits, errors and metrics of a real ``alveary serve``.

Store traffic is judged by the S3 test server's own request log (what went over the
wire), not by the service's counters. Problem documents follow RFC 9457.
"""

from __future__ import annotations

import time

import httpx
import pytest

from alveary import grid
from support.analytic import build_cube
from support.s3 import S3Server
from support.server import ServiceProcess

PROBLEM = "application/problem+json"

pytestmark = pytest.mark.server  # every test here talks to a real service process


@pytest.fixture(scope="module")
def http(service):
    with httpx.Client(base_url=service.url, timeout=30) as client:
        yield client


def chunk_gets(s3_server, mark):
    return [r for r in s3_server.requests(since=mark) if r.is_object_get and "/c/" in r.path]


def problem(r, status):
    assert r.status_code == status, r.text
    assert r.headers["content-type"].startswith(PROBLEM)
    body = r.json()
    assert body["status"] == status and body["title"] and body["detail"]
    text = r.text
    # No stack trace, store URL, local path or credential ever reaches a client.
    for leak in ("Traceback", "s3://", "/tmp", "/work", "alveary-test-secret", 'File "'):
        assert leak not in text
    return body


def test_etag_and_304_without_store_reads(http, s3_server):
    params = {"lat": 12.0, "lon": 13.0, "k": 4, "datetime": "../.."}
    first = http.get("/cubes/analytic/disk", params=params)
    assert first.status_code == 200
    etag = first.headers["etag"]
    assert etag.startswith('"') and "max-age=" in first.headers["cache-control"]
    # The same query spelled differently (a different but equivalent interval) has the
    # same ETag; another format has another.
    same = http.get("/cubes/analytic/disk", params={**params, "datetime": "2024-04-01/2030-01-01"})
    assert same.headers["etag"] == etag
    csv = http.get("/cubes/analytic/disk", params={**params, "f": "csv"})
    assert csv.headers["etag"] != etag
    mark = s3_server.mark()
    again = http.get("/cubes/analytic/disk", params=params, headers={"If-None-Match": etag})
    assert again.status_code == 304 and again.content == b""
    assert again.headers["etag"] == etag
    assert chunk_gets(s3_server, mark) == []  # 304 without touching the store
    weak = http.get(
        "/cubes/analytic/disk", params=params, headers={"If-None-Match": f'W/{etag}, "x"'}
    )
    assert weak.status_code == 304


def test_warm_query_reads_nothing_and_cold_reads_the_plan(
    alveary_service, analytic_store, s3_server
):
    # a service of its own: its chunk cache is cold whatever other tests asked before
    url, options = analytic_store
    cubes = [{"id": "analytic", "url": url, "title": "Analytic", "storage_options": options}]
    proc = alveary_service(cubes)
    params = {"lat": -40.0, "lon": -60.0, "k": 2}
    with httpx.Client(base_url=proc.url, timeout=30) as http:
        mark = s3_server.mark()
        assert http.get("/cubes/analytic/disk", params=params).status_code == 200
        cold = chunk_gets(s3_server, mark)
        assert cold, "a cold query reads its chunks"
        assert len({r.path for r in cold}) == len(cold)  # each chunk once
        mark = s3_server.mark()
        assert http.get("/cubes/analytic/disk", params={**params, "f": "csv"}).status_code == 200
        assert chunk_gets(s3_server, mark) == []  # served from the chunk cache


@pytest.mark.parametrize(
    ("path", "params", "parameter"),
    [
        ("/cubes/analytic/point", {"lat": 91, "lon": 0}, "lat"),
        ("/cubes/analytic/point", {"lat": 0, "lon": -181}, "lon"),
        ("/cubes/analytic/disk", {"lat": 0, "lon": 0, "k": -1}, "k"),
        (
            "/cubes/analytic/point",
            {"lat": 0, "lon": 0, "datetime": "2024-05-03/2024-05-01"},
            "datetime",
        ),
        ("/cubes/analytic/point", {"lat": 0, "lon": 0, "vars": "temp,snow"}, "vars"),
        ("/cubes/analytic/point", {"lat": 0, "lon": 0, "level": 5}, "level"),
        ("/cubes/analytic/bbox", {"bbox": "0,10,1,5"}, "bbox"),
        ("/cubes/analytic/bbox", {"bbox": "7,45,8,46", "stats": "median"}, "stats"),
        ("/cubes/analytic/disk", {"zone": "xyz", "k": 1}, "zone"),
        ("/cubes/analytic/disk", {"k": 1}, "lat"),
        ("/zones", {"lat": 0, "lon": 0, "level": 25}, "level"),
        ("/cubes/analytic/point", {"lat": 0, "lon": 0, "f": "png"}, "f"),
    ],
)
def test_invalid_parameters_are_422_naming_them(http, path, params, parameter):
    body = problem(http.get(path, params=params), 422)
    assert body["parameter"] == parameter
    assert body.get("allowed")
    assert parameter in body["detail"]


def test_latitude_range_is_named(http):
    body = problem(http.get("/cubes/analytic/point", params={"lat": 91, "lon": 0}), 422)
    assert "[-90, 90]" in body["allowed"]


def test_self_intersecting_polygon_is_422(http):
    bow = {"type": "Polygon", "coordinates": [[[7, 45], [8, 46], [8, 45], [7, 46], [7, 45]]]}
    body = problem(http.post("/cubes/analytic/polygon", json=bow), 422)
    assert body["parameter"] == "geometry" and "Self-intersection" in body["value"]
    body = problem(
        http.post(
            "/cubes/analytic/polygon",
            content=b"{not json",
            headers={"content-type": "application/json"},
        ),
        422,
    )
    assert body["parameter"] == "body"


def test_unknown_cube_and_zone_are_404(http):
    problem(http.get("/cubes/nowhere"), 404)
    problem(http.get("/cubes/nowhere/point", params={"lat": 0, "lon": 0}), 404)
    problem(http.get("/zones/12345"), 404)
    problem(http.get("/zones/99z-1-1"), 404)
    problem(http.get("/no/such/path"), 404)


def test_zone_by_id_or_text(http):
    zone = grid.point_to_zone(45.2, 7.6, 9)
    by_id = http.get(f"/zones/{int(zone)}").json()
    by_text = http.get(f"/zones/{grid.zone_to_text(zone)}").json()
    assert by_id == by_text
    assert by_id["level"] == 9 and len(by_id["neighbours"]) == 6
    assert by_id["parent"]["zone"] == int(grid.zone_parent(zone))
    assert [c["weight"] for c in by_id["children"]] == [1.0] + [0.5] * 6
    assert http.get("/zones", params={"lat": 45.2, "lon": 7.6, "level": 9}).json() == by_id


@pytest.fixture(scope="module")
def strict(analytic_store):
    url, options = analytic_store
    cubes = [{"id": "analytic", "url": url, "storage_options": options}]
    limits = {
        "max_zones": 100,
        "max_k": 3,
        "max_polygon_vertices": 10,
        "max_points": 5,
        "max_cells": 50,
        "max_body_bytes": 2000,
    }
    with ServiceProcess(cubes, options=limits) as proc:
        yield proc


@pytest.mark.parametrize(
    ("method", "path", "params", "body", "limit", "requested"),
    [
        ("get", "/cubes/analytic/disk", {"lat": 0, "lon": 0, "k": 4}, None, "k", 4),
        (
            "get",
            "/cubes/analytic/disk",
            {"lat": 0, "lon": 0, "k": 3, "datetime": "../.."},
            None,
            "time steps × zones",
            6 * 37,
        ),
        ("get", "/cubes/analytic/bbox", {"bbox": "0,0,10,10"}, None, "zones per request", None),
        (
            "get",
            "/cubes/analytic/radius",
            {"lat": 0, "lon": 0, "meters": 500_000},
            None,
            "zones per request",
            None,
        ),
        (
            "post",
            "/cubes/analytic/points",
            {},
            {"lat": [0] * 6, "lon": [0] * 6},
            "points per request",
            6,
        ),
        (
            "post",
            "/cubes/analytic/polygon",
            {},
            {"type": "Polygon", "coordinates": [[[0, 0], [1, 0], [1, 1], [0, 1], [0, 0]] * 3]},
            "polygon vertices",
            14,
        ),
        (
            "post",
            "/cubes/analytic/points",
            {},
            {"lat": [0.5] * 400, "lon": [0.5] * 400},
            "request body bytes",
            None,
        ),
    ],
)
def test_limits_are_413_before_any_chunk_read(
    strict, s3_server, method, path, params, body, limit, requested
):
    mark = s3_server.mark()
    with httpx.Client(base_url=strict.url, timeout=30) as client:
        r = client.request(method.upper(), path, params=params, json=body)
    doc = problem(r, 413)
    assert doc["limit"] == limit
    if requested is not None:
        assert doc["requested"] == requested
    assert doc["requested"] > doc["maximum"]
    assert chunk_gets(s3_server, mark) == []


def test_new_version_is_picked_up_and_changes_etags(s3_server):
    bucket = s3_server.create_bucket()
    url, options = f"s3://{bucket}/moving", s3_server.storage_options()
    build_cube(url, options, cube_id="moving", levels=(3,))
    cubes = [{"id": "moving", "url": url, "storage_options": options}]
    with (
        ServiceProcess(cubes, options={"refresh_interval": 0.3}) as proc,
        httpx.Client(base_url=proc.url) as c,
    ):
        params = {"lat": 10, "lon": 10}
        before = c.get("/cubes/moving/point", params=params)
        v1 = c.get("/cubes/moving").json()["version"]
        build_cube(url, options, cube_id="moving", levels=(3,), offset=100.0)
        deadline = time.monotonic() + 10
        while c.get("/cubes/moving").json()["version"] == v1:
            assert time.monotonic() < deadline, "new version not picked up"
            time.sleep(0.1)
        after = c.get(
            "/cubes/moving/point", params=params, headers={"If-None-Match": before.headers["etag"]}
        )
        assert after.status_code == 200  # the old ETag no longer matches
        assert after.headers["etag"] != before.headers["etag"]
        t0 = before.json()["zones"][0]["values"]["temp"][0]
        t1 = after.json()["zones"][0]["values"]["temp"][0]
        assert t1 == pytest.approx(t0 + 100.0)


def test_unreachable_store_is_503_with_retry_after():
    with S3Server() as private:
        bucket = private.create_bucket()
        url = f"s3://{bucket}/gone"
        options = private.storage_options(
            config_kwargs={"connect_timeout": 1, "retries": {"max_attempts": 1}}
        )
        build_cube(url, options, cube_id="gone", levels=(3,))
        cubes = [{"id": "gone", "url": url, "storage_options": options}]
        proc = ServiceProcess(cubes, options={"refresh_interval": 1000})
        proc.start()
    try:  # the S3 server is gone now
        with httpx.Client(base_url=proc.url, timeout=60) as c:
            body = problem(c.get("/cubes/gone/point", params={"lat": 1, "lon": 2}), 503)
            r = c.get("/cubes/gone/point", params={"lat": 1, "lon": 2})
            assert int(r.headers["retry-after"]) >= 1
            assert "endpoint" not in body["detail"]
            ready = c.get("/readyz")
            assert ready.status_code == 503 and ready.json()["ready"] is False
            assert c.get("/healthz").status_code == 200
    finally:
        proc.stop()


def test_deadline_is_504(analytic_store):
    url, options = analytic_store
    cubes = [{"id": "analytic", "url": url, "storage_options": options}]
    with (
        ServiceProcess(cubes, options={"deadline": 0.0005}) as proc,
        httpx.Client(base_url=proc.url) as c,
    ):
        problem(
            c.get(
                "/cubes/analytic/disk", params={"lat": 5, "lon": 5, "k": 10, "datetime": "../.."}
            ),
            504,
        )


def test_undecodable_chunk_is_502(s3_server):
    bucket = s3_server.create_bucket()
    url, options = f"s3://{bucket}/broken", s3_server.storage_options()
    build_cube(url, options, cube_id="broken", levels=(3,))
    client = s3_server.client()
    keys = [o["Key"] for o in client.list_objects_v2(Bucket=bucket)["Contents"]]
    for key in keys:
        if "/temp/3/strips/c/" in key:
            client.put_object(Bucket=bucket, Key=key, Body=b"\x00garbage, not a chunk\xff" * 3)
    cubes = [{"id": "broken", "url": url, "storage_options": options}]
    with ServiceProcess(cubes) as proc, httpx.Client(base_url=proc.url) as c:
        problem(c.get("/cubes/broken/point", params={"lat": 10, "lon": 10, "vars": "temp"}), 502)
        assert (
            c.get("/cubes/broken/point", params={"lat": 10, "lon": 10, "vars": "rain"}).status_code
            == 200
        )


def test_metrics_count_requests_and_store_reads(s3_server):
    # A cube and a service of its own, so that every counter starts at zero with this
    # test and no other process reads the bucket; the store traffic is judged by the S3
    # server's log and the stored objects' sizes.
    url, options = f"s3://{s3_server.create_bucket()}/metrics", s3_server.storage_options()
    build_cube(url, options, levels=(3,))
    cubes = [{"id": "analytic", "url": url, "storage_options": options}]
    point = {"lat": 3, "lon": 4}
    mark = s3_server.mark()
    with (
        ServiceProcess(cubes, options={"refresh_interval": 3600}) as proc,
        httpx.Client(base_url=proc.url, timeout=30) as c,
    ):
        assert c.get("/cubes/analytic/point", params=point).status_code == 200  # computed
        assert c.get("/cubes/analytic/point", params=point).status_code == 200  # answer cache
        csv = c.get("/cubes/analytic/point", params={**point, "f": "csv"})  # chunk cache
        assert csv.status_code == 200
        assert c.get("/").status_code == 200
        r = c.get("/metrics")
        logged = s3_server.requests(since=mark, bucket=url)
    assert r.status_code == 200 and r.headers["content-type"].startswith("text/plain")
    # Prometheus text exposition format, parsed by prometheus-client's own parser.
    from prometheus_client.parser import text_string_to_metric_families

    families = {f.name: f for f in text_string_to_metric_families(r.text)}

    def value(family: str, sample: str, **labels: str) -> float:
        return next(
            s.value
            for s in families[family].samples
            if s.name == sample and all(s.labels.get(k) == v for k, v in labels.items())
        )

    requests = {
        (s.labels["operation"], s.labels["status"]): s.value
        for s in families["alveary_requests"].samples
        if s.name == "alveary_requests_total"
    }
    assert requests[("query_point", "200")] == 3 and requests[("landing", "200")] == 1
    assert value("alveary_request_seconds", "alveary_request_seconds_count", operation="landing")
    chunk_gets = [
        q for q in logged if q.is_object_get and "/c/" in q.path and "/time/" not in q.path
    ]
    assert chunk_gets and len({q.path for q in chunk_gets}) == len(chunk_gets)
    assert value(
        "alveary_store_chunk_reads", "alveary_store_chunk_reads_total", cube="analytic"
    ) == (len(chunk_gets))
    # Bytes: the stored size of every object the service fetched (metadata and chunks).
    client, bucket = s3_server.client(), url.removeprefix("s3://").split("/")[0]
    fetched = [q.path.split("/", 2)[2] for q in logged if q.is_object_get and q.status == 200]
    stored = sum(client.head_object(Bucket=bucket, Key=k)["ContentLength"] for k in fetched)
    assert value("alveary_store_bytes_read", "alveary_store_bytes_read_total", cube="analytic") == (
        stored
    )
    # Chunk cache: the first answer missed every chunk, the CSV one hit every chunk.
    n = len(chunk_gets)
    assert value("alveary_chunk_cache_misses", "alveary_chunk_cache_misses_total") == n
    assert value("alveary_chunk_cache_hits", "alveary_chunk_cache_hits_total") == n
    # Answer cache: the JSON repeat was served from it; JSON and CSV were computed.
    assert value("alveary_answer_cache_hits", "alveary_answer_cache_hits_total") == 1
    assert value("alveary_answer_cache_misses", "alveary_answer_cache_misses_total") == 2


def test_cors_allow_list(analytic_store):
    url, options = analytic_store
    cubes = [{"id": "analytic", "url": url, "storage_options": options}]
    with ServiceProcess(cubes, options={"cors_origin": ["https://dash.example"]}) as proc:
        with httpx.Client(base_url=proc.url) as c:
            ok = c.get("/cubes", headers={"Origin": "https://dash.example"})
            assert ok.headers["access-control-allow-origin"] == "https://dash.example"
            other = c.get("/cubes", headers={"Origin": "https://elsewhere.example"})
            assert "access-control-allow-origin" not in other.headers


def test_repeats_come_from_the_answer_cache(http, s3_server):
    from prometheus_client.parser import text_string_to_metric_families

    def answer_hits():
        text = http.get("/metrics").text
        for family in text_string_to_metric_families(text):
            if family.name == "alveary_answer_cache_hits":
                return family.samples[0].value
        raise AssertionError("no answer cache metric")

    params = {"lat": -12.5, "lon": 131.0, "k": 1}
    first = http.get("/cubes/analytic/disk", params=params)
    hits = answer_hits()
    mark = s3_server.mark()
    again = http.get("/cubes/analytic/disk", params=params)
    assert again.content == first.content and again.headers["etag"] == first.headers["etag"]
    assert again.headers["content-type"] == first.headers["content-type"]
    assert answer_hits() == hits + 1
    assert chunk_gets(s3_server, mark) == []
    # Another Accept is another answer, not the cached JSON.
    csv = http.get("/cubes/analytic/disk", params=params, headers={"Accept": "text/csv"})
    assert csv.headers["content-type"].startswith("text/csv")
