"""Requests a read sends over the wire, counted in the S3 server's own request log."""

from __future__ import annotations

import numpy as np
import pytest

from alveary import grid
from alveary.cube import ChunkShape, create_cube, open_cube

LEVEL = 5
TIMES = np.arange("2023-01-01", "2024-01-01", dtype="datetime64[D]").astype("datetime64[s]")


@pytest.fixture(scope="module")
def s3_cube(s3_server):
    bucket = s3_server.create_bucket()
    url = f"s3://{bucket}/year"
    options = s3_server.storage_options()
    w = create_cube(
        url,
        cube_id="year",
        times=TIMES,
        levels=[LEVEL],
        variables={"sm": {"units": "m3 m-3", "dtype": "int16", "scale_factor": 1e-4}},
        chunks=ChunkShape(32, 32, 16),
        storage_options=options,
    )
    # a regional cube: only zones near 20 E, 45 N carry data
    zones = grid.zones_in_bbox(0.0, 30.0, 40.0, 60.0, LEVEL)
    lat, _ = grid.zone_to_point(zones)
    season = np.sin(np.arange(TIMES.size) / 365.0 * 2 * np.pi)[:, None]
    w.write("sm", LEVEL, zones, 0.25 + 0.1 * season + 0.001 * np.asarray(lat)[None, :])
    w.publish()
    return url, options, zones


def _gets(reqs):
    return [r for r in reqs if r.method == "GET" and not r.is_listing]


def test_single_zone_single_block_is_one_get(s3_server, s3_cube):
    url, options, zones = s3_cube
    cube = open_cube(url, storage_options=options)
    zone = zones[len(zones) // 2 : len(zones) // 2 + 1]
    plan = cube.plan("sm", zone, "2023-02-01", "2023-02-01")
    assert len(plan) == 1
    mark = s3_server.mark()
    values = cube.read("sm", zone, "2023-02-01", "2023-02-01")
    reqs = s3_server.requests(since=mark, bucket=url)
    assert np.isfinite(values).all()
    assert [(r.method, r.path.split("/", 2)[2]) for r in reqs] == [
        ("GET", f"year/versions/{cube.version}/{plan.keys[0]}")
    ]
    assert cube.stats.chunk_gets == 1


def test_disk_read_gets_exactly_the_planned_chunks(s3_server, s3_cube):
    url, options, _ = s3_cube
    cube = open_cube(url, storage_options=options)
    centre = grid.point_to_zone(45.0, 20.0, LEVEL)
    disk = grid.zone_disk(centre, 5)  # 91 zones
    plan = cube.plan("sm", disk, "2023-03-01", "2023-03-10")
    mark = s3_server.mark()
    cube.read("sm", disk, "2023-03-01", "2023-03-10")
    reqs = s3_server.requests(since=mark, bucket=url)
    assert not [r for r in reqs if r.method == "HEAD" or r.is_listing]
    got = sorted(r.path.split(f"/versions/{cube.version}/", 1)[1] for r in _gets(reqs))
    assert got == sorted(plan.keys)


def test_year_series_and_missing_chunks(s3_server, s3_cube):
    url, options, _ = s3_cube
    cube = open_cube(url, storage_options=options)
    here = np.atleast_1d(grid.point_to_zone(45.0, 20.0, LEVEL))
    far = np.atleast_1d(grid.point_to_zone(-30.0, -120.0, LEVEL))  # outside the region
    for zone, finite in ((here, True), (far, False)):
        plan = cube.plan("sm", zone)
        assert len(plan) == 12  # ceil(365 / 32) time blocks
        mark = s3_server.mark()
        series = cube.read("sm", zone)
        reqs = s3_server.requests(since=mark, bucket=url)
        assert series.shape == (365, 1)
        assert bool(np.isfinite(series).all()) is finite
        # the manifest lists the written chunks: those are fetched (all found), the
        # never-written ones cost no request at all
        assert len(reqs) == (len(plan) if finite else 0)
        assert all(r.method == "GET" and r.status == 200 for r in reqs)


def test_s3_and_local_return_the_same_values(s3_cube, tmp_path):
    url, options, zones = s3_cube
    remote = open_cube(url, storage_options=options)
    # copy the published cube to local disk object by object with fsspec
    import fsspec

    fs, path = fsspec.core.url_to_fs(url, **options)
    for key in fs.find(path):
        target = tmp_path / "copy" / key[len(path) + 1 :]
        target.parent.mkdir(parents=True, exist_ok=True)
        target.write_bytes(fs.cat_file(key))
    local = open_cube(str(tmp_path / "copy"))
    assert local.version == remote.version
    sample = zones[::17]
    np.testing.assert_array_equal(local.read("sm", sample), remote.read("sm", sample))
