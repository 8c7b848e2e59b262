"""Faults of the store, end to end: a real ``alveary serve`` over a real S3-protocol server.

Never a silent wrong answer: an object the version's manifest lists but the store lacks is
a 503 with ``Retry-After`` (never cached, ``/readyz`` failing while it lasts), a chunk never
written is "no data", a chunk whose bytes were changed in the store is a 502 for the
requests that need it only, and two publishes inside one refresh interval give no wrong
answer. Values are judged against the field evaluated at the zone centres the service
reports (the grid's own centres, computed in the test); objects are deleted, restored and
damaged with boto3, outside the code under test.
"""

from __future__ import annotations

import re
import threading
import time

import httpx
import numpy as np
import pytest

from alveary import grid
from alveary.cube import create_cube, open_cube
from support.s3 import S3Server
from support.server import ServiceProcess

pytestmark = pytest.mark.server

LEVEL = 3
TIMES = np.datetime64("2024-05-01", "s") + np.arange(4) * np.timedelta64(1, "D")


def field(lat, lon, days, offset=0.0):
    return 280.0 + 10.0 * np.cos(np.radians(lat)) + 3.0 * np.sin(np.radians(lon)) + days + offset


def build(url, options, cube_id, offset=0.0, **kwargs):
    """temp (float32) everywhere; rain (float64) only in strip 0 (region 0)."""
    writer = create_cube(
        url,
        cube_id=cube_id,
        times=TIMES,
        levels=[LEVEL],
        variables={
            "temp": {"units": "K", "dtype": "float32"},
            "rain": {"units": "mm", "dtype": "float64"},
        },
        storage_options=options,
        **kwargs,
    )
    zones = grid.all_zones(LEVEL)
    lat, lon = grid.zone_to_point(zones)
    days = np.arange(TIMES.size, dtype=np.float64)[:, None]
    writer.write("temp", LEVEL, zones, field(lat[None, :], lon[None, :], days, offset))
    _, region, _, _ = grid.zone_to_index(zones)
    strip0 = zones[region == 0]
    la, lo = grid.zone_to_point(strip0)
    writer.write("rain", LEVEL, strip0, 1.0 + 0.25 * days + 0.0 * la[None, :] * lo[None, :])
    return writer.publish()


def point_in_region(region_wanted, k=0):
    """A point (lat, lon) at the centre of a level-3 zone of the given region."""
    zones = grid.all_zones(LEVEL)
    _, region, i, _ = grid.zone_to_index(zones)
    inside = zones[(region == region_wanted) & (i > 2)]
    lat, lon = grid.zone_to_point(inside[k : k + 1])
    return float(lat[0]), float(lon[0])


def object_key(url, options, var, lat, lon):
    """The bucket key of the object holding (var, the zone at lat/lon), via the cube's
    read plan (zarr's own chunk key) and the version it names."""
    cube = open_cube(url, options)
    zone = grid.point_to_zone(lat, lon, LEVEL)
    (key,) = cube.snapshot().plan(var, [zone]).keys
    prefix = url.removeprefix("s3://").split("/", 1)[1]
    return f"{prefix}/versions/{cube.version}/{key}"


def temp_is_right(body, offset=0.0):
    """The float32 values the JSON numbers read back to are the stored ones (numpy)."""
    (row,) = body["zones"]
    days = np.arange(TIMES.size, dtype=np.float64)
    want = field(row["lat"], row["lon"], days, offset).astype(np.float32)
    got = np.array(row["values"]["temp"], dtype=np.float64).astype(np.float32)
    return bool(np.array_equal(got, want))


def point(c, lat, lon, var="temp"):
    params = {"lat": lat, "lon": lon, "vars": var, "datetime": "../.."}
    return c.get(f"/cubes/{CUBE}/point", params=params)


CUBE = "faulty"


@pytest.fixture(scope="module")
def store(s3_server):
    bucket = s3_server.create_bucket()
    url, options = f"s3://{bucket}/{CUBE}", s3_server.storage_options()
    build(url, options, CUBE)
    return bucket, url, options


@pytest.fixture(scope="module")
def svc(store):
    _, url, options = store
    cubes = [{"id": CUBE, "url": url, "storage_options": options}]
    proc = ServiceProcess(cubes, options={"refresh_interval": 0.5})
    proc.start()
    try:
        yield proc
    finally:
        proc.stop()


@pytest.fixture(scope="module")
def http(svc):
    with httpx.Client(base_url=svc.url, timeout=30) as client:
        yield client


def test_a_listed_chunk_missing_is_503_until_it_is_back(s3_server, store, svc, http):
    bucket, url, options = store
    s3 = s3_server.client()
    lat, lon = point_in_region(2)
    key = object_key(url, options, "temp", lat, lon)
    saved = s3.get_object(Bucket=bucket, Key=key)["Body"].read()
    assert http.get("/readyz").status_code == 200
    s3.delete_object(Bucket=bucket, Key=key)
    try:
        for _ in range(2):  # the second time too: nothing was cached
            r = point(http, lat, lon)
            assert r.status_code == 503, r.text
            assert int(r.headers["retry-after"]) >= 1
            assert "public" not in r.headers.get("cache-control", "")
            assert r.headers["content-type"].startswith("application/problem+json")
        ready = http.get("/readyz")
        assert ready.status_code == 503 and ready.json()["ready"] is False
        assert int(ready.headers["retry-after"]) >= 1
        assert http.get("/healthz").status_code == 200
    finally:
        s3.put_object(Bucket=bucket, Key=key, Body=saved)
    r = point(http, lat, lon)
    assert r.status_code == 200, r.text
    assert temp_is_right(r.json())
    assert http.get("/readyz").status_code == 200
    # The fault was logged with time, level, cube and the object's key.
    log = svc.log()
    line = next(x for x in log.splitlines() if "store fault" in x and CUBE in x)
    assert re.match(r"^\d{4}-\d\d-\d\d \d\d:\d\d:\d\d", line), line
    assert " ERROR " in line and key.split("/", 1)[1] in line
    assert re.search(r" request=[0-9a-f]{32}$", line), line  # the request it happened in


