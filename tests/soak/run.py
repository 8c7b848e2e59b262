"""The heavier reliability runs (``make soak``; never part of ``make test``).

Everything runs on 127.0.0.1: a ``moto_server`` S3-protocol server, a small TCP relay in
front of it (so "killing the store" refuses connections while the data survive), and a
real ``alveary serve`` process. Answers are judged against the analytic field evaluated
at the zone centres the service reports. Prints one line of figures per run.

    .venv/bin/python tests/soak/run.py                 # every run, full durations
    .venv/bin/python tests/soak/run.py --soak-seconds 20 kill corrupt

Runs: kill, empty, corrupt, publish, soak, slow, big, fuzz.
"""

from __future__ import annotations

import argparse
import asyncio
import random
import socket
import sys
import threading
import time
from collections import Counter
from pathlib import Path

import httpx
import numpy as np
import psutil

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from alveary import grid
from alveary.cube import create_cube, open_cube
from support.analytic import NTIMES, build_cube, field
from support.process import free_port
from support.s3 import S3Server
from support.server import ServiceProcess

DAYS = np.arange(NTIMES, dtype=np.float64)
LEVEL = 7
ZONES = grid.all_zones(LEVEL)
LAT, LON = grid.zone_to_point(ZONES)


# -- a relay in front of the store that can be killed and restarted -------------------
class Relay:
    """Forwards 127.0.0.1:port to the S3 server; :meth:`kill` closes the listener and every
    connection (new ones are refused), :meth:`restart` listens again on the same port."""

    def __init__(self, target_port: int) -> None:
        self.target = target_port
        self.port = free_port()
        self.loop = asyncio.new_event_loop()
        self.server: asyncio.AbstractServer | None = None
        self.writers: set[asyncio.StreamWriter] = set()
        threading.Thread(target=self.loop.run_forever, daemon=True).start()
        self.restart()

    async def _pipe(self, reader, writer):
        try:
            while data := await reader.read(65536):
                writer.write(data)
                await writer.drain()
        except (ConnectionError, OSError):
            pass
        finally:
            writer.close()

    async def _handle(self, reader, writer):
        try:
            up_r, up_w = await asyncio.open_connection("127.0.0.1", self.target)
        except OSError:
            writer.close()
            return
        self.writers |= {writer, up_w}
        await asyncio.gather(self._pipe(reader, up_w), self._pipe(up_r, writer))
        self.writers -= {writer, up_w}

    def _run(self, coro):
        return asyncio.run_coroutine_threadsafe(coro, self.loop).result(10)

    def restart(self) -> None:
        async def start():
            self.server = await asyncio.start_server(
                self._handle, "127.0.0.1", self.port, reuse_address=True
            )

        self._run(start())

    def kill(self) -> None:
        async def stop():
            if self.server is not None:
                self.server.close()
            for w in list(self.writers):
                w.transport.abort()
            self.writers.clear()

        self._run(stop())

    def options(self, s3: S3Server) -> dict:
        opts = s3.storage_options()
        opts["client_kwargs"]["endpoint_url"] = f"http://127.0.0.1:{self.port}"
        return opts


# -- requests and judging ----------------------------------------------------------------
def ask_point(client: httpx.Client, cube: str, k: int) -> httpx.Response:
    params = {"lat": float(LAT[k]), "lon": float(LON[k]), "level": LEVEL, "datetime": "../.."}
    params["vars"] = "temp"
    return client.get(f"/cubes/{cube}/point", params=params)


def right(body: dict, offset: float = 0.0) -> bool:
    """True if every temp value is f at the reported centre (+offset)."""
    for row in body["zones"]:
        want = field(row["lat"], row["lon"], DAYS) + offset
        got = np.array(row["values"]["temp"], dtype=float)
        if not np.allclose(got, want, rtol=0, atol=1e-9):
            return False
    return True


