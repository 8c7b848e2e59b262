"""The request log and request ids, read from a real ``alveary serve`` process's stderr.

Judges: each log line must parse as JSON (Python's json module); chunk GETs are checked
against the S3 test server's own request log (what went over the wire), bytes sent
against the body httpx received, the duration against the client's own clock, and the
request id against the ``X-Request-Id`` header and the problem document (RFC 9457).
"""

from __future__ import annotations

import json
import re
import time

import httpx
import pytest

from alveary.api._access import hash_key, new_key
from support.server import ServiceProcess

pytestmark = pytest.mark.server


@pytest.fixture(scope="module")
def key():
    return new_key()


@pytest.fixture(scope="module")
def server(analytic_store, key):
    url, options = analytic_store
    cubes = [
        {"id": "analytic", "url": url, "storage_options": options},
        {
            "id": "closed",
            "url": url,
            "storage_options": options,
            "public": False,
            "keys": {key[1]: hash_key(key[0])},
        },
    ]
    proc = ServiceProcess(cubes).start()
    try:
        yield proc
    finally:
        proc.stop()


def log_lines(server):
    out = {}
    for line in server.log().splitlines():
        if line.startswith("{"):
            record = json.loads(line)
            out[record["request_id"]] = record
    return out


def wait_for(server, request_id):
    for _ in range(50):
        lines = log_lines(server)
        if request_id in lines:
            return lines[request_id]
        time.sleep(0.1)
    raise AssertionError(f"no log line for {request_id}: {server.log()[-2000:]}")


def store_chunk_gets(s3_server, mark):
    return [
        r
        for r in s3_server.requests(since=mark)
        if r.is_object_get and ("/strips/c/" in r.path or "/apex/c/" in r.path)
    ]


def test_one_json_line_per_request(server, s3_server, key):
    params = {"lat": 47.0, "lon": -122.0, "k": 3}
    with httpx.Client(base_url=server.url, timeout=30) as http:
        mark = s3_server.mark()
        started = time.perf_counter()
        cold = http.get(
            "/cubes/analytic/disk", params=params, headers={"X-Request-Id": "trace.0001"}
        )
        elapsed_ms = (time.perf_counter() - started) * 1000
        assert cold.status_code == 200 and cold.headers["x-request-id"] == "trace.0001"
        wire = len(store_chunk_gets(s3_server, mark))
        assert wire > 0
        line = wait_for(server, "trace.0001")
        assert line["chunk_gets"] == wire  # the S3 server saw exactly these GETs
        assert line["bytes_sent"] == len(cold.content)
        assert 0 < line["duration_ms"] <= elapsed_ms
        assert (line["method"], line["path"], line["status"]) == (
            "GET",
            "/cubes/analytic/disk",
            200,
        )
        assert (line["cube"], line["operation"], line["key_id"]) == ("analytic", "query_disk", None)
        assert re.fullmatch(r"\d{4}-\d\d-\d\dT\d\d:\d\d:\d\d\.\d{3}Z", line["time"])

        # the identical repeat is answered from the answer cache: no store read
        mark = s3_server.mark()
        warm = http.get("/cubes/analytic/disk", params=params)
        rid = warm.headers["x-request-id"]
        assert re.fullmatch(r"[0-9a-f]{32}", rid) and store_chunk_gets(s3_server, mark) == []
        line = wait_for(server, rid)
        assert (line["chunk_gets"], line["bytes_sent"]) == (0, len(warm.content))
        assert (line["cube"], line["operation"]) == ("analytic", "query_disk")

        # errors: the id is in the problem document too; an unusable incoming id is replaced
        bad = http.get(
            "/cubes/analytic/point",
            params={"lat": 91, "lon": 0},
            headers={"X-Request-Id": "not a usable id; " + "x" * 80},
        )
        assert bad.status_code == 422
        rid = bad.headers["x-request-id"]
        assert re.fullmatch(r"[0-9a-f]{32}", rid) and bad.json()["request_id"] == rid
        line = wait_for(server, rid)
        assert (line["status"], line["chunk_gets"], line["operation"]) == (422, 0, "query_point")
        missing = http.get("/no/such/route")
        assert missing.json()["request_id"] == missing.headers["x-request-id"]
        assert wait_for(server, missing.headers["x-request-id"])["operation"] == "unmatched"

        # a keyed request names the key id (never the key)
        keyed = http.get("/cubes/closed", headers={"Authorization": f"Bearer {key[0]}"})
        line = wait_for(server, keyed.headers["x-request-id"])
        assert (line["status"], line["cube"], line["key_id"]) == (200, "closed", key[1])
        assert key[0] not in server.log()

    # one line per request: five requests, five lines (and health probes at start-up)
    lines = [r for r in log_lines(server).values() if r["path"] != "/healthz"]
    assert len(lines) == 5
