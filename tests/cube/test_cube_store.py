"""One set of store tests, run against local disk and a real S3-protocol server (s3fs)."""

from __future__ import annotations

import fsspec
import numpy as np
import pytest
import xarray as xr

from alveary import CubeFormatError, GridError, InvalidInput, NotFound, grid
from alveary.cube import ChunkCache, ChunkShape, create_cube, open_cube

LEVEL = 4
TIMES = np.arange("2024-01-01", "2024-01-11", dtype="datetime64[D]").astype("datetime64[s]")
CHUNKS = ChunkShape(5, 16, 8)


@pytest.fixture(params=["local", "s3"])
def backend(request, tmp_path):
    """(url, storage_options, server or None) of an empty cube location."""
    if request.param == "local":
        return str(tmp_path / "cube"), None, None
    server = request.getfixturevalue("s3_server")
    bucket = server.create_bucket()
    return f"s3://{bucket}/cubes/test", server.storage_options(), server


def _field(zones: np.ndarray) -> np.ndarray:
    lat, lon = grid.zone_to_point(zones)
    t = np.arange(TIMES.size)[:, None]
    return 280.0 + 0.1 * np.asarray(lat)[None, :] + np.cos(np.radians(lon))[None, :] + t


def _build(url, options, cube_id="test", zones=None, offset=0.0, **kw):
    w = create_cube(
        url,
        cube_id=cube_id,
        title="A test cube",
        times=TIMES,
        levels=[LEVEL - 1, LEVEL],
        variables={
            "temp": {"units": "K", "long_name": "surface temperature"},
            "wet": {
                "units": "m3 m-3",
                "long_name": "soil moisture",
                "dtype": "int16",
                "scale_factor": 1e-4,
                "add_offset": 0.0,
            },
        },
        chunks=CHUNKS,
        storage_options=options,
        **kw,
    )
    zones = grid.all_zones(LEVEL) if zones is None else zones
    vals = _field(zones) + offset
    w.write("temp", LEVEL, zones, vals)
    wet = np.clip((vals - 280.0) / 40.0, 0, 0.6)
    wet[:, ::5] = np.nan
    w.write("wet", LEVEL, zones, wet)
    return w, zones, vals, wet


def test_roundtrip_and_metadata(backend):
    url, options, _ = backend
    w, zones, vals, wet = _build(url, options)
    version = w.publish()
    cube = open_cube(url, storage_options=options)
    assert cube.id == "test" and cube.title == "A test cube" and cube.version == version
    assert cube.levels == (LEVEL - 1, LEVEL)
    np.testing.assert_array_equal(cube.times, TIMES)
    assert cube.variables["wet"].units == "m3 m-3" and cube.variables["wet"].dtype == "int16"
    got = cube.read("temp", zones)
    np.testing.assert_allclose(got, vals, rtol=0, atol=1e-4)  # float32 storage
    got_wet = cube.read("wet", zones)
    assert np.isnan(got_wet[:, ::5]).all()
    np.testing.assert_allclose(got_wet, wet, atol=0.5e-4 + 1e-12)  # packed to 1e-4 steps
    # a level that was declared but not written reads as no data
    assert np.isnan(cube.read("temp", grid.all_zones(LEVEL - 1)[:10])).all()
    # time sub-ranges: start <= t <= end
    part = cube.read("temp", zones[:3], start="2024-01-03", end="2024-01-05T00:00:00Z")
    np.testing.assert_allclose(part, vals[2:5, :3], atol=1e-4)
    assert cube.time_indices("2024-01-03T12:00:00Z", None) == slice(3, 10)


