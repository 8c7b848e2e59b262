"""Benchmarks of the cube layer and ingest: ratios measured in one run on this machine.

1. Storage: stored values and bytes of a global cube against a latitude/longitude
   raster whose cells are nowhere larger than our zones (the equal-resolution
   comparison), same field, same codec; and values stored against zones on the sphere
   (goal: exactly 1, no duplication and no padding).
2. Ingest throughput (zones per second, all time steps), on local threads and on a
   dask.distributed cluster of two worker processes.
3. Requests per read through the S3-protocol test server (moto_server on 127.0.0.1):
   a single zone and time step, a 100-zone disk, a one-year daily series at one zone;
   GETs in the server's log against the minimal number of chunks covering the request.
4. Appending one day to a 40-day cube against building the 41 days anew: bytes
   written and seconds (goal: an append costs about one time block, not the cube).
"""

from __future__ import annotations

import math
import shutil
import tempfile
import time
from pathlib import Path

import numpy as np
import zarr
from zarr.codecs import BloscCodec

from alveary import grid
from alveary.cube import ChunkShape, create_cube, open_cube
from alveary.ingest import ingest


def _field(lat, lon):
    rng = np.random.default_rng(0)
    f = 280 + 25 * np.cos(np.radians(lat)) + 3 * np.sin(np.radians(3 * lon))
    return f + rng.normal(0, 0.5, np.broadcast(lat, lon).shape)


def _write_nc(path: Path, step: float, ntimes: int) -> str:
    import xarray as xr

    lon = np.arange(-180 + step / 2, 180, step)
    lat = np.arange(90 - step / 2, -90, -step)
    base = _field(lat[:, None], lon[None, :]).astype("f4")
    data = np.stack([base + k for k in range(ntimes)])
    times = np.arange("2024-01-01", ntimes, dtype="datetime64[D]").astype("datetime64[ns]")
    xr.Dataset(
        {"t": (("time", "lat", "lon"), data, {"units": "K"})},
        coords={
            "time": times,
            "lat": ("lat", lat, {"units": "degrees_north"}),
            "lon": ("lon", lon, {"units": "degrees_east"}),
        },
    ).to_netcdf(path)
    return str(path)


def _du(path: Path) -> int:
    return sum(p.stat().st_size for p in path.rglob("*") if p.is_file())


def storage(tmp: Path) -> None:
    level = 8
    zone_edge_deg = math.degrees(math.sqrt(grid.zone_area(level)) / 6_378_137.0)
    # the equal-resolution raster: its largest (equatorial) cell no larger than a zone
    step = 180.0 / math.ceil(180.0 / zone_edge_deg)
    src = _write_nc(tmp / "global.nc", step, 1)
    out = tmp / "storage-cube"
    ingest([src], str(out), level, variables=["t"], cube_id="storage")
    cube = open_cube(str(out))
    n = 1 << level
    stored_values = 5 * 2 * n * n + 2
    zones = grid.zone_count(level)
    cube_bytes = _du(out / "versions" / cube.version / "t")
    nlat, nlon = round(180 / step), round(360 / step)
    raster = zarr.create_array(
        str(tmp / "latlon.zarr"),
        shape=(1, nlat, nlon),
        chunks=(1, 64, 64),
        dtype="f4",
        compressors=[BloscCodec(cname="zstd", clevel=5, shuffle="shuffle", typesize=4)],
        zarr_format=3,
    )
    lon = np.arange(-180 + step / 2, 180, step)
    lat = np.arange(90 - step / 2, -90, -step)
    raster[0] = _field(lat[:, None], lon[None, :]).astype("f4")
    raster_bytes = _du(tmp / "latlon.zarr")
    print("## storage (level 8, one float32 field, blosc-zstd)")
    print(f"zones on the sphere            {zones}")
    print(f"values stored / zones          {stored_values / zones:.6f}  (goal 1)")
    print(f"lat/lon raster: step {step:.4f} deg, cells {nlat * nlon}")
    print(f"raster cells / zones           {nlat * nlon / zones:.3f}")
    print(
        f"bytes: cube {cube_bytes}, raster {raster_bytes}, "
        f"raster / cube {raster_bytes / cube_bytes:.3f}"
    )


def throughput(tmp: Path) -> None:
    from distributed import LocalCluster

    src = _write_nc(tmp / "tp.nc", 0.5, 8)
    print("## ingest throughput (global 0.5 deg NetCDF, 8 time steps, level 7)")
    kw = dict(variables=["t"], cube_id="tp", time_block=8)
    for method in ("nearest", "mean"):
        t0 = time.perf_counter()
        s = ingest([src], str(tmp / f"tp-threads-{method}"), 7, method=method, **kw)
        dt = time.perf_counter() - t0
        zps = s.total_zones / dt
        with LocalCluster(
            n_workers=2,
            threads_per_worker=1,
            processes=True,
            host="127.0.0.1",
            dashboard_address=None,
            silence_logs=40,
        ) as cl:
            t0 = time.perf_counter()
            s2 = ingest(
                [src],
                str(tmp / f"tp-cluster-{method}"),
                7,
                method=method,
                scheduler=cl.scheduler_address,
                **kw,
            )
            dt2 = time.perf_counter() - t0
        zps2 = s2.total_zones / dt2
        print(
            f"{method:8s} threads: {zps:10.0f} zones/s ({zps * 8:10.0f} zone-steps/s, "
            f"{dt:.2f} s); 2-process cluster: {zps2:10.0f} zones/s ({dt2:.2f} s); "
            f"cluster/threads {zps2 / zps:.2f}"
        )


