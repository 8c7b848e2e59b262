"""Requests a read sends over the wire, counted in the S3 server's own request log."""

from __future__ import annotations

import numpy as np
import pytest

from alveary import ChunkDecodeError, StoreUnavailable, grid
from alveary.cube import ChunkShape, create_cube, is_checksum_error, open_cube

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


def test_opening_costs_one_get_more_than_format_1(s3_server, s3_cube):
    url, options, _ = s3_cube
    mark = s3_server.mark()
    cube = open_cube(url, storage_options=options)
    reqs = s3_server.requests(since=mark, bucket=url)
    root = f"year/versions/{cube.version}"
    assert [(r.method, r.path.split("/", 2)[2]) for r in reqs] == [
        ("GET", "year/current.json"),
        ("GET", f"{root}/manifest.json"),
        ("GET", f"{root}/zarr.json"),
        ("GET", f"{root}/time/c/0"),
    ]


def _listing(s3_server, bucket, prefix):
    """Every object key under a prefix, from the server's own listing (boto3)."""
    pages = (
        s3_server.client().get_paginator("list_objects_v2").paginate(Bucket=bucket, Prefix=prefix)
    )
    return {o["Key"] for page in pages for o in page.get("Contents", [])}


@pytest.fixture
def appended(s3_server):
    """A cube on S3 built in two versions: 40 days, then 30 more appended."""
    bucket = s3_server.create_bucket()
    url, options = f"s3://{bucket}/grow", s3_server.storage_options()
    zones = grid.zones_in_bbox(10.0, 40.0, 20.0, 50.0, LEVEL)
    vals = np.arange(70, dtype=float)[:, None] + np.arange(zones.size)[None, :] / 1000

    def version(ndays, start, inherit):
        w = create_cube(
            url,
            cube_id="grow",
            times=TIMES[:ndays],
            levels=[LEVEL],
            variables={"x": {"units": "1"}},
            chunks=ChunkShape(16, 32, 16),
            storage_options=options,
            inherit=inherit,
        )
        w.write("x", LEVEL, zones, vals[start:ndays], start=start)
        return w.publish()

    first = version(40, 0, False)
    second = version(70, 40, True)
    return url, options, bucket, zones, vals, first, second


def test_reads_of_an_appended_version_get_each_chunk_from_its_owner(s3_server, appended):
    url, options, bucket, zones, vals, first, second = appended

    # what each version stored, in the server's own listing: blocks 0-1 only under the
    # first, blocks 2-4 (the partial block 2 rewritten) under the second
    def blocks(version):
        keys = _listing(s3_server, bucket, f"grow/versions/{version}/x/{LEVEL}/strips/c/")
        return {int(k.split("/c/")[1].split("/")[0]) for k in keys}

    assert blocks(first) == {0, 1, 2} and blocks(second) == {2, 3, 4}
    cube = open_cube(url, storage_options=options)
    zone = zones[:1]
    plan = cube.plan("x", zone)
    assert len(plan) == 5
    mark = s3_server.mark()
    np.testing.assert_allclose(cube.read("x", zone)[:, 0], vals[:, 0], atol=1e-4)
    got = [r.path.split("/versions/", 1)[1] for r in s3_server.requests(since=mark, bucket=url)]
    expect = [f"{first if tb < 2 else second}/{k}" for tb, k in enumerate(plan.keys)]
    assert sorted(got) == sorted(expect)
    # the manifest's answer agrees with the listing for every chunk of the plan
    held = _listing(s3_server, bucket, "grow/versions/")
    for cr in plan.reads:
        owner = first if cr.coords[0] < 2 else second
        assert cube.meta.written(cr.array, cr.coords) is (f"grow/versions/{owner}/{cr.key}" in held)


def test_a_written_chunk_missing_from_the_store_is_a_fault(s3_server, appended):
    url, options, bucket, zones, _, first, _ = appended
    cube = open_cube(url, storage_options=options)
    key = cube.plan("x", zones[:1]).keys[0]
    s3_server.client().delete_object(Bucket=bucket, Key=f"grow/versions/{first}/{key}")
    with pytest.raises(StoreUnavailable, match="listed in the version's manifest"):
        cube.read("x", zones[:1])


def test_a_flipped_byte_on_s3_fails_the_checksum(s3_server, appended):
    url, options, bucket, zones, _, _, second = appended
    cube = open_cube(url, storage_options=options)
    key = f"grow/versions/{second}/" + cube.plan("x", zones[:1], TIMES[60]).keys[0]
    client = s3_server.client()
    data = bytearray(client.get_object(Bucket=bucket, Key=key)["Body"].read())
    data[5] ^= 0x01
    client.put_object(Bucket=bucket, Key=key, Body=bytes(data))
    with pytest.raises(ChunkDecodeError, match="fails its checksum") as err:
        cube.read("x", zones[:1], TIMES[60], TIMES[60])
    assert is_checksum_error(err.value)  # zarr's crc32c codec found it (the cause)
    assert err.value.key == key.removeprefix("grow/") and err.value.cube == "grow"


def test_retention_on_s3_deletes_only_unreferenced_objects(s3_server):
    bucket = s3_server.create_bucket()
    url, options = f"s3://{bucket}/keep", s3_server.storage_options()
    zones = grid.zones_in_bbox(10.0, 40.0, 20.0, 50.0, LEVEL)

    def publish(ndays, start, inherit):
        w = create_cube(
            url,
            cube_id="keep",
            times=TIMES[:ndays],
            levels=[LEVEL],
            variables={"x": {"units": "1"}},
            chunks=ChunkShape(16, 32, 16),
            storage_options=options,
            inherit=inherit,
            keep_versions=1,
            grace_seconds=0,
        )
        w.write("x", LEVEL, zones, np.ones((ndays - start, zones.size)), start=start)
        return w.publish()

    first = publish(40, 0, False)
    second = publish(70, 40, True)  # retires the first; with no grace it is due at once
    left = _listing(s3_server, bucket, f"keep/versions/{first}/")
    # the first's metadata and manifest are gone; its blocks 0 and 1 stay (inherited)
    assert left and all("/c/" in k for k in left)
    assert {int(k.split("/c/")[1].split("/")[0]) for k in left} == {0, 1}
    cube = open_cube(url, storage_options=options)
    assert cube.version == second
    assert np.isfinite(cube.read("x", zones)).all()
    publish(3, 0, False)  # a fresh version: nothing of the first two is used any more
    assert _listing(s3_server, bucket, f"keep/versions/{first}/") == set()
    assert _listing(s3_server, bucket, f"keep/versions/{second}/") == set()