class Load:
    """Threads asking random points; records (time, status, latency, wrong)."""

    def __init__(self, url: str, cube: str, threads: int = 4, offsets=None) -> None:
        self.url, self.cube, self.offsets = url, cube, offsets
        self.records: list[tuple[float, int, float, bool]] = []
        self.stop = threading.Event()
        self.threads = [threading.Thread(target=self._run, args=(n,)) for n in range(threads)]

    def _run(self, seed: int) -> None:
        rng = random.Random(seed)
        with httpx.Client(base_url=self.url, timeout=30) as c:
            while not self.stop.is_set():
                t0 = time.monotonic()
                try:
                    r = ask_point(c, self.cube, rng.randrange(ZONES.size))
                    status = r.status_code
                except httpx.HTTPError:
                    status = 0
                t1 = time.monotonic()
                wrong = False
                if status == 200:
                    body = r.json()
                    offset = 0.0 if self.offsets is None else self.offsets.get(body["version"])
                    wrong = offset is None or not right(body, offset)
                self.records.append((t1, status, t1 - t0, wrong))

    def __enter__(self) -> Load:
        for t in self.threads:
            t.start()
        return self

    def __exit__(self, *exc) -> None:
        self.stop.set()
        for t in self.threads:
            t.join(60)


def service(cubes, **options) -> ServiceProcess:
    return ServiceProcess(cubes, options={"refresh_interval": 1.0, **options}).start()


def readyz(url: str) -> tuple[int, float]:
    t0 = time.monotonic()
    try:
        status = httpx.get(url + "/readyz", timeout=10).status_code
    except httpx.HTTPError:
        status = 0
    return status, time.monotonic() - t0


# -- the runs ----------------------------------------------------------------------------
def run_kill(s3: S3Server, args) -> None:
    relay = Relay(s3.port)
    url = f"s3://{s3.create_bucket()}/kill"
    build_cube(url, s3.storage_options(), cube_id="kill")
    svc = service([{"id": "kill", "url": url, "storage_options": relay.options(s3)}])
    try:
        with Load(svc.url, "kill", threads=4) as load:
            time.sleep(3)
            killed = time.monotonic()
            relay.kill()
            time.sleep(1.0)
            ready_down = readyz(svc.url)
            time.sleep(4.0)
            restarted = time.monotonic()
            relay.restart()
            time.sleep(6.0)
        recs = load.records
        during = [r for r in recs if killed + 0.05 < r[0] - r[2] and r[0] < restarted]
        failed = [r for r in during if r[1] != 200]
        after_ok = [r[0] for r in recs if r[0] > restarted and r[1] == 200]
        first_fail_after_restart = [r[0] for r in recs if r[0] > restarted and r[1] != 200]
        recovery = (max(first_fail_after_restart) - restarted) if first_fail_after_restart else 0.0
        slow = sorted(r[2] for r in failed) or [0.0]
        print(
            f"kill: {len(recs)} answers, {sum(r[3] for r in recs)} wrong; during the outage "
            f"{len(failed)} of {len(during)} failed, "
            f"statuses {dict(Counter(r[1] for r in failed))}, "
            f"failure latency p50 {slow[len(slow) // 2]:.3f} s max {slow[-1]:.3f} s; /readyz "
            f"{ready_down[0]} in {ready_down[1]:.3f} s; recovered {recovery:.2f} s after restart "
            f"({len(after_ok)} answers after); /readyz after {readyz(svc.url)[0]}"
        )
    finally:
        svc.stop()
        relay.kill()


def run_empty(s3: S3Server, args) -> None:
    bucket = s3.create_bucket()
    url = f"s3://{bucket}/empty"
    build_cube(url, s3.storage_options(), cube_id="empty")
    client = s3.client()
    # No chunk or answer cache: every answer needs the store.
    svc = service(
        [{"id": "empty", "url": url, "storage_options": s3.storage_options()}],
        cache_bytes=0,
        answer_cache_bytes=0,
    )
    try:
        keys = [o["Key"] for o in client.list_objects_v2(Bucket=bucket)["Contents"]]
        saved = {k: client.get_object(Bucket=bucket, Key=k)["Body"].read() for k in keys}
        with Load(svc.url, "empty", threads=4) as load:
            time.sleep(2)
            emptied = time.monotonic()
            for k in keys:
                client.delete_object(Bucket=bucket, Key=k)
            time.sleep(4)
            ready_down = readyz(svc.url)
            for k, v in saved.items():
                client.put_object(Bucket=bucket, Key=k, Body=v)
            restored = time.monotonic()
            time.sleep(4)
        recs = load.records
        during = [r for r in recs if emptied < r[0] - r[2] and r[0] < restored]
        print(
            f"empty (no caches): {len(recs)} answers, {sum(r[3] for r in recs)} wrong, "
            f"{sum(r[3] for r in during)} of them while empty; while empty "
            f"{dict(Counter(r[1] for r in during))}; /readyz while empty {ready_down[0]}; "
            f"after restore {dict(Counter(r[1] for r in recs if r[0] - r[2] > restored))}"
        )
    finally:
        svc.stop()


