"""Benchmarks of the HTTP service: ratios measured in one run on this machine.

A cube (levels 7 and 9, 365 daily steps over a 50° x 40° region) is written to the
S3-protocol test server (moto_server on 127.0.0.1) and served by a real ``alveary serve``
process on 127.0.0.1. Measured:

1. warm point queries per second against the same server's /healthz (wrk on loopback;
   skipped with a message if wrk is absent), and p99 / p50 latency;
1b. fresh points: every request a new random point inside the cube's coverage (what a
   field app's GPS fixes send; no answer can be replayed), answer cache off, per second
   against /healthz on the same server, with p50 and p99 (a keep-alive asyncio
   load generator on raw sockets, so no tool needs installing);
2. cold queries: chunk GETs the S3 server logged against the plan's minimal cover
   (point, disk k = 10, a 10 000-zone polygon, a one-year series);
3. a 100 000-zone polygon answer: Arrow against JSON, time and bytes;
4. server RSS after 100 000 mixed requests against the configured cache size.
"""

from __future__ import annotations

import asyncio
import os
import re
import shutil
import statistics
import subprocess
import tempfile
import time
from pathlib import Path

import httpx
import numpy as np

from alveary import grid
from alveary.cube import create_cube
from alveary.query import (
    Catalog,
    CubeSource,
    DiskQuery,
    Limits,
    PointQuery,
    PolygonQuery,
    Selection,
    make_plan,
    parse_datetime,
    parse_polygon,
    resolve,
)
from support.s3 import S3Server
from support.server import ServiceProcess

REGION = (0.0, 10.0, 90.0, 70.0)  # west, south, east, north
LEVELS = (7, 9)
NTIMES = 365
CACHE_BYTES = 64 * 2**20
ANSWER_BYTES = 32 * 2**20
RNG = np.random.default_rng(20240501)


def build(url: str, options: dict) -> float:
    start = time.perf_counter()
    times = np.datetime64("2023-01-01T00:00:00", "s") + np.arange(NTIMES) * np.timedelta64(1, "D")
    writer = create_cube(
        url,
        cube_id="bench",
        title="Benchmark field (invented)",
        times=times,
        levels=list(LEVELS),
        variables={"temp": {"units": "K", "long_name": "invented temperature"}},
        coverage=REGION,
        storage_options=options,
    )
    days = np.arange(NTIMES, dtype=np.float64)[:, None]
    for level in LEVELS:
        zones = grid.zones_in_bbox(*REGION, level)
        lat, _ = grid.zone_to_point(zones)
        for i in range(0, zones.size, 200_000):
            sl = slice(i, i + 200_000)
            values = 280 + 10 * np.cos(np.radians(lat[sl]))[None, :] + 5 * np.sin(days / 58.0)
            writer.write("temp", level, zones[sl], values.astype(np.float32))
    writer.publish()
    return time.perf_counter() - start


def square(lon0: float, lat0: float, half: float) -> dict:
    w, e, s, n = lon0 - half, lon0 + half, lat0 - half * 0.7, lat0 + half * 0.7
    return {"type": "Polygon", "coordinates": [[[w, s], [e, s], [e, n], [w, n], [w, s]]]}


def sized_square(lon0: float, lat0: float, zones: int, level: int) -> dict:
    """A square polygon holding about ``zones`` zones at ``level``."""
    half = 0.5
    for _ in range(40):
        count = grid.zones_in_polygon(square(lon0, lat0, half), level).size
        half = min(half * (zones / max(count, 1)) ** 0.5, 30.0)
        if abs(count - zones) < zones * 0.01:
            break
    return square(lon0, lat0, half)


def wrk(
    url: str,
    seconds: int = 8,
    connections: int = 32,
    threads: int = 2,
    script: list[str] | None = None,
    prefix: list[str] | None = None,
):
    args = [*(prefix or []), "wrk", f"-t{threads}", f"-c{connections}", f"-d{seconds}s"]
    args += ["--latency", *(script or []), url]
    out = subprocess.run(args, capture_output=True, text=True, check=True).stdout
    rps = float(re.search(r"Requests/sec:\s+([\d.]+)", out).group(1))
    lat = {}
    for pct, value, unit in re.findall(r"\s(50|99)%\s+([\d.]+)(us|ms|s)\b", out):
        lat[pct] = float(value) * {"us": 1e-3, "ms": 1.0, "s": 1e3}[unit]
    total = re.search(r"(\d+) requests in", out)
    non2xx = re.search(r"Non-2xx or 3xx responses: (\d+)", out)
    return (
        rps,
        lat.get("50"),
        lat.get("99"),
        int(total.group(1)),
        int(non2xx.group(1)) if non2xx else 0,
    )


