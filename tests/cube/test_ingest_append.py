"""A build never silently replaces a cube; appending writes only what changes.

The judges: rasterio's own pixel lookup for the values, the files on disk (pathlib) for
what each version stored, and the cube as it was before for what must not change.
"""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
import rasterio
from cube_sources import daily_geotiffs

from alveary import IngestError, grid
from alveary.cube import open_cube
from alveary.ingest import ingest

LEVEL = 5
BOX = {"west": 0.0, "south": 30.0, "east": 40.0, "north": 60.0, "step": 1.0}
ALVEARY = str(Path(sys.executable).parent / "alveary")
DAYS = np.arange("2024-03-01", "2024-03-13", dtype="datetime64[D]")


@pytest.fixture
def series(tmp_path):
    """Twelve daily rasters; returns (paths by day, fields by day)."""
    paths, fields = daily_geotiffs(tmp_path / "src", "t", DAYS, seed=3, **BOX)
    return dict(zip([str(d) for d in DAYS], paths, strict=True)), fields


def _pixels(path, zones):
    """rasterio's own index() of the pixel under each zone centre."""
    lat, lon = grid.zone_to_point(zones)
    with rasterio.open(path) as ds:
        return rasterio.transform.rowcol(ds.transform, np.asarray(lon), np.asarray(lat))


def _zones():
    return grid.zones_in_bbox(1.0, 31.0, 39.0, 59.0, LEVEL)


def _expect(series, days, zones):
    paths, fields = series
    rows, cols = _pixels(paths[str(days[0])], zones)
    return np.stack([fields[str(d)][np.asarray(rows), np.asarray(cols)] for d in days])


def _files(root: Path, version: str) -> set[str]:
    base = root / "versions" / version
    return {str(p.relative_to(base)) for p in base.rglob("*") if p.is_file()}


def _tblocks(files: set[str]) -> set[int]:
    return {int(f.split("/c/")[1].split("/")[0]) for f in files if "/strips/c/" in f}


def _build(series, out, days, **kw):
    paths = [series[0][str(d)] for d in days]
    return ingest(paths, str(out), LEVEL, cube_id="t", time_block=4, **kw)


def test_append_writes_only_the_changed_time_blocks(tmp_path, series):
    out = tmp_path / "cube"
    first = _build(series, out, DAYS[:6])  # blocks 0 (4 steps) and 1 (2 of 4)
    reader = open_cube(str(out))
    second = _build(series, out, DAYS[6:10], append=True)  # fills block 1, starts block 2
    assert second.base == first.version and second.times == 10
    # the new version stored only the chunks of blocks 1 and 2; block 0 is the first's
    assert _tblocks(_files(out, first.version)) == {0, 1}
    assert _tblocks(_files(out, second.version)) == {1, 2}
    zones = _zones()
    cube = open_cube(str(out))
    assert cube.version == second.version
    np.testing.assert_array_equal(cube.read("t", zones), _expect(series, DAYS[:10], zones))
    # a reader that opened the first version still reads it, whole
    assert reader.version == first.version and reader.times.size == 6
    np.testing.assert_array_equal(reader.read("t", zones), _expect(series, DAYS[:6], zones))


def test_overlapping_steps_are_refused_unless_overwritten(tmp_path, series):
    out = tmp_path / "cube"
    _build(series, out, DAYS[:6])
    before = sorted(p for p in out.rglob("*"))
    with pytest.raises(IngestError, match=r"already has 2 of these time steps.*--overwrite-steps"):
        _build(series, out, DAYS[4:8], append=True)
    assert sorted(p for p in out.rglob("*")) == before  # nothing written
    # with --overwrite-steps, day 5 comes from another raster and day 7 is new
    paths, fields = daily_geotiffs(tmp_path / "again", "t", DAYS[4:7], seed=9, **BOX)
    ingest(paths, str(out), LEVEL, append=True, overwrite_steps=True)
    zones = _zones()
    got = open_cube(str(out)).read("t", zones)
    rows, cols = (np.asarray(a) for a in _pixels(paths[0], zones))
    np.testing.assert_array_equal(got[:4], _expect(series, DAYS[:4], zones))
    for k, day in enumerate(DAYS[4:7]):
        np.testing.assert_array_equal(got[4 + k], fields[str(day)][rows, cols])


def test_steps_between_existing_ones_are_refused(tmp_path, series):
    out = tmp_path / "cube"
    _build(series, out, DAYS[[0, 2]])
    with pytest.raises(IngestError, match="between the cube's steps"):
        _build(series, out, DAYS[[1, 3]], append=True)