def test_cf_decoding_matches_xarray(backend):
    # xarray's CF decoding (scale_factor, add_offset, _FillValue) is the reference.
    url, options, _ = backend
    w, zones, _, _ = _build(url, options)
    version = w.publish()
    cube = open_cube(url, storage_options=options)
    ds = xr.open_zarr(
        url,
        group=f"versions/{version}/wet/{LEVEL}",
        storage_options=options,
        consolidated=False,
        zarr_format=3,
    )
    strips = ds["strips"].values  # decoded by xarray
    _, region, i, j = grid.zone_to_index(zones)
    region, i, j = (np.asarray(x) for x in (region, i, j))
    s = region < 5
    ours = cube.read("wet", zones[s])
    ref = strips[:, region[s], i[s], j[s]]
    np.testing.assert_allclose(ours, ref, rtol=0, atol=1e-7, equal_nan=True)


def test_regional_cube_stores_only_its_chunks(tmp_path):
    url = str(tmp_path / "regional")
    zones = grid.zones_in_bbox(10.0, 40.0, 30.0, 55.0, LEVEL)
    w, _, _, _ = _build(url, None, zones=zones)
    version = w.publish()
    _, region, i, j = grid.zone_to_index(zones)
    expected = {
        (int(k), int(a) // CHUNKS.rows, int(b) // CHUNKS.cols)
        for k, a, b in zip(region, i, j, strict=True)
        if k < 5
    }
    tblocks = -(-TIMES.size // CHUNKS.time)
    stored = list(
        (tmp_path / "regional" / "versions" / version / "temp" / str(LEVEL) / "strips" / "c").rglob(
            "*"
        )
    )
    files = [p for p in stored if p.is_file()]
    assert len(files) == len(expected) * tblocks
    assert not (
        tmp_path / "regional" / "versions" / version / "temp" / str(LEVEL - 1) / "strips" / "c"
    ).exists()


def test_versions_switch_atomically(backend):
    url, options, _ = backend
    w1, zones, vals, _ = _build(url, options)
    v1 = w1.publish()
    reader = open_cube(url, storage_options=options)
    w2, _, vals2, _ = _build(url, options, offset=100.0)
    # until the pointer moves, readers see the old version whole
    assert open_cube(url, storage_options=options).version == v1
    v2 = w2.publish()
    assert v2 != v1 and v2 > v1
    np.testing.assert_allclose(reader.read("temp", zones[:5]), vals[:, :5], atol=1e-4)
    assert reader.refresh() is True and reader.version == v2
    np.testing.assert_allclose(reader.read("temp", zones[:5]), vals2[:, :5], atol=1e-4)
    assert reader.refresh() is False
    # keep 2: the third publish retires the first (deleted after the grace period)
    w3, _, _, _ = _build(url, options, offset=200.0)
    w3.publish()
    fresh = open_cube(url, storage_options=options)
    assert fresh.version == w3.version
    np.testing.assert_allclose(reader.read("temp", zones[:2]), vals2[:, :2], atol=1e-4)


def test_unpublished_build_leaves_the_old_version(backend):
    url, options, _ = backend
    w1, zones, vals, _ = _build(url, options)
    v1 = w1.publish()
    _build(url, options, offset=50.0)  # written, never published (as if the build died)
    cube = open_cube(url, storage_options=options)
    assert cube.version == v1
    np.testing.assert_allclose(cube.read("temp", zones[:4]), vals[:, :4], atol=1e-4)
    # the next build starts cleanly: the abandoned version is removed first
    w3, _, vals3, _ = _build(url, options, offset=70.0)
    w3.publish()
    assert cube.refresh() and cube.version == w3.version
    np.testing.assert_allclose(cube.read("temp", zones[:4]), vals3[:, :4], atol=1e-4)
    assert _versions(url, options) == {v1, w3.version}


def _versions(url, options):
    # fsspec's own listing, independent of the cube code
    fs, path = fsspec.core.url_to_fs(url, **(options or {}))
    fs.invalidate_cache()
    return {p.rstrip("/").rsplit("/", 1)[-1] for p in fs.ls(path + "/versions")} - {"zarr.json"}


def test_refuses_a_different_cube(backend):
    url, options, _ = backend
    _build(url, options)[0].publish()
    with pytest.raises(CubeFormatError, match="already holds cube 'test'"):
        _build(url, options, cube_id="other")


def test_refuses_a_foreign_directory(tmp_path):
    (tmp_path / "x").mkdir()
    (tmp_path / "x" / "notes.txt").write_text("not a cube")
    with pytest.raises(CubeFormatError, match=r"notes\.txt"):
        _build(str(tmp_path / "x"), None)


def test_read_errors_name_the_problem(tmp_path):
    url = str(tmp_path / "c")
    _build(url, None)[0].publish()
    cube = open_cube(url)
    with pytest.raises(NotFound, match="variables: temp, wet"):
        cube.read("rain", grid.all_zones(1)[:1])
    with pytest.raises(NotFound, match="levels present: 3, 4"):
        cube.read("temp", grid.all_zones(2)[:1])
    mixed = np.concatenate([grid.all_zones(3)[:1], grid.all_zones(4)[:1]])
    with pytest.raises(GridError, match="one level"):
        cube.read("temp", mixed)
    with pytest.raises(InvalidInput, match="RFC 3339"):
        cube.read("temp", grid.all_zones(4)[:1], start="yesterday")
    with pytest.raises(NotFound):
        open_cube(str(tmp_path / "nothing-here"))


def test_cache_serves_repeated_reads_without_gets(tmp_path):
    url = str(tmp_path / "c")
    w, zones, _, _ = _build(url, None)
    w.publish()
    cache = ChunkCache(max_bytes=10_000_000)
    cube = open_cube(url, cache=cache)
    a = cube.read("temp", zones[:50])
    gets = cube.stats.chunk_gets
    b = cube.read("temp", zones[:50])
    np.testing.assert_array_equal(a, b)
    assert cube.stats.chunk_gets == gets
    assert cache.hits >= 1 and cache.bytes > 0
    one_chunk = cube.plan("temp", zones[:1]).max_bytes
    tiny = ChunkCache(max_bytes=8 * one_chunk)  # room for eight chunks
    cube2 = open_cube(url, cache=tiny)
    for z in zones[:: max(1, zones.size // 40)]:  # one chunk per read (1/8 of the cache)
        cube2.read("temp", [z])
    assert tiny.bytes <= tiny.max_bytes and tiny.evictions > 0


async def test_read_async_matches_read(tmp_path):
    url = str(tmp_path / "c")
    w, zones, _, _ = _build(url, None)
    w.publish()
    cube = open_cube(url)
    got = await cube.read_async("wet", zones[:30], "2024-01-02", "2024-01-09")
    np.testing.assert_array_equal(got, cube.read("wet", zones[:30], "2024-01-02", "2024-01-09"))


def test_memory_store_roundtrip():
    url = "memory://alveary-tests/store-roundtrip"
    w, zones, vals, _ = _build(url, None)
    w.publish()
    np.testing.assert_allclose(open_cube(url).read("temp", zones[:9]), vals[:, :9], atol=1e-4)


def test_a_scan_larger_than_an_eighth_of_the_cache_does_not_fill_it():
    """Small reads are kept; a read of more than 1/8 of the cache's bytes is answered
    (values as written) but leaves the cache as it was."""
    import numpy as np

    from alveary import grid
    from alveary.cube import ChunkCache, create_cube, open_cube

    w = create_cube(
        "memory://scan/c",
        cube_id="scan",
        times=["2024-01-01"],
        levels=[4],
        variables={"t": {"units": "K", "dtype": "float64"}},
    )
    zones = grid.all_zones(4)
    w.write("t", 4, zones, np.arange(zones.size, dtype=float)[None, :])
    w.publish()
    cube = open_cube("memory://scan/c")
    one = cube.plan("t", zones[:1])
    cache = ChunkCache(max_bytes=8 * one.max_bytes)
    assert cube.read("t", zones[:1], cache=cache).tolist() == [[0.0]]
    assert len(cache) == 1
    whole = cube.plan("t", zones)
    assert whole.max_bytes > cache.max_bytes // 8
    np.testing.assert_array_equal(cube.read("t", zones, cache=cache)[0], np.arange(zones.size))
    assert len(cache) == 1  # the scan kept nothing