def rss_kib(pid: int) -> int:
    for line in Path(f"/proc/{pid}/status").read_text().splitlines():
        if line.startswith("VmRSS:"):
            return int(line.split()[1])
    return 0


def main() -> None:
    with S3Server() as s3:
        bucket = s3.create_bucket()
        url, options = f"s3://{bucket}/bench", s3.storage_options()
        print(f"cube written to the S3 test server in {build(url, options):.1f} s")
        cubes = [{"id": "bench", "url": url, "storage_options": options}]
        cold_queries(s3, cubes, url, options)
        base = {"cache_bytes": CACHE_BYTES, "max_zones": 150_000}
        # Answer cache off: what the chunk cache alone gives, and the encoders' own cost.
        svc = ServiceProcess(cubes, options={**base, "answer_cache_bytes": 0})
        with svc, httpx.Client(base_url=svc.url, timeout=120) as http:
            fresh_points(svc)
            arrow_vs_json(http)
            warm_throughput(svc, "chunk cache only (answer cache off)")
        with ServiceProcess(cubes, options=base) as svc:
            warm_throughput(svc, f"default answer cache ({ANSWER_BYTES // 2**20} MiB)")
        with ServiceProcess(cubes, options={**base, "answer_cache_bytes": ANSWER_BYTES}) as svc:
            memory(svc)


def plan_chunks(url: str, options: dict, query) -> int:
    cat = Catalog([CubeSource("bench", url, storage_options=options)])
    cat.open_all()
    return make_plan(resolve(cat, "bench", query), Limits(max_zones=150_000)).chunk_count


def cold_queries(s3: S3Server, cubes: list, url: str, options: dict) -> None:
    print("\n### cold queries (a fresh server each): chunk GETs against the plan's cover")
    print(f"{'query':<26}{'zones':>8}{'plan':>6}{'GETs':>6}{'ratio':>7}{'time ms':>9}")
    every = Selection(time=parse_datetime("../.."))
    poly = sized_square(20.0, 40.0, 10_000, 9)
    cases = [
        (
            "point",
            "GET",
            "/cubes/bench/point",
            {"lat": 30.1, "lon": 3.2},
            None,
            PointQuery(30.1, 3.2),
        ),
        (
            "disk k=10",
            "GET",
            "/cubes/bench/disk",
            {"lat": 35.3, "lon": 12.7, "k": 10},
            None,
            DiskQuery(k=10, lat=35.3, lon=12.7),
        ),
        (
            "polygon ~10 000 zones",
            "POST",
            "/cubes/bench/polygon",
            {},
            poly,
            PolygonQuery(parse_polygon(poly, 100)),
        ),
        (
            "one-year series (point)",
            "GET",
            "/cubes/bench/point",
            {"lat": 55.5, "lon": 44.4, "datetime": "../.."},
            None,
            PointQuery(55.5, 44.4, every),
        ),
    ]
    for name, method, path, params, body, query in cases:
        planned = plan_chunks(url, options, query)
        with ServiceProcess(cubes) as svc, httpx.Client(base_url=svc.url, timeout=120) as http:
            mark = s3.mark()
            t0 = time.perf_counter()
            r = http.request(method, path, params=params, json=body)
            elapsed = (time.perf_counter() - t0) * 1e3
        r.raise_for_status()
        gets = [q for q in s3.requests(since=mark) if q.is_object_get and "/c/" in q.path]
        zones = len(r.json()["zones"])
        ratio = len(gets) / planned
        print(f"{name:<26}{zones:>8}{planned:>6}{len(gets):>6}{ratio:>7.2f}{elapsed:>9.1f}")