def test_a_different_build_is_refused_naming_each_difference(tmp_path, series):
    out = tmp_path / "cube"
    _build(series, out, DAYS[:4], title="Air temperature")
    before = {p: p.read_bytes() for p in out.rglob("*") if p.is_file()}
    paths, _ = daily_geotiffs(tmp_path / "other", "rain", DAYS[:3], seed=1, **BOX)
    with pytest.raises(IngestError) as err:
        ingest(
            paths,
            str(out),
            LEVEL + 1,
            time_block=2,
            title="Rain",
            pyramid=True,
            pyramid_min_level=LEVEL,
        )
    text = str(err.value)
    for words in (
        "title 'Air temperature' -> 'Rain'",
        "variables removed: t",
        "variables added: rain",
        f"levels [{LEVEL}] -> [{LEVEL}, {LEVEL + 1}]",
        "time axis 4 steps 2024-03-01T00:00:00Z..2024-03-04T00:00:00Z -> 3 steps",
        f"chunks at level {LEVEL} (time, rows, cols) (4, 64, 32) -> (2, 64, 32)",
        "--append",
        "--replace",
    ):
        assert words in text
    assert {p: p.read_bytes() for p in out.rglob("*") if p.is_file()} == before
    # the same build again is no change, and --replace publishes the other one
    _build(series, out, DAYS[:4])
    done = ingest(paths, str(out), LEVEL, replace=True, title="Rain")
    cube = open_cube(str(out))
    assert cube.version == done.version and list(cube.variables) == ["rain"]
    assert cube.title == "Rain"


def test_append_adds_a_variable(tmp_path, series):
    out = tmp_path / "cube"
    _build(series, out, DAYS[:4])
    paths, fields = daily_geotiffs(tmp_path / "rain", "rain", DAYS[2:6], seed=4, **BOX)
    ingest(paths, str(out), LEVEL, append=True)
    cube = open_cube(str(out))
    assert sorted(cube.variables) == ["rain", "t"] and cube.times.size == 6
    zones = _zones()
    rows, cols = (np.asarray(a) for a in _pixels(paths[0], zones))
    rain = cube.read("rain", zones)
    assert np.isnan(rain[:2]).all()
    for k, day in enumerate(DAYS[2:6]):
        np.testing.assert_array_equal(rain[2 + k], fields[str(day)][rows, cols])
    t = cube.read("t", zones)
    np.testing.assert_array_equal(t[:4], _expect(series, DAYS[:4], zones))
    assert np.isnan(t[4:]).all()


def test_append_rebuilds_the_pyramid_of_the_changed_blocks(tmp_path, series):
    out, ref = tmp_path / "cube", tmp_path / "whole"
    kw = {"pyramid": True, "pyramid_min_level": LEVEL - 2, "method": "mean"}
    _build(series, out, DAYS[:5], **kw)
    _build(series, out, DAYS[5:9], append=True, **kw)
    _build(series, ref, DAYS[:9], **kw)  # the same days in one build: the reference
    a, b = open_cube(str(out)), open_cube(str(ref))
    for level in a.levels:
        zones = grid.all_zones(level)
        np.testing.assert_array_equal(a.read("t", zones), b.read("t", zones))


def _cli(*args):
    return subprocess.run(
        [ALVEARY, *args], capture_output=True, text=True, timeout=120, check=False
    )


def test_versions_and_rollback_on_the_command_line(tmp_path, series):
    out = tmp_path / "cube"
    first = _build(series, out, DAYS[:4])
    second = _build(series, out, DAYS[4:6], append=True)
    listing = _cli("versions", str(out))
    assert listing.returncode == 0, listing.stderr
    lines = listing.stdout.splitlines()
    assert lines[0].split() == ["version", "published", "state", "steps", "bytes", "variables"]
    rows = [line.split() for line in lines[1:]]
    assert [r[0] for r in rows] == [second.version, first.version]
    assert [r[2] for r in rows] == ["current", "kept"]
    assert [int(r[3]) for r in rows] == [6, 4]
    assert all(int(r[4]) > 0 and r[5] == "t" for r in rows)
    done = _cli("rollback", str(out), first.version)
    assert done.returncode == 0, done.stderr
    cube = open_cube(str(out))
    assert cube.version == first.version and cube.times.size == 4
    bad = _cli("rollback", str(out), "no-such-version")
    assert bad.returncode == 2 and "kept version" in bad.stderr and "Traceback" not in bad.stderr


def test_a_source_without_time_needs_an_instant(tmp_path):
    from cube_sources import write_geotiff

    path = write_geotiff(tmp_path / "dem.tif", np.ones((10, 10), "f4"), west=0, north=10, step_x=1)
    with pytest.raises(IngestError, match=r"no time axis.*--time"):
        ingest([path], str(tmp_path / "c"), 3)
    done = _cli("ingest", path, "--out", str(tmp_path / "c"), "--level", "3")
    assert done.returncode == 2 and "--time" in done.stderr
    assert not (tmp_path / "c" / "current.json").exists()
    ingest([path], str(tmp_path / "c"), 3, time="2020-06-01T12:00:00+02:00")
    assert str(open_cube(str(tmp_path / "c")).times[0]) == "2020-06-01T10:00:00"
