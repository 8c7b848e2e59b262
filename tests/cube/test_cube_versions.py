"""Versions: retention with a grace period, rollback, old cubes, file modes, checksums.

Judges: the files on disk (pathlib, os.stat), the pointer read as plain JSON, values
computed in the test, the format-1 layout written with zarr directly from the format's
documentation, and an independent CRC32C implementation (the ``crc32c`` package).
"""

from __future__ import annotations

import json
import os
from datetime import UTC, datetime, timedelta
from pathlib import Path

import crc32c
import numpy as np
import pytest
from cube_sources import write_format1_cube

from alveary import ChunkDecodeError, InvalidInput, grid
from alveary.cube import (
    ChunkShape,
    create_cube,
    is_checksum_error,
    list_versions,
    open_cube,
    rollback,
)

LEVEL = 3
ZONES = grid.all_zones(LEVEL)
DAYS = np.arange("2024-05-01", "2024-05-11", dtype="datetime64[D]").astype("datetime64[s]")
T0 = datetime(2030, 1, 1, tzinfo=UTC)


def _field(days, offset=0.0):
    lat, lon = (np.asarray(a) for a in grid.zone_to_point(ZONES))
    k = np.arange(days)[:, None]
    return (lat[None, :] + 0.01 * lon[None, :] + k + offset).astype("f4").astype("f8")


def _writer(url, ndays, **kw):
    return create_cube(
        url,
        cube_id="r",
        times=DAYS[:ndays],
        levels=[LEVEL],
        variables={"v": {"units": "1"}},
        chunks=ChunkShape(2, 16, 8),
        **kw,
    )


def _fresh(url, ndays, now, offset=0.0, **kw):
    w = _writer(url, ndays, **kw)
    w.write("v", LEVEL, ZONES, _field(ndays, offset))
    return w.publish(now=now)


def _append(url, old, new, now, **kw):
    w = _writer(url, new, inherit=True, **kw)
    w.write("v", LEVEL, ZONES, _field(new)[old:], start=old)
    return w.publish(now=now)


def _pointer(root: Path):
    return json.loads((root / "current.json").read_text())


def _files(root: Path, version: str):
    base = root / "versions" / version
    return {str(p.relative_to(base)) for p in base.rglob("*") if p.is_file()}


def test_retention_keeps_what_readers_and_kept_versions_use(tmp_path):
    root = tmp_path / "cube"
    url = str(root)
    v1 = _fresh(url, 4, T0, keep_versions=1, grace_seconds=60)
    reader = open_cube(url)
    # two publishes within one refresh interval (30 s): v1 is retired, not deleted
    v2 = _append(url, 4, 6, T0 + timedelta(seconds=10))
    v3 = _append(url, 6, 8, T0 + timedelta(seconds=20))
    assert reader.version == v1
    np.testing.assert_array_equal(reader.read("v", ZONES), _field(4))
    ptr = _pointer(root)
    assert ptr["version"] == v3 and ptr["retention"] == {"keep": 1, "grace_seconds": 60.0}
    listed = {e["id"]: e for e in ptr["versions"]}
    assert list(listed) == [v3, v2, v1]
    assert listed[v1]["retired"].startswith("2030-01-01T00:00:10")
    assert listed[v1]["delete_after"].startswith("2030-01-01T00:01:10")
    # past v1's grace period: its own objects go, the chunks later versions use stay
    v4 = _append(url, 8, 10, T0 + timedelta(seconds=75))
    assert [e["id"] for e in _pointer(root)["versions"]] == [v4, v3, v2]
    left = _files(root, v1)
    assert left and all("/c/" in f for f in left)  # chunks only: no metadata
    assert {int(f.split("/c/")[1].split("/")[0]) for f in left} == {0, 1}  # days 1-4
    np.testing.assert_array_equal(open_cube(url).read("v", ZONES), _field(10))
    # a fresh build: v2 and v3 are due, but v4 (retired, in its grace period) still
    # uses chunks stored under v1, v2 and v3, so exactly those stay
    v5 = _fresh(url, 3, T0 + timedelta(seconds=1000), offset=5.0)
    assert [e["id"] for e in _pointer(root)["versions"]] == [v5, v4]
    for old, blocks in ((v1, {0, 1}), (v2, {2}), (v3, {3})):
        left = _files(root, old)
        assert all("/c/" in f for f in left)
        assert {int(f.split("/c/")[1].split("/")[0]) for f in left} == blocks
    # once v4 is due too, nothing references the old directories: they are gone
    v6 = _fresh(url, 3, T0 + timedelta(seconds=2000), offset=6.0)
    assert {p.name for p in (root / "versions").iterdir()} - {"zarr.json"} == {v5, v6}
    np.testing.assert_array_equal(open_cube(url).read("v", ZONES), _field(3, 6.0))