def arrow_vs_json(http: httpx.Client) -> None:
    print("\n### 100 000-zone polygon: Arrow against JSON (warm, median of 5)")
    poly = sized_square(45.0, 40.0, 100_000, 9)
    http.post("/cubes/bench/polygon", json=poly, params={"f": "arrow"}).raise_for_status()
    rows = []
    for fmt in ("json", "arrow", "csv", "geojson"):
        times, size = [], 0
        for _ in range(5 if fmt != "geojson" else 1):
            t0 = time.perf_counter()
            r = http.post("/cubes/bench/polygon", json=poly, params={"f": fmt})
            r.raise_for_status()
            size = len(r.content)
            times.append(time.perf_counter() - t0)
        rows.append((fmt, statistics.median(times), size))
    zones = len(http.post("/cubes/bench/polygon", json=poly).json()["zones"])
    print(f"zones: {zones}")
    print(f"{'format':<10}{'time ms':>10}{'MB':>10}")
    for fmt, t, size in rows:
        print(f"{fmt:<10}{t * 1e3:>10.1f}{size / 1e6:>10.2f}")
    tj, ta = rows[0][1], rows[1][1]
    print(
        f"Arrow is {tj / ta:.1f}x faster than JSON (goal >= 5), "
        f"{rows[0][2] / rows[1][2]:.1f}x smaller"
    )


def warm_throughput(svc: ServiceProcess, label: str) -> None:
    print(f"\n### warm point queries against /healthz, {label}")
    print("(wrk, 2 threads, 32 connections, loopback; the same server, the same run)")
    if shutil.which("wrk") is None:
        print("wrk is not installed: skipped (apt-get update && apt-get install -y wrk)")
        return
    point = f"{svc.url}/cubes/bench/point?lat=45.2&lon=7.6"
    httpx.get(point).raise_for_status()
    wrk(point, seconds=2)  # warm-up
    h = wrk(f"{svc.url}/healthz")
    p = wrk(point)
    # Latency without a queue: one connection at a time (wrk, 1 thread, 1 connection).
    h1 = wrk(f"{svc.url}/healthz", connections=1, threads=1)
    p1 = wrk(point, connections=1, threads=1)
    print(f"{'path':<10}{'req/s':>10}{'p50 ms':>10}{'p99 ms':>10}{'non-2xx':>10}")
    for name, (rps, p50, p99, _, bad) in (("healthz", h), ("point", p)):
        print(f"{name:<10}{rps:>10.0f}{p50:>10.2f}{p99:>10.2f}{bad:>10}")
    for name, (rps, p50, p99, _, _) in (("healthz 1c", h1), ("point 1c", p1)):
        print(f"{name:<10}{rps:>10.0f}{p50:>10.3f}{p99:>10.3f}")
    print(
        f"point / healthz rate: {p[0] / h[0]:.2f} (goal >= 0.6); "
        f"point p99 / p50: {p[2] / p[1]:.2f} at 32 connections, "
        f"{p1[2] / p1[1]:.2f} at one (goal < 3)"
    )