def run_corrupt(s3: S3Server, args) -> None:
    bucket = s3.create_bucket()
    url = f"s3://{bucket}/corrupt"
    build_cube(url, s3.storage_options(), cube_id="corrupt")
    cube = open_cube(url, s3.storage_options())
    k_bad = 1000
    (key,) = cube.snapshot().plan("temp", ZONES[k_bad : k_bad + 1]).keys
    full = f"corrupt/versions/{cube.version}/{key}"
    client = s3.client()
    data = bytearray(client.get_object(Bucket=bucket, Key=full)["Body"].read())
    for n in range(10):
        data[len(data) // 2 + n] ^= 0x5A
    client.put_object(Bucket=bucket, Key=full, Body=bytes(data))
    whole = cube.snapshot().plan("temp", ZONES)
    bad = {int(c) for r in whole.reads if r.key == key for c in r.columns}
    svc = service([{"id": "corrupt", "url": url, "storage_options": s3.storage_options()}])
    counts: Counter = Counter()
    try:
        with httpx.Client(base_url=svc.url, timeout=30) as c:
            rng = random.Random(1)
            picks = [rng.choice(sorted(bad)) for _ in range(50)]
            picks += [rng.randrange(ZONES.size) for _ in range(200)]
            for k in picks:
                r = ask_point(c, "corrupt", k)
                needs = k in bad
                ok = r.status_code == 200 and right(r.json())
                counts[("needs" if needs else "other", r.status_code if not ok else "right")] += 1
        print(f"corrupt: {dict(counts)}")
    finally:
        svc.stop()


def run_publish(s3: S3Server, args) -> None:
    bucket = s3.create_bucket()
    url, opts = f"s3://{bucket}/pub", s3.storage_options()
    offsets = {}
    offsets[_publish(url, opts, 0.0)] = 0.0
    svc = service(
        [{"id": "pub", "url": url, "storage_options": opts}],
        refresh_interval=2.0,
        answer_cache_bytes=0,
    )
    try:
        with Load(svc.url, "pub", threads=4, offsets=offsets) as load:
            for n in range(1, 4):
                time.sleep(2.5)
                offsets[_publish(url, opts, 100.0 * n)] = 100.0 * n
                offsets[_publish(url, opts, 100.0 * n + 50)] = 100.0 * n + 50
            time.sleep(5)
        recs = load.records
        print(
            f"publish: 3 rounds of two publishes within one 2 s refresh interval; "
            f"{len(recs)} answers, {sum(r[3] for r in recs)} wrong, "
            f"statuses {dict(Counter(r[1] for r in recs))}"
        )
    finally:
        svc.stop()


def _publish(url, opts, offset) -> str:
    writer = create_cube(
        url,
        cube_id="pub",
        times=np.datetime64("2024-05-01", "s") + np.arange(NTIMES) * np.timedelta64(1, "D"),
        levels=[LEVEL],
        variables={"temp": {"units": "K", "dtype": "float64"}},
        storage_options=opts,
        keep_versions=1,
        grace_seconds=10.0,
    )
    writer.write("temp", LEVEL, ZONES, field(LAT[None, :], LON[None, :], DAYS[:, None]) + offset)
    return writer.publish()


def rss(pid: int) -> int:
    return psutil.Process(pid).memory_info().rss


def run_soak(s3: S3Server, args) -> None:
    url = f"s3://{s3.create_bucket()}/soak"
    build_cube(url, s3.storage_options(), cube_id="soak")
    svc = service([{"id": "soak", "url": url, "storage_options": s3.storage_options()}])
    seconds = args.soak_seconds
    warm = min(10.0, seconds / 4)
    statuses: Counter = Counter()
    wrong = 0
    samples: list[tuple[float, int]] = []

    async def worker(n: int, client: httpx.AsyncClient, until: float) -> None:
        nonlocal wrong
        rng = random.Random(n)
        while time.monotonic() < until:
            k = rng.randrange(ZONES.size)
            kind = rng.random()
            params = {"lat": float(LAT[k]), "lon": float(LON[k]), "datetime": "../.."}
            path = "/cubes/soak/point"
            if kind > 0.8:
                path, params["k"] = "/cubes/soak/disk", 3
            try:
                r = await client.get(path, params={**params, "level": LEVEL, "vars": "temp"})
                statuses[r.status_code] += 1
                if r.status_code == 200 and not right(r.json()):
                    wrong += 1
            except httpx.HTTPError as exc:
                statuses[type(exc).__name__] += 1

    async def sampler(until: float, start: float) -> None:
        while time.monotonic() < until:
            samples.append((time.monotonic() - start, rss(svc.pid)))
            await asyncio.sleep(1.0)

    async def main() -> None:
        limits = httpx.Limits(max_connections=64, max_keepalive_connections=64)
        async with httpx.AsyncClient(base_url=svc.url, timeout=30, limits=limits) as client:
            start = time.monotonic()
            until = start + seconds
            await asyncio.gather(
                sampler(until, start), *(worker(n, client, until) for n in range(64))
            )

    try:
        asyncio.run(main())
        after_warm = [m for t, m in samples if t >= warm]
        base, last = after_warm[0], after_warm[-1]
        total = sum(v for k, v in statuses.items())
        errors = sum(v for k, v in statuses.items() if k != 200)
        print(
            f"soak: {seconds:.0f} s at 64 connections: {total} answers ({total / seconds:.0f}/s), "
            f"{errors} errors {dict(statuses)}, {wrong} wrong; RSS after {warm:.0f} s warm-up "
            f"{base / 2**20:.1f} MiB -> {last / 2**20:.1f} MiB at the end "
            f"({100 * (last - base) / base:+.1f} %), "
            f"peak {max(m for _, m in samples) / 2**20:.1f} MiB"
        )
    finally:
        svc.stop()


def healthz_latencies(url: str, stop: threading.Event, out: list[float]) -> None:
    with httpx.Client(base_url=url, timeout=30) as c:
        while not stop.is_set():
            t0 = time.monotonic()
            try:
                c.get("/healthz")
                out.append(time.monotonic() - t0)
            except httpx.HTTPError:
                out.append(float("inf"))
            time.sleep(0.05)


def run_slow(s3: S3Server, args) -> None:
    url = f"s3://{s3.create_bucket()}/slow"
    build_cube(url, s3.storage_options(), cube_id="slow", levels=(3,))
    timeout = 5.0
    svc = service(
        [{"id": "slow", "url": url, "storage_options": s3.storage_options()}],
        header_timeout=timeout,
    )
    n = args.slow_clients
    socks, closed_at = [], {}
    lat: list[float] = []
    stop = threading.Event()
    probe = threading.Thread(target=healthz_latencies, args=(svc.url, stop, lat))
    try:
        start = time.monotonic()
        for _ in range(n):
            s = socket.create_connection((svc.host, svc.port), timeout=5)
            s.sendall(b"GET /healthz HTTP/1.1\r\nHost: x\r\n")
            s.setblocking(False)
            socks.append(s)
        probe.start()
        line = 0
        while len(closed_at) < n and time.monotonic() - start < timeout + 10:
            time.sleep(1.0)
            line += 1
            for i, s in enumerate(socks):
                if i in closed_at:
                    continue
                try:
                    if s.recv(1024) == b"":
                        closed_at[i] = time.monotonic() - start
                        continue
                except BlockingIOError:
                    pass
                except OSError:
                    closed_at[i] = time.monotonic() - start
                    continue
                if line % 2 == 0:  # a header line every 2 s
                    try:
                        s.send(f"X-Slow-{line}: y\r\n".encode())
                    except OSError:
                        closed_at[i] = time.monotonic() - start
        stop.set()
        probe.join()
        times = sorted(closed_at.values())
        print(
            f"slow: {n} clients sending a header line every 2 s, header timeout {timeout} s: "
            f"{len(times)} closed, last after {times[-1] if times else float('nan'):.1f} s; "
            f"/healthz meanwhile: {len(lat)} probes, max {max(lat) * 1000:.0f} ms, "
            f"failures {sum(x == float('inf') for x in lat)}"
        )
    finally:
        for s in socks:
            s.close()
        svc.stop()


def run_big(s3: S3Server, args) -> None:
    """Four of the largest admissible requests at once (one per format) against a cube of
    level 8 and 40 days: a bbox of about 250 000 zones x 40 steps = 10^7 cells."""
    url = f"s3://{s3.create_bucket()}/big"
    steps, level = 40, 8
    writer = create_cube(
        url,
        cube_id="big",
        times=np.datetime64("2024-05-01", "s") + np.arange(steps) * np.timedelta64(1, "D"),
        levels=[level],
        variables={"temp": {"units": "K", "dtype": "float32"}},
        storage_options=s3.storage_options(),
    )
    zones = grid.all_zones(level)
    lat, lon = grid.zone_to_point(zones)
    days = np.arange(steps, dtype=np.float64)[:, None]
    writer.write("temp", level, zones, field(lat[None, :], lon[None, :], days))
    writer.publish()
    del zones, lat, lon
    bbox = "-95,-45,95,45"  # about 244 000 level-8 zones: 9.8e6 cells
    svc = service(
        [{"id": "big", "url": url, "storage_options": s3.storage_options()}],
        deadline=300,
        queue_wait=args.queue_wait,
    )
    try:
        httpx.get(svc.url + "/cubes/big/point", params={"lat": 1, "lon": 1}, timeout=30)
        time.sleep(1)
        base = rss(svc.pid)
        peak = [base]
        results: dict[str, tuple[int, int, float]] = {}
        lat_h: list[float] = []
        stop = threading.Event()

        def one(fmt: str) -> None:
            t0 = time.monotonic()
            params = {"bbox": bbox, "level": level, "datetime": "../..", "f": fmt}
            size = 0
            with httpx.stream("GET", svc.url + "/cubes/big/bbox", params=params, timeout=600) as r:
                for chunk in r.iter_bytes():
                    size += len(chunk)
                status = r.status_code
            results[fmt] = (status, size, time.monotonic() - t0)

        def watch() -> None:
            while not stop.is_set():
                peak.append(rss(svc.pid))
                time.sleep(0.1)

        threads = [
            threading.Thread(target=one, args=(f,)) for f in ("arrow", "csv", "json", "geojson")
        ]
        watcher = threading.Thread(target=watch)
        prober = threading.Thread(target=healthz_latencies, args=(svc.url, stop, lat_h))
        watcher.start()
        prober.start()
        for t in threads:
            t.start()
        for t in threads:
            t.join()
        stop.set()
        watcher.join()
        prober.join()
        lat_sorted = sorted(lat_h)
        p50 = lat_sorted[len(lat_sorted) // 2] * 1000
        p99 = lat_sorted[int(len(lat_sorted) * 0.99)] * 1000
        figures = ", ".join(
            f"{f} {s} {n / 2**20:.0f} MiB in {t:.1f} s" for f, (s, n, t) in results.items()
        )
        print(
            f"big: four at once ({figures}); RSS baseline {base / 2**20:.0f} MiB, peak "
            f"{max(peak) / 2**20:.0f} MiB (+{(max(peak) - base) / 2**20:.0f} MiB); /healthz "
            f"{len(lat_h)} probes, p50 {p50:.0f} ms, p99 {p99:.0f} ms, "
            f"max {lat_sorted[-1] * 1000:.0f} ms"
        )
    finally:
        svc.stop()


def run_fuzz(s3: S3Server, args) -> None:
    url = f"s3://{s3.create_bucket()}/fuzz"
    build_cube(url, s3.storage_options(), cube_id="fuzz", levels=(3,))
    svc = service([{"id": "fuzz", "url": url, "storage_options": s3.storage_options()}])
    rng = random.Random(3)
    odd = [
        "",
        "0",
        "-0",
        "1e309",
        "-1e309",
        "nan",
        "NaN",
        "inf",
        "-inf",
        "91",
        "-181",
        "1e-320",
        "9" * 400,
        "0x10",
        "１",
        "½",
        "%00",
        "\u202e",
        "'; DROP",
        "../..",
        "/..",
        "..",
        "2024-13-01",
        "2024-05-01T25:00:00Z",
        "2024-05-01/2024-04-01",
        "a,b,c",
        "3,3,3",
        "-200,-100,200,100",
        "1,2,3",
        "1,2,3,4,5",
        "temp,temp",
        "zz",
        "30",
        "-1",
        "25",
        "12b-3021-877",
        "3n",
        "0",
        "18446744073709551615",
        "99999999999999999999999",
    ]
    params = [
        "lat",
        "lon",
        "level",
        "k",
        "meters",
        "nearest",
        "bbox",
        "datetime",
        "vars",
        "f",
        "stats",
        "zone",
        "x",
    ]
    paths = [
        "/cubes/fuzz/point",
        "/cubes/fuzz/disk",
        "/cubes/fuzz/radius",
        "/cubes/fuzz/bbox",
        "/zones",
        "/zones/" + rng.choice(odd),
        "/cubes/fuzz",
        "/cubes/zz/point",
    ]
    bodies = [
        b"",
        b"{",
        b"null",
        b"[]",
        b'{"type":"Polygon","coordinates":[[[0,0],[1,1],[0,0]]]}',
        b'{"lat":[1e999],"lon":[0]}',
        b'{"lat":[1,2],"lon":[1]}',
        b"\xff\xfe" * 100,
        b'{"type":"Polygon","coordinates":[[[0,0],[10,0],[10,10],[0,10],[0,0]]]}',
    ]
    statuses: Counter = Counter()
    fives = []
    try:
        with httpx.Client(base_url=svc.url, timeout=30) as c:
            for n in range(args.fuzz):
                if n % 4 == 3:
                    path = rng.choice(["/cubes/fuzz/polygon", "/cubes/fuzz/points"])
                    q = {rng.choice(params): rng.choice(odd) for _ in range(rng.randint(0, 3))}
                    r = c.post(path, params=q, content=rng.choice(bodies))
                else:
                    path = rng.choice(paths)
                    q = {rng.choice(params): rng.choice(odd) for _ in range(rng.randint(0, 5))}
                    if rng.random() < 0.5:
                        q.setdefault("lat", str(rng.uniform(-90, 90)))
                        q.setdefault("lon", str(rng.uniform(-180, 180)))
                    r = c.get(path, params=q)
                statuses[r.status_code] += 1
                if r.status_code >= 500:
                    fives.append((path, q, r.status_code, r.text[:200]))
        print(
            f"fuzz: {args.fuzz} requests, statuses {dict(sorted(statuses.items()))}, "
            f"5xx: {len(fives)}"
        )
        for f in fives[:5]:
            print("  5xx:", f)
    finally:
        svc.stop()


RUNS = {
    "kill": run_kill,
    "empty": run_empty,
    "corrupt": run_corrupt,
    "publish": run_publish,
    "soak": run_soak,
    "slow": run_slow,
    "big": run_big,
    "fuzz": run_fuzz,
}


def main() -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("runs", nargs="*", help="runs to do (default: all): " + ", ".join(RUNS))
    p.add_argument("--soak-seconds", type=float, default=60.0)
    p.add_argument("--slow-clients", type=int, default=200)
    p.add_argument("--fuzz", type=int, default=3000)
    p.add_argument("--queue-wait", type=float, default=2.0)
    args = p.parse_args()
    unknown = set(args.runs) - set(RUNS)
    if unknown:
        p.error(f"unknown runs {sorted(unknown)}; choose from {', '.join(RUNS)}")
    with S3Server() as s3:
        for name in args.runs or list(RUNS):
            t0 = time.monotonic()
            RUNS[name](s3, args)
            print(f"  ({name} took {time.monotonic() - t0:.0f} s)", flush=True)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
