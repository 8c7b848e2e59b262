"""OGC API - EDR against the native API on the same server: the position query's rate
against the native point query's, for the same place and the same time steps.

A cube (levels 7 and 9, 30 daily steps over a 20° x 20° region) is written to the
S3-protocol test server (moto_server on 127.0.0.1) and served by a real ``alveary
serve`` process. wrk (2 threads, 32 connections, loopback) measures, in alternation so
that drift of the machine falls on both alike (five rounds of 3 s each; the ratio is
the median of the rounds' ratios, with their range):

- the latest step at a point: native ``/point`` against EDR ``position`` with the last
  step's instant as ``datetime``;
- the whole 30-step series: native ``datetime=../..`` against EDR without ``datetime``;

once with the default answer cache (identical repeats are served before routing) and
once with it off (every request resolved, planned, read from the chunk cache, encoded:
CoverageJSON against native JSON). Goal: EDR at least 0.9 of the native rate.
"""

from __future__ import annotations

import re
import shutil
import statistics
import subprocess
import time
from pathlib import Path
from urllib.parse import quote

import httpx
import numpy as np

from alveary import grid
from alveary.cube import create_cube
from support.s3 import S3Server
from support.server import ServiceProcess

REGION = (0.0, 35.0, 20.0, 55.0)  # west, south, east, north
LEVELS = (7, 9)
NTIMES = 30
START = np.datetime64("2024-05-01T00:00:00", "s")
LAT, LON = 45.2, 7.6


def build(url: str, options: dict) -> float:
    t0 = time.perf_counter()
    times = START + np.arange(NTIMES) * np.timedelta64(1, "D")
    writer = create_cube(
        url,
        cube_id="bench",
        title="EDR benchmark field (invented)",
        times=times,
        levels=list(LEVELS),
        variables={"temp": {"units": "K", "long_name": "invented temperature"}},
        coverage=REGION,
        storage_options=options,
    )
    days = np.arange(NTIMES, dtype=np.float64)[:, None]
    for level in LEVELS:
        zones = grid.zones_in_bbox(*REGION, level)
        lat, lon = grid.zone_to_point(zones)
        values = 280 + 10 * np.cos(np.radians(lat))[None, :] + np.sin(np.radians(lon)) + days
        writer.write("temp", level, zones, values.astype(np.float32))
    writer.publish()
    return time.perf_counter() - t0


def wrk_rate(url: str, seconds: int = 3) -> tuple[float, int]:
    args = ["wrk", "-t2", "-c32", f"-d{seconds}s", url]
    out = subprocess.run(args, capture_output=True, text=True, check=True).stdout
    rps = float(re.search(r"Requests/sec:\s+([\d.]+)", out).group(1))
    bad = re.search(r"Non-2xx or 3xx responses: (\d+)", out)
    return rps, int(bad.group(1)) if bad else 0


def pairs(base: str) -> list[tuple[str, str, str]]:
    last = np.datetime_as_string(START + (NTIMES - 1) * np.timedelta64(1, "D"), unit="s") + "Z"
    coords = quote(f"POINT({LON} {LAT})")
    native = f"{base}/cubes/bench/point?lat={LAT}&lon={LON}"
    edr = f"{base}/collections/bench/position?coords={coords}"
    return [
        ("latest step", native, f"{edr}&datetime={last}"),
        (f"{NTIMES}-step series", f"{native}&datetime=../..", edr),
    ]


def compare(svc: ServiceProcess, label: str, rounds: int = 5) -> list[float]:
    print(f"\n### {label}")
    print(f"{'answer':<18}{'native req/s':>14}{'EDR req/s':>12}{'EDR/native':>12}{'range':>14}")
    ratios = []
    for name, native, edr in pairs(svc.url):
        a, b = httpx.get(native), httpx.get(edr)
        a.raise_for_status()
        b.raise_for_status()
        assert b.headers["content-type"] == "application/vnd.cov+json"
        wrk_rate(native, 1)
        wrk_rate(edr, 1)  # warm-up
        rates: dict[str, list[float]] = {"native": [], "edr": []}
        per_round = []
        for _ in range(rounds):  # alternate: drift of the machine falls on both alike
            for key, url in (("native", native), ("edr", edr)):
                rps, bad = wrk_rate(url)
                if bad:
                    raise RuntimeError(f"{bad} non-2xx answers from {url}")
                rates[key].append(rps)
            per_round.append(rates["edr"][-1] / rates["native"][-1])
        n, e = statistics.median(rates["native"]), statistics.median(rates["edr"])
        ratio = statistics.median(per_round)
        ratios.append(ratio)
        spread = f"{min(per_round):.2f}-{max(per_round):.2f}"
        print(f"{name:<18}{n:>14.0f}{e:>12.0f}{ratio:>12.2f}{spread:>14}")
    return ratios


def main() -> None:
    if shutil.which("wrk") is None:
        print("wrk is not installed: skipped (apt-get update && apt-get install -y wrk)")
        return
    with S3Server() as s3:
        bucket = s3.create_bucket()
        url, options = f"s3://{bucket}/bench", s3.storage_options()
        print(f"cube written to the S3 test server in {build(url, options):.1f} s")
        cubes = [{"id": "bench", "url": url, "storage_options": options}]
        with ServiceProcess(cubes) as svc:
            cached = compare(svc, "default answer cache (identical repeats)")
        with ServiceProcess(cubes, options={"answer_cache_bytes": 0}) as svc:
            computed = compare(svc, "answer cache off (each answer computed and encoded)")
        print(
            f"\nEDR position rate / native point rate: {min(cached):.2f} with the answer "
            f"cache, {min(computed):.2f} without (worst of the two answers; goal >= 0.9)"
        )


if __name__ == "__main__":
    import sys

    sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
    main()