async def _load(
    host: str, port: int, paths: list[str], seconds: float, connections: int
) -> tuple[float, float, float, int]:
    """Keep-alive GETs over raw sockets for ``seconds``: (req/s, p50 ms, p99 ms, non-200)."""
    queue = iter(paths * (1 + 1_000_000 // max(len(paths), 1)))
    latencies: list[float] = []
    bad = 0
    stop = time.perf_counter() + seconds

    async def one_connection() -> None:
        nonlocal bad
        reader, writer = await asyncio.open_connection(host, port)
        try:
            while time.perf_counter() < stop:
                path = next(queue)
                t0 = time.perf_counter()
                writer.write(f"GET {path} HTTP/1.1\r\nHost: {host}\r\n\r\n".encode())
                head = await reader.readuntil(b"\r\n\r\n")
                length = int(re.search(rb"(?i)content-length:\s*(\d+)", head).group(1))
                await reader.readexactly(length)
                latencies.append(time.perf_counter() - t0)
                bad += not head.startswith(b"HTTP/1.1 200")
        finally:
            writer.close()

    t0 = time.perf_counter()
    await asyncio.gather(*(one_connection() for _ in range(connections)))
    elapsed = time.perf_counter() - t0
    ms = np.array(latencies) * 1e3
    return len(latencies) / elapsed, float(np.median(ms)), float(np.percentile(ms, 99)), bad


_FRESH_LUA = """
math.randomseed(7)
request = function()
  local lat = %r + %r * math.random()
  local lon = %r + %r * math.random()
  return wrk.format("GET", string.format("/cubes/bench/point?lat=%%.6f&lon=%%.6f", lat, lon))
end
"""


def _pinned(pid: int) -> bool:
    """Put the server (every thread) on the last core and keep the first for the load
    generator, when there are two or more: on a 2-core machine they would otherwise take
    turns on both, and the rates would measure the scheduler as much as the server."""
    if shutil.which("taskset") is None or (os.cpu_count() or 1) < 2:
        return False
    last = str((os.cpu_count() or 2) - 1)
    done = subprocess.run(["taskset", "-a", "-p", "-c", last, str(pid)], capture_output=True)
    return done.returncode == 0


def fresh_points(svc: ServiceProcess, seconds: float = 5.0, rounds: int = 3) -> None:
    """Fresh random points inside the coverage against /healthz, the same server."""
    print("\n### fresh points: a new random point inside the coverage every request")
    west, south, east, north = REGION
    # Warm the chunks of the latest step everywhere (one bbox read per level) and the code.
    middle = (west + east) / 2
    for level in LEVELS:
        for box in ((west, south, middle, north), (middle, south, east, north)):
            httpx.get(
                f"{svc.url}/cubes/bench/bbox",
                params={"bbox": ",".join(map(str, box)), "level": level, "f": "arrow"},
                timeout=300,
            ).raise_for_status()
    pinned = _pinned(svc.pid)
    if shutil.which("wrk") is not None:
        script = Path(tempfile.mkdtemp(prefix="alveary-bench-")) / "fresh.lua"
        span = (south + 0.5, north - south - 1.0, west + 0.5, east - west - 1.0)
        script.write_text(_FRESH_LUA % span)
        taskset = ["taskset", "-c", "0"] if pinned else []

        def run(path: str, conns: int, lua: bool) -> tuple[float, float, float, int]:
            extra = ["-s", str(script)] if lua else []
            rps, p50, p99, _, bad = wrk(
                svc.url + path,
                seconds=int(seconds),
                connections=conns,
                threads=1,
                script=extra,
                prefix=taskset,
            )
            return rps, p50, p99, bad

        tool = "wrk, one thread, a Lua request function drawing each point"
    else:
        host, port = svc.url.removeprefix("http://").split(":")
        rng = np.random.default_rng(7)
        lat = south + 0.5 + (north - south - 1.0) * rng.random(200_000)
        lon = west + 0.5 + (east - west - 1.0) * rng.random(200_000)
        points = [
            f"/cubes/bench/point?lat={a:.6f}&lon={b:.6f}" for a, b in zip(lat, lon, strict=True)
        ]

        def run(path: str, conns: int, lua: bool) -> tuple[float, float, float, int]:
            return asyncio.run(_load(host, int(port), points if lua else [path], seconds, conns))

        tool = "wrk is not installed: an asyncio raw-socket keep-alive client instead"
    print(f"(answer cache off, warm chunks, default request log; {tool};")
    print(
        f" server {'on its own core (taskset)' if pinned else 'not pinned'}; "
        f"{rounds} rounds of /healthz then fresh points per connection count, interleaved)"
    )
    run("/", 8, True)  # warm-up
    print(
        f"{'conns':>6}{'round':>6}{'healthz/s':>11}{'point/s':>9}{'ratio':>7}"
        f"{'p50 ms':>8}{'p99 ms':>8}{'p99/p50':>8}{'non-2xx':>8}"
    )
    summary = []
    for conns in (1, 8):
        ratios, tails = [], []
        for k in range(rounds):
            h = run("/healthz", conns, False)
            p = run("/", conns, True)
            ratios.append(p[0] / h[0])
            tails.append(p[2] / p[1])
            print(
                f"{conns:>6}{k + 1:>6}{h[0]:>11.0f}{p[0]:>9.0f}{ratios[-1]:>7.2f}"
                f"{p[1]:>8.2f}{p[2]:>8.2f}{tails[-1]:>8.2f}{h[3] + p[3]:>8}"
            )
        summary.append((conns, statistics.median(ratios), statistics.median(tails)))
    if pinned:  # back on every core for what follows
        every = f"0-{(os.cpu_count() or 2) - 1}"
        subprocess.run(["taskset", "-a", "-p", "-c", every, str(svc.pid)], capture_output=True)
    for conns, ratio, tail in summary:
        print(
            f"{conns} connection(s): fresh point / healthz rate {ratio:.2f} (median of "
            f"{rounds}; goal >= 0.5); point p99 / p50 {tail:.2f} (goal < 3)"
        )


async def _mixed(url: str, n: int, seed: int, concurrency: int = 16):
    """n random requests (point, disk k=3, radius 15 km, one-year series at level 7)."""
    rng = np.random.default_rng(seed)
    lat = 40.0 + 8.0 * rng.random(n)
    lon = 10.0 + 10.0 * rng.random(n)
    kinds = rng.integers(0, 4, n)
    templates = (
        "/cubes/bench/point?lat={:.5f}&lon={:.5f}",
        "/cubes/bench/disk?lat={:.5f}&lon={:.5f}&k=3",
        "/cubes/bench/radius?lat={:.5f}&lon={:.5f}&meters=15000",
        "/cubes/bench/point?lat={:.5f}&lon={:.5f}&level=7&datetime=../..",
    )
    paths = iter([templates[k].format(a, b) for k, a, b in zip(kinds, lat, lon, strict=True)])
    latencies: list[float] = []
    bad = 0
    limits = httpx.Limits(max_connections=concurrency, max_keepalive_connections=concurrency)
    async with httpx.AsyncClient(base_url=url, timeout=120, limits=limits) as client:

        async def worker() -> None:
            nonlocal bad
            for path in paths:
                t0 = time.perf_counter()
                r = await client.get(path)
                latencies.append(time.perf_counter() - t0)
                bad += r.status_code != 200

        t0 = time.perf_counter()
        await asyncio.gather(*(worker() for _ in range(concurrency)))
        elapsed = time.perf_counter() - t0
    ms = np.array(latencies) * 1e3
    return n / elapsed, float(np.percentile(ms, 50)), float(np.percentile(ms, 99)), bad


def memory(svc: ServiceProcess) -> None:
    print("\n### server RSS over 100 000 mixed requests (point, disk k=3, radius 15 km, series)")
    print("(an asyncio httpx client, 16 connections, every request a different place)")
    print(
        f"caches configured: chunks {CACHE_BYTES / 2**20:.0f} MiB + answers "
        f"{ANSWER_BYTES / 2**20:.0f} MiB + plans 32 MiB"
    )
    start = rss_kib(svc.pid)
    print(
        f"{'requests':>10}{'RSS MiB':>10}{'chunks MiB':>12}{'answers MiB':>13}{'req/s':>8}"
        f"{'p50 ms':>8}{'p99 ms':>8}"
    )
    print(f"{0:>10}{start / 1024:>10.0f}")
    done = 0
    for seed, batch in enumerate((20_000, 40_000, 40_000)):
        rps, p50, p99, bad = asyncio.run(_mixed(svc.url, batch, seed))
        done += batch
        metrics = httpx.get(svc.url + "/metrics").text
        held = float(re.search(r"^alveary_chunk_cache_bytes ([\d.e+]+)", metrics, re.M).group(1))
        answers = float(
            re.search(r"^alveary_answer_cache_bytes ([\d.e+]+)", metrics, re.M).group(1)
        )
        rss = rss_kib(svc.pid)
        print(
            f"{done:>10}{rss / 1024:>10.0f}{held / 2**20:>12.0f}{answers / 2**20:>13.0f}"
            f"{rps:>8.0f}{p50:>8.1f}{p99:>8.1f}" + (f"  ({bad} non-200)" if bad else "")
        )
    print(
        f"RSS growth over the run: {(rss - start) / 1024:.0f} MiB "
        f"(goal: within the {(CACHE_BYTES + ANSWER_BYTES) / 2**20 + 32:.0f} MiB of caches "
        "plus a fixed allowance)"
    )


if __name__ == "__main__":
    import sys

    sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
    main()
