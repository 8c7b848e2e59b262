"""Bad input gets a clear error and writes nothing; the command line as users run it."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from cube_sources import lonlat_axes, write_geotiff, write_netcdf

from alveary import IngestError, grid
from alveary.cube import open_cube
from alveary.ingest import ingest

ALVEARY = str(Path(sys.executable).parent / "alveary")
T0 = "2024-01-01T00:00:00Z"  # the instant of the undated test rasters


@pytest.fixture
def tif(tmp_path):
    lon, lat = lonlat_axes(1.0, 0, 0, 10, 10)
    return write_geotiff(
        tmp_path / "t.tif", np.ones((lat.size, lon.size)), west=0, north=10, step_x=1.0
    )


def _nothing_at(path: Path) -> bool:
    return not path.exists() or not any(path.rglob("*"))


def test_unreadable_file(tmp_path):
    bad = tmp_path / "broken.tif"
    bad.write_bytes(b"this is not a tiff")
    out = tmp_path / "c"
    with pytest.raises(IngestError, match=r"broken\.tif"):
        ingest([str(bad)], str(out), 3)
    with pytest.raises(IngestError, match="unreadable"):
        ingest([str(tmp_path / "missing.tif")], str(out), 3)
    assert _nothing_at(out)


def test_unknown_crs(tmp_path):
    path = write_geotiff(
        tmp_path / "nocrs.tif", np.ones((10, 10)), west=0, north=10, step_x=1.0, crs=None
    )
    with pytest.raises(IngestError, match="unknown CRS"):
        ingest([path], str(tmp_path / "c"), 3)
    assert _nothing_at(tmp_path / "c")


def test_missing_variable(tmp_path):
    lon, lat = lonlat_axes(1.0)
    nc = write_netcdf(
        tmp_path / "a.nc",
        "rain",
        np.ones((1, lat.size, lon.size)),
        np.array(["2024-01-01"], dtype="datetime64[D]"),
        lat,
        lon,
    )
    with pytest.raises(IngestError, match="rain"):
        ingest([nc], str(tmp_path / "c"), 3, variables=["snow"])
    with pytest.raises(IngestError, match="--variable"):
        ingest([nc], str(tmp_path / "c"), 3)
    assert _nothing_at(tmp_path / "c")


def test_mismatched_grids(tmp_path):
    a = write_geotiff(
        tmp_path / "v_2024-01-01.tif", np.ones((10, 10)), west=0, north=10, step_x=1.0
    )
    b = write_geotiff(
        tmp_path / "v_2024-01-02.tif", np.ones((10, 10)), west=0.5, north=10, step_x=1.0
    )
    with pytest.raises(IngestError, match="same grid"):
        ingest([a, b], str(tmp_path / "c"), 3)
    assert _nothing_at(tmp_path / "c")


@pytest.mark.parametrize("level", [-1, 25, "x"])
def test_level_outside_the_grid(tmp_path, tif, level):
    with pytest.raises(IngestError, match=r"level.*\[0, 24\]"):
        ingest([tif], str(tmp_path / "c"), level)
    assert _nothing_at(tmp_path / "c")


def test_target_holding_a_different_cube(tmp_path, tif):
    out = tmp_path / "c"
    first = ingest([tif], str(out), 3, cube_id="first", time=T0)
    before = sorted(p.relative_to(out) for p in out.rglob("*"))
    with pytest.raises(IngestError, match="already holds cube 'first'"):
        ingest([tif], str(out), 3, cube_id="second", time=T0)
    assert sorted(p.relative_to(out) for p in out.rglob("*")) == before
    assert open_cube(str(out)).version == first.version


def test_failed_build_removes_its_version_and_keeps_the_old_one(tmp_path, tif):
    out = tmp_path / "c"
    first = ingest([tif], str(out), 3, cube_id="keep", time=T0)
    # a file whose header reads but whose pixels do not: the failure comes mid-build
    lon, lat = lonlat_axes(0.05, 0, 0, 10, 10)
    bad = write_geotiff(
        tmp_path / "cut.tif",
        np.random.default_rng(0).random((lat.size, lon.size)),
        west=0,
        north=10,
        step_x=0.05,
    )
    data = Path(bad).read_bytes()
    Path(bad).write_bytes(data[: len(data) // 2])
    with pytest.raises(IngestError, match=r"cut\.tif"):
        ingest([bad], str(out), 6, cube_id="keep", variables=["ones"], time=T0, replace=True)
    assert open_cube(str(out)).version == first.version
    assert {p.name for p in (out / "versions").iterdir()} - {"zarr.json"} == {first.version}


def test_cli_builds_and_reports(tmp_path, tif):
    out = tmp_path / "cli-cube"
    done = subprocess.run(
        [
            ALVEARY,
            "ingest",
            tif,
            "--out",
            str(out),
            "--level",
            "4",
            "--variable",
            "ones",
            "--method",
            "mean",
            "--pyramid",
            "--cube-id",
            "cli",
            "--time",
            T0,
        ],
        capture_output=True,
        text=True,
        timeout=120,
        check=False,
    )
    assert done.returncode == 0, done.stderr
    assert "zones written" in done.stdout and "chunks" in done.stdout
    cube = open_cube(str(out))
    assert cube.id == "cli" and cube.levels == (0, 1, 2, 3, 4) and list(cube.variables) == ["ones"]


def test_cli_errors_exit_2_with_the_parameter(tmp_path, tif):
    done = subprocess.run(
        [ALVEARY, "ingest", tif, "--out", str(tmp_path / "c"), "--level", "30"],
        capture_output=True,
        text=True,
        timeout=120,
        check=False,
    )
    assert done.returncode == 2
    assert "level" in done.stderr and "[0, 24]" in done.stderr
    assert "Traceback" not in done.stderr


def test_killed_build_leaves_the_published_version(tmp_path, tif):
    import signal
    import time

    from cube_sources import write_netcdf

    out = tmp_path / "c"
    first = ingest([tif], str(out), 3, cube_id="k", variables=["v"], time=T0)
    lon, lat = lonlat_axes(0.5)
    times = np.arange("2024-01-01", 24, dtype="datetime64[D]")
    data = np.random.default_rng(0).random((times.size, lat.size, lon.size)).astype("f4")
    nc = write_netcdf(tmp_path / "big.nc", "v", data, times, lat, lon)
    cmd = [
        ALVEARY,
        "ingest",
        nc,
        "--out",
        str(out),
        "--level",
        "6",
        "--variable",
        "v",
        "--method",
        "mean",
        "--pyramid",
        "--cube-id",
        "k",
        "--time-block",
        "4",
        "--replace",
    ]
    proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    try:
        deadline = time.monotonic() + 60
        while time.monotonic() < deadline and proc.poll() is None:
            new = [
                p
                for p in (out / "versions").iterdir()
                if p.name not in (first.version, "zarr.json")
            ]
            if new and any((new[0] / "v" / "6" / "strips" / "c").glob("*/*/*/*")):
                break
            time.sleep(0.02)
        assert proc.poll() is None, "the build finished before it could be killed"
        proc.send_signal(signal.SIGKILL)
        proc.wait(timeout=10)
    finally:
        if proc.poll() is None:
            proc.kill()
    cube = open_cube(str(out))
    assert cube.version == first.version  # the pointer never moved
    assert np.isfinite(cube.read("v", grid.zones_in_bbox(1, 1, 9, 9, 3))).all()  # whole
    # re-running starts cleanly: the abandoned version is removed, the new one published
    done = subprocess.run(
        [*cmd[:-3], "--time-block", "16", "--replace"],
        capture_output=True,
        text=True,
        timeout=300,
        check=False,
    )
    assert done.returncode == 0, done.stderr
    assert cube.refresh() and cube.levels[-1] == 6
    left = {p.name for p in (out / "versions").iterdir()} - {"zarr.json"}
    assert left == {first.version, cube.version}