def append(tmp: Path) -> None:
    import xarray as xr

    src = _write_nc(tmp / "days.nc", 1.0, 41)
    first = tmp / "days-first.nc"
    last = tmp / "days-last.nc"
    with xr.open_dataset(src) as ds:
        ds.isel(time=slice(0, 40)).to_netcdf(first)
        ds.isel(time=slice(40, 41)).to_netcdf(last)
    kw = dict(variables=["t"], cube_id="days", time_block=8, method="mean")
    ingest([str(first)], str(tmp / "days"), 7, **kw)
    t0 = time.perf_counter()
    grown = ingest([str(last)], str(tmp / "days"), 7, append=True, **kw)
    dt_append = time.perf_counter() - t0
    t0 = time.perf_counter()
    whole = ingest([src], str(tmp / "days-whole"), 7, **kw)
    dt_whole = time.perf_counter() - t0
    print("## append one day to a 40-day cube (global 1 deg NetCDF, level 7, mean)")
    print(
        f"bytes written: append {grown.bytes_stored}, rebuild {whole.bytes_stored}, "
        f"append / rebuild {grown.bytes_stored / whole.bytes_stored:.3f}"
    )
    print(
        f"seconds: append {dt_append:.2f}, rebuild {dt_whole:.2f}, "
        f"append / rebuild {dt_append / dt_whole:.3f}"
    )


def _minimal_chunks(cube, zones, t0, t1) -> int:
    """Distinct chunks holding the requested cells, by direct index arithmetic."""
    level = int(np.asarray(grid.zone_level(zones)).flat[0])
    shape = cube.meta.chunks[level]
    _, region, i, j = (np.asarray(x) for x in grid.zone_to_index(zones))
    cells = set()
    for t in range(t0, t1):
        for k, a, b in zip(region.tolist(), i.tolist(), j.tolist(), strict=True):
            if k < 5:
                cells.add(("s", t // shape.time, k, a // shape.rows, b // shape.cols))
            else:
                cells.add(("a", t // shape.time))
    return len(cells)


def requests(tmp: Path) -> None:
    from support.s3 import S3Server

    with S3Server() as server:
        bucket = server.create_bucket()
        url = f"s3://{bucket}/bench"
        opts = server.storage_options()
        level = 9
        times = np.arange("2023-01-01", "2024-01-01", dtype="datetime64[D]")
        w = create_cube(
            url,
            cube_id="bench",
            times=times,
            levels=[level],
            variables={"sm": {"units": "1"}},
            storage_options=opts,
            chunks=ChunkShape(32, 64, 64),
        )
        zones = grid.zones_in_bbox(5.0, 40.0, 25.0, 55.0, level)
        lat, lon = grid.zone_to_point(zones)
        vals = _field(np.asarray(lat)[None, :], np.asarray(lon)[None, :]) + np.arange(365)[:, None]
        w.write("sm", level, zones, vals)
        w.publish()
        cube = open_cube(url, storage_options=opts)
        centre = grid.point_to_zone(47.0, 15.0, level)
        disk = grid.zone_disk(centre, 6)[:100]
        cases = [
            ("single zone, one day", np.atleast_1d(centre), "2023-06-01", "2023-06-01"),
            ("100-zone disk, one day", disk, "2023-06-01", "2023-06-01"),
            ("one zone, one year", np.atleast_1d(centre), None, None),
        ]
        mark = server.mark()
        cube = open_cube(url, storage_options=opts)
        opening = len(server.requests(since=mark, bucket=url))
        print("## requests per read (S3 server log)")
        print(f"opening a version: {opening} GETs (pointer, manifest, metadata, time axis)")
        for name, z, start, end in cases:
            ts = cube.time_indices(start, end)
            minimal = _minimal_chunks(cube, z, ts.start, ts.stop)
            mark = server.mark()
            cube.read("sm", z, start, end)
            reqs = server.requests(since=mark)
            gets = sum(1 for r in reqs if r.method == "GET" and not r.is_listing)
            other = len(reqs) - gets
            print(
                f"{name:24s} GETs {gets:3d}, minimal chunks {minimal:3d}, "
                f"GETs/minimal {gets / minimal:.2f}, other requests {other}"
            )


def main() -> int:
    tmp = Path(tempfile.mkdtemp(prefix="alveary-bench-cube-"))
    try:
        storage(tmp)
        throughput(tmp)
        requests(tmp)
        append(tmp)
    finally:
        shutil.rmtree(tmp, ignore_errors=True)
    return 0


if __name__ == "__main__":
    import sys

    sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
    raise SystemExit(main())
