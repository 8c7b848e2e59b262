"""The same build on threads, on a two-process dask cluster and into S3: same bytes."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from cube_sources import lonlat_axes, write_netcdf

from alveary import grid
from alveary.cube import open_cube
from alveary.ingest import ingest


@pytest.fixture(scope="module")
def source(tmp_path_factory):
    lon, lat = lonlat_axes(1.0)
    times = np.arange("2024-01-01", "2024-01-13", dtype="datetime64[D]")
    rng = np.random.default_rng(2)
    base = np.cos(np.radians(lat))[:, None] * np.cos(np.radians(lon))[None, :]
    data = np.stack([base * (1 + 0.1 * k) + rng.normal(0, 0.05, base.shape) for k in range(12)])
    data[:, 10:20, 40:80] = np.nan  # a gap
    path = tmp_path_factory.mktemp("src") / "t2m.nc"
    return write_netcdf(path, "t2m", data.astype("f4"), times, lat, lon, {"units": "K"})


def _chunk_bytes(root: Path, version: str) -> dict[str, bytes]:
    base = root / "versions" / version
    return {
        str(p.relative_to(base)): p.read_bytes()
        for p in base.rglob("*")
        if p.is_file()
        and "/c/" in str(p.relative_to(base)).replace("\\", "/") + "/"
        and p.name != "zarr.json"
    }


KW = dict(
    variables=["t2m"],
    method="mean",
    pyramid=True,
    pyramid_min_level=2,
    cube_id="t2m",
    time_block=4,
    spatial_block=16,
)


def test_distributed_build_gives_the_same_bytes(tmp_path, source):
    from distributed import LocalCluster

    threaded = ingest([source], str(tmp_path / "threads"), 5, **KW)
    with LocalCluster(
        n_workers=2,
        threads_per_worker=1,
        processes=True,
        host="127.0.0.1",
        dashboard_address=None,
        silence_logs=40,
    ) as cluster:
        remote = ingest(
            [source], str(tmp_path / "cluster"), 5, scheduler=cluster.scheduler_address, **KW
        )
    a = _chunk_bytes(tmp_path / "threads", threaded.version)
    b = _chunk_bytes(tmp_path / "cluster", remote.version)
    assert len(a) > 50
    assert a.keys() == b.keys()
    assert all(a[k] == b[k] for k in a)
    assert threaded.zones_written == remote.zones_written


def test_ingest_into_s3_reads_the_same_as_local(tmp_path, source, s3_server):
    bucket = s3_server.create_bucket()
    url = f"s3://{bucket}/t2m"
    opts = s3_server.storage_options()
    kw = {**KW, "time_block": 6, "spatial_block": 64}  # fewer, larger chunks: moto is slow
    ingest([source], url, 5, storage_options=opts, **kw)
    ingest([source], str(tmp_path / "local"), 5, **kw)
    remote = open_cube(url, storage_options=opts)
    local = open_cube(str(tmp_path / "local"))
    assert remote.levels == local.levels == (2, 3, 4, 5)
    for level in remote.levels:
        z = grid.all_zones(level)[::3]
        np.testing.assert_array_equal(remote.read("t2m", z), local.read("t2m", z))