def test_rollback_switches_the_pointer(tmp_path):
    url = str(tmp_path / "cube")
    v1 = _fresh(url, 4, T0, keep_versions=2)
    v2 = _append(url, 4, 6, T0 + timedelta(seconds=5))
    v3 = _fresh(url, 2, T0 + timedelta(seconds=9), offset=1.0)
    assert [v.id for v in list_versions(url)] == [v3, v2, v1]
    assert [v.row()["state"] for v in list_versions(url)] == ["current", "kept", "retired"]
    cube = open_cube(url)
    rollback(url, v2)
    assert cube.refresh() and cube.version == v2
    np.testing.assert_array_equal(cube.read("v", ZONES), _field(6))
    with pytest.raises(InvalidInput, match="a kept version"):
        rollback(url, v1)  # retired: its objects may go at any time


def test_a_format_1_cube_stays_readable_and_can_grow(tmp_path):
    root = tmp_path / "old"
    old = write_format1_cube(root, "r", DAYS[:4], LEVEL, "v", _field(4))
    cube = open_cube(str(root))
    np.testing.assert_array_equal(cube.read("v", ZONES), _field(4))
    assert cube.meta.written("v/3/strips", (0, 0, 0, 0)) is None  # unknown: no manifest
    assert [(v.id, v.steps) for v in list_versions(str(root))] == [(old, 4)]
    # appending: the format-1 chunks are inherited as they are (no checksum, one block)
    w = create_cube(
        str(root),
        cube_id="r",
        times=DAYS[:6],
        levels=[LEVEL],
        variables={"v": {"units": "1", "long_name": "v"}},
        chunks=ChunkShape(4, 16, 8),
        inherit=True,
    )
    w.write("v", LEVEL, ZONES, _field(6)[4:], start=4)
    new = w.publish()
    cube = open_cube(str(root))
    assert cube.version == new
    np.testing.assert_array_equal(cube.read("v", ZONES), _field(6))
    assert cube.meta.written("v/3/strips", (0, 0, 0, 0)) is True
    assert cube.meta.written("v/3/strips", (2, 0, 0, 0)) is False  # off the time axis
    assert not any("/c/0/" in f for f in _files(root, new))  # nothing copied


def test_published_objects_follow_the_umask(tmp_path):
    old = os.umask(0o027)
    try:
        url = str(tmp_path / "cube")
        _fresh(url, 4, T0)
        _append(url, 4, 6, T0 + timedelta(seconds=1))
    finally:
        os.umask(old)
    root = Path(url)
    files = [p for p in root.rglob("*") if p.is_file()]
    dirs = [root, *(p for p in root.rglob("*") if p.is_dir())]
    assert any(p.name == "current.json" for p in files) and len(files) > 20
    # os.stat is the judge: rw-r----- for files, rwxr-x--- for directories
    assert {oct(p.stat().st_mode & 0o777) for p in files} == {oct(0o640)}
    assert {oct(p.stat().st_mode & 0o777) for p in dirs} == {oct(0o750)}


def test_a_flipped_byte_in_a_chunk_fails_its_checksum(tmp_path):
    url = str(tmp_path / "cube")
    version = _fresh(url, 4, T0)
    chunk = Path(url) / "versions" / version / "v" / "3" / "strips" / "c" / "0" / "2" / "0" / "0"
    data = bytearray(chunk.read_bytes())
    # the last four bytes are the CRC32C of the rest, little-endian (zarr v3 crc32c codec)
    assert crc32c.crc32c(bytes(data[:-4])) == int.from_bytes(data[-4:], "little")
    data[len(data) // 2] ^= 0x10
    chunk.write_bytes(bytes(data))
    cube = open_cube(url)
    _, region, _, _ = grid.zone_to_index(ZONES)
    hit = ZONES[np.asarray(region) == 2]
    with pytest.raises(ChunkDecodeError, match="fails its checksum") as err:
        cube.read("v", hit, end=DAYS[1])
    assert is_checksum_error(err.value)  # zarr's own crc32c mismatch is its cause
    other = ZONES[np.asarray(region) == 1]  # other chunks read as before
    np.testing.assert_array_equal(cube.read("v", other), _field(4)[:, np.asarray(region) == 1])


def test_a_sharded_cube_lists_its_shards(tmp_path):
    url = str(tmp_path / "sharded")
    w = create_cube(
        url,
        cube_id="s",
        times=DAYS[:4],
        levels=[LEVEL],
        variables={"v": {"units": "1"}},
        chunks=ChunkShape(2, 8, 4),
        shards=(2, 2, 2),  # one shard: 4 steps x 16 rows x 8 columns of a strip
    )
    _, region, _, _ = grid.zone_to_index(ZONES)
    north = np.asarray(region) == 0
    w.write("v", LEVEL, ZONES[north], _field(4)[:, north])
    version = w.publish()
    cube = open_cube(url)
    np.testing.assert_array_equal(cube.read("v", ZONES[north]), _field(4)[:, north])
    assert np.isnan(cube.read("v", ZONES[~north & (np.asarray(region) < 5)])).all()
    # the objects on disk are one shard per strip that has data: strip 0 only
    shards = {
        f.split("/c/")[1] for f in _files(Path(url), version) if f.startswith("v/3/strips/c/")
    }
    assert shards == {"0/0/0/0"}
    plan = cube.plan("v", ZONES)
    for cr in plan.reads:
        assert cube.meta.written(cr.array, cr.coords) is (
            cr.array.endswith("strips") and cr.coords[1] == 0
        )