def test_a_chunk_never_written_is_no_data(http):
    lat, lon = point_in_region(1)
    r = point(http, lat, lon, "temp,rain")
    assert r.status_code == 200, r.text
    values = r.json()["zones"][0]["values"]
    assert values["rain"] == [None] * TIMES.size  # rain was only written in strip 0
    assert temp_is_right(r.json())
    lat0, lon0 = point_in_region(0)
    rain = point(http, lat0, lon0, "rain").json()["zones"][0]["values"]["rain"]
    assert rain == [1.0, 1.25, 1.5, 1.75]


def test_a_corrupted_chunk_is_502_for_the_requests_that_need_it(s3_server, store, http):
    bucket, url, options = store
    s3 = s3_server.client()
    lat, lon = point_in_region(3)
    key = object_key(url, options, "temp", lat, lon)
    saved = s3.get_object(Bucket=bucket, Key=key)["Body"].read()
    damaged = bytearray(saved)
    middle = len(damaged) // 2
    for n in range(10):  # ten bytes inside the compressed chunk
        damaged[middle + n] ^= 0x5A
    s3.put_object(Bucket=bucket, Key=key, Body=bytes(damaged))
    try:
        r = point(http, lat, lon)
        assert r.status_code == 502, r.text
        assert "public" not in r.headers.get("cache-control", "")
        # Other chunks are unaffected: another strip's temp, and rain.
        other_lat, other_lon = point_in_region(4)
        ok = point(http, other_lat, other_lon)
        assert ok.status_code == 200 and temp_is_right(ok.json())
        assert point(http, *point_in_region(0, 1), "rain").status_code == 200
    finally:
        s3.put_object(Bucket=bucket, Key=key, Body=saved)
    r = point(http, lat, lon)
    assert r.status_code == 200 and temp_is_right(r.json())


@pytest.mark.parametrize("grace", [3.0, 0.0])
def test_two_publishes_inside_one_refresh_interval_give_no_wrong_answer(s3_server, grace):
    """keep one version; grace longer than the refresh interval (1 s): every answer is
    right for the version it names. With no grace at all (a misconfiguration) answers may
    fail with 503 but are still never wrong."""
    bucket = s3_server.create_bucket()
    url, options = f"s3://{bucket}/twice", s3_server.storage_options()
    offsets = {build(url, options, "twice", 0.0, keep_versions=1, grace_seconds=grace): 0.0}
    cubes = [{"id": "twice", "url": url, "storage_options": options}]
    proc = ServiceProcess(cubes, options={"refresh_interval": 1.0, "answer_cache_bytes": 0})
    proc.start()
    answers: list[tuple[int, dict]] = []
    stop = threading.Event()

    def ask() -> None:
        zones = grid.all_zones(LEVEL)
        lat, lon = grid.zone_to_point(zones)
        with httpx.Client(base_url=proc.url, timeout=30) as c:
            n = 0
            while not stop.is_set():
                k = (n * 37) % zones.size
                n += 1
                r = c.get(
                    "/cubes/twice/point",
                    params={
                        "lat": float(lat[k]),
                        "lon": float(lon[k]),
                        "vars": "temp",
                        "datetime": "../..",
                    },
                )
                answers.append((r.status_code, r.json() if r.status_code == 200 else {}))

    thread = threading.Thread(target=ask)
    thread.start()
    try:
        time.sleep(0.3)
        offsets[build(url, options, "twice", 100.0, keep_versions=1, grace_seconds=grace)] = 100.0
        offsets[build(url, options, "twice", 200.0, keep_versions=1, grace_seconds=grace)] = 200.0
        time.sleep(2.5)  # more than two refresh intervals
    finally:
        stop.set()
        thread.join(timeout=30)
        proc.stop()
    wrong = 0
    for status, body in answers:
        if status != 200:
            assert status == 503 and grace == 0.0
            continue
        wrong += not temp_is_right(body, offsets[body["version"]])
    assert len(answers) > 10 and wrong == 0
    assert any(b.get("version") == max(offsets, key=offsets.get) for _, b in answers)


def test_a_store_refusing_connections_is_503_and_readyz_answers(tmp_path):
    with S3Server() as private:
        bucket = private.create_bucket()
        url, options = f"s3://{bucket}/gone", private.storage_options()
        build(url, options, "gone")
        cubes = [{"id": "gone", "url": url, "storage_options": options}]
        proc = ServiceProcess(cubes, options={"refresh_interval": 1000})
        proc.start()
    try:  # the S3 server is gone now: connections are refused
        with httpx.Client(base_url=proc.url, timeout=30) as c:
            r = c.get("/cubes/gone/point", params={"lat": 1, "lon": 2})
            assert r.status_code == 503 and int(r.headers["retry-after"]) >= 1
            ready = c.get("/readyz")
            assert ready.status_code == 503 and ready.json()["cubes"] == {"gone": "unreachable"}
    finally:
        proc.stop()
