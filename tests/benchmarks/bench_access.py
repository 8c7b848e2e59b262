"""What private cubes, rate limits and the request log cost a warm request.

Two real ``alveary serve`` processes on 127.0.0.1 serve the same small analytic cube
(local disk): a plain one (no request log, no rate limit, public cube), and one with the
request log, a rate limit too high to refuse anything, and the cube served twice, public
and private. Warm point queries (the answer cache serves them) are sent by 16 concurrent
connections; rounds alternate between the servers and the best round of each counts.
Printed: requests per second and p50 latency, and ratios against the plain server. Also
the one-off cost of a new key (scrypt) against a remembered one, in process.
"""

from __future__ import annotations

import asyncio
import tempfile
import time
from pathlib import Path

import httpx
import numpy as np

from alveary.api._access import KeyRing, hash_key, new_key
from support.analytic import build_cube
from support.server import ServiceProcess

N = 1000
ROUNDS = 3
POINT = "/cubes/{}/point?lat=12.5&lon=-40.25"


async def _burst(url: str, path: str, headers: dict[str, str], n: int, concurrency: int = 16):
    latencies: list[float] = []
    bad = 0
    left = iter(range(n))
    limits = httpx.Limits(max_connections=concurrency, max_keepalive_connections=concurrency)
    async with httpx.AsyncClient(base_url=url, timeout=60, limits=limits, headers=headers) as c:

        async def worker() -> None:
            nonlocal bad
            for _ in left:
                t0 = time.perf_counter()
                r = await c.get(path)
                latencies.append(time.perf_counter() - t0)
                bad += r.status_code != 200

        t0 = time.perf_counter()
        await asyncio.gather(*(worker() for _ in range(concurrency)))
        elapsed = time.perf_counter() - t0
    return n / elapsed, float(np.percentile(np.array(latencies) * 1e3, 50)), bad


def main() -> None:
    key, key_id = new_key()
    hashed = hash_key(key)
    ring = KeyRing({"p"}, {"p": {key_id: hashed}})
    t0 = time.perf_counter()
    ring.check(key)
    first = time.perf_counter() - t0
    t0 = time.perf_counter()
    for _ in range(10_000):
        ring.known(key)
    again = (time.perf_counter() - t0) / 10_000
    print(f"new key (scrypt N=2^14): {first * 1e3:.1f} ms; remembered key: {again * 1e6:.1f} µs")

    root = Path(tempfile.mkdtemp(prefix="alveary-bench-access-"))
    url = str(root / "cube")
    build_cube(url, None, levels=(5,))
    plain = ServiceProcess([{"id": "o", "url": url}], env={"ALVEARY_ACCESS_LOG": "false"})
    guarded = ServiceProcess(
        [
            {"id": "o", "url": url},
            {"id": "p", "url": url, "public": False, "keys": {key_id: hashed}},
        ],
        env={"ALVEARY_RATE_LIMIT_RPS": "1000000", "ALVEARY_ACCESS_LOG": "true"},
    )
    cases = {
        "plain, public cube": (plain, "o", {}),
        "log + rate limit, public cube": (guarded, "o", {}),
        "log + rate limit, private cube + key": (guarded, "p", {"X-API-Key": key}),
    }
    best: dict[str, tuple[float, float, int]] = {}
    with plain, guarded:
        for svc, cube, headers in cases.values():  # warm-up: fill the answer caches
            asyncio.run(_burst(svc.url, POINT.format(cube), headers, 200))
        for _ in range(ROUNDS):
            for name, (svc, cube, headers) in cases.items():
                result = asyncio.run(_burst(svc.url, POINT.format(cube), headers, N))
                if name not in best or result[0] > best[name][0]:
                    best[name] = result
    base = best["plain, public cube"][0]
    print(f"\nwarm point queries, 16 connections, best of {ROUNDS} rounds of {N}")
    print(f"{'case':<40}{'req/s':>9}{'p50 ms':>9}{'non-200':>9}{'ratio':>8}")
    for name, (rps, p50, bad) in best.items():
        print(f"{name:<40}{rps:>9.0f}{p50:>9.2f}{bad:>9}{rps / base:>8.2f}")
