"""Neighbourhood statistics and time aggregation over HTTP: ratios against the plain
query on the same server, measured in one run.

Two invented cubes on local disk, served by one real ``alveary serve`` process on
127.0.0.1 (answer cache off, so every request is computed; chunk and plan caches warm):

1. ``field``: level 11 over a box of 100 592 zones (plus a margin for the halo),
   one time step. ``bbox`` plain against ``focal=mean&focal_k=3`` (goal: under 3x).
2. ``series``: level 9, 365 daily steps over a few thousand zones. The plain one-year
   series against ``every=P1M`` (monthly means; goal: under 1.5x).

Each request is timed by wall clock from the client, best of seven after one warm-up,
the plain and the analysed request alternating, in JSON and in Arrow. Prints a markdown
table; never asserts a time.
"""

from __future__ import annotations

import math
import tempfile
import time
from pathlib import Path

import httpx
import numpy as np

from alveary import grid
from alveary.cube import create_cube
from support.server import ServiceProcess

REPEATS = 7
FIELD_LEVEL = 11
# An invented box over the Atlantic, about 100 000 level-11 zones.
BBOX = (-38.0, 20.0, -28.0, 31.0)
MARGIN = 1.0  # degrees of data around the box, so the halo has values
SERIES_LEVEL = 9
SERIES_BOX = (10.0, 40.0, 20.0, 48.0)


def build_field(url: str) -> int:
    w, s, e, n = BBOX
    zones = grid.zones_in_bbox(w - MARGIN, s - MARGIN, e + MARGIN, n + MARGIN, FIELD_LEVEL)
    lat, lon = grid.zone_to_point(zones)
    writer = create_cube(
        url,
        cube_id="field",
        title="Benchmark field (invented)",
        times=np.array(["2024-01-01"], dtype="datetime64[s]"),
        levels=[FIELD_LEVEL],
        variables={"temp": {"units": "K", "long_name": "invented temperature"}},
    )
    values = 280 + 10 * np.cos(np.radians(lat)) + 3 * np.sin(np.radians(4 * lon))
    writer.write("temp", FIELD_LEVEL, zones, values[None, :].astype(np.float32))
    writer.publish()
    return int(grid.zones_in_bbox(*BBOX, FIELD_LEVEL).size)


def build_series(url: str) -> int:
    zones = grid.zones_in_bbox(*SERIES_BOX, SERIES_LEVEL)
    lat, _ = grid.zone_to_point(zones)
    times = np.datetime64("2023-01-01T00:00:00", "s") + np.arange(365) * np.timedelta64(1, "D")
    writer = create_cube(
        url,
        cube_id="series",
        title="Benchmark series (invented)",
        times=times,
        levels=[SERIES_LEVEL],
        variables={"temp": {"units": "K", "long_name": "invented temperature"}},
    )
    days = np.arange(365, dtype=np.float64)[:, None]
    values = 280 + 10 * np.cos(np.radians(lat))[None, :] + 8 * np.sin(2 * np.pi * days / 365)
    writer.write("temp", SERIES_LEVEL, zones, values.astype(np.float32))
    writer.publish()
    return int(zones.size)


def best_pair(
    http: httpx.Client, path: str, plain: dict, analysed: dict
) -> tuple[tuple[float, int], tuple[float, int]]:
    """Best (seconds, bytes) of each request, alternating them so that both see the same
    load on a shared machine; one warm-up each (chunks and plans into their caches)."""
    out = []
    for params in (plain, analysed):
        http.get(path, params=params).raise_for_status()
    fastest = [math.inf, math.inf]
    sizes = [0, 0]
    for _ in range(REPEATS):
        for i, params in enumerate((plain, analysed)):
            start = time.perf_counter()
            r = http.get(path, params=params)
            fastest[i] = min(fastest[i], time.perf_counter() - start)
            r.raise_for_status()
            sizes[i] = len(r.content)
    out = [(fastest[i], sizes[i]) for i in range(2)]
    return out[0], out[1]


def main() -> None:
    with tempfile.TemporaryDirectory(prefix="alveary-bench-") as tmp:
        store = Path(tmp)
        t0 = time.perf_counter()
        nfield = build_field(str(store / "field"))
        nseries = build_series(str(store / "series"))
        print(f"cubes written in {time.perf_counter() - t0:.1f} s: {nfield:,} zones in the box, ")
        print(f"{nseries:,} zones x 365 days in the series\n")
        options = {"answer_cache_bytes": 0, "max_zones": 250_000, "deadline": 120}
        with (
            ServiceProcess(store=store, options=options) as svc,
            httpx.Client(base_url=svc.url, timeout=300) as http,
        ):
            rows = []
            bbox = ",".join(str(v) for v in BBOX)
            sbox = ",".join(str(v) for v in SERIES_BOX)
            cases = [
                (
                    "focal mean k=3, 100 000-zone bbox",
                    "/cubes/field/bbox",
                    {"bbox": bbox},
                    {"focal": "mean", "focal_k": 3},
                    3.0,
                ),
                (
                    "monthly means of a one-year daily series",
                    "/cubes/series/bbox",
                    {"bbox": sbox, "datetime": "../.."},
                    {"every": "P1M", "agg": "mean"},
                    1.5,
                ),
            ]
            for label, path, plain, extra, goal in cases:
                for fmt in ("json", "arrow"):
                    (t_plain, b_plain), (t_an, b_an) = best_pair(
                        http, path, {**plain, "f": fmt}, {**plain, **extra, "f": fmt}
                    )
                    rows.append(
                        (
                            label,
                            fmt,
                            f"{t_plain * 1e3:.0f} ms ({b_plain / 1e6:.1f} MB)",
                            f"{t_an * 1e3:.0f} ms ({b_an / 1e6:.2f} MB)",
                            f"**{t_an / t_plain:.2f}**",
                            f"< {goal}",
                        )
                    )
            header = ("query", "format", "plain", "with analysis", "ratio", "goal")
            print("| " + " | ".join(header) + " |")
            print("|" + "|".join("---" for _ in header) + "|")
            for row in rows:
                print("| " + " | ".join(row) + " |")


if __name__ == "__main__":
    main()
