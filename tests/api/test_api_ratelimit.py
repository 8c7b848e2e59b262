"""Rate limits over HTTP, against a real ``alveary serve``.

Judges: RFC 9110 (429 is "Too Many Requests"; ``Retry-After`` as delay-seconds, a
non-negative integer), RFC 9457 (the problem document's members), and the configured
budget itself (burst 5, 1 request a second: the sixth request within the window is
refused, one after ``Retry-After`` seconds is admitted).
"""

from __future__ import annotations

import time
from http import HTTPStatus

import httpx
import pytest

from alveary import RateLimited
from alveary.api._access import hash_key, new_key
from alveary.client import Client
from support.server import ServiceProcess

pytestmark = pytest.mark.server

BURST = 5
POINT = "/cubes/analytic/point"


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
    env = {
        "ALVEARY_RATE_LIMIT_RPS": "1",
        "ALVEARY_RATE_LIMIT_BURST": str(BURST),
        "ALVEARY_RATE_LIMIT_CLIENT_HEADER": "X-Forwarded-For",
    }
    proc = ServiceProcess(cubes, env=env).start()
    try:
        yield proc
    finally:
        proc.stop()


def refused(r):
    assert r.status_code == 429 == HTTPStatus.TOO_MANY_REQUESTS, r.text
    assert r.headers["content-type"].startswith("application/problem+json")
    wait = r.headers["retry-after"]
    assert wait.isdigit() and 1 <= int(wait) <= BURST  # delay-seconds, within the window
    body = r.json()
    assert body["status"] == 429 and body["title"] == "Too many requests"
    assert body["retry_after"] == int(wait) and "retry after" in body["detail"]
    return int(wait)


def test_budget_per_client_and_retry_after(server, key):
    params = {"lat": 1.0, "lon": 2.0}
    with httpx.Client(base_url=server.url, timeout=30) as http:
        me = {"X-Forwarded-For": "198.51.100.7"}
        for _ in range(BURST):
            assert http.get(POINT, params=params, headers=me).status_code == 200
        wait = refused(http.get(POINT, params=params, headers=me))
        # every route counts, cached answers and unknown paths too ...
        refused(http.get("/cubes", headers=me))
        refused(http.get("/no/such/path", headers=me))
        # ... but not the probes
        for _ in range(3 * BURST):
            assert http.get("/healthz", headers=me).status_code == 200
        assert http.get("/readyz", headers=me).status_code == 200
        # another address (the last entry the trusted proxy appended) has its own budget
        other = {"X-Forwarded-For": "198.51.100.7, 203.0.113.9"}
        assert http.get(POINT, params=params, headers=other).status_code == 200
        # a valid API key is a client of its own, whatever its address
        keyed = {**me, "X-API-Key": key[0]}
        for _ in range(BURST):
            assert http.get("/cubes/closed", headers=keyed).status_code == 200
        refused(http.get("/cubes/closed", headers=keyed))
        # a wrong key does not escape the address's budget
        refused(http.get(POINT, params=params, headers={**me, "X-API-Key": "0" * 12 + ".x" * 10}))
        # the Python client raises the error of the one table, with the wait
        with Client(server.url, headers=me) as client, pytest.raises(RateLimited) as info:
            client.point("analytic", 1.0, 2.0)
        assert 1 <= info.value.retry_after <= BURST
        time.sleep(wait + 0.2)
        assert http.get(POINT, params=params, headers=me).status_code == 200
