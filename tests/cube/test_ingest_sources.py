"""Sources: GeoTIFF series, NetCDF and Zarr, projected CRS, packed integers, points."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import rasterio
import xarray as xr
from cube_sources import lonlat_axes, write_geotiff, write_netcdf
from pyproj import Transformer

from alveary import grid
from alveary.cube import open_cube
from alveary.ingest import ingest

LEVEL = 8


def _region_zones(level, west, south, east, north):
    return grid.zones_in_bbox(west, south, east, north, level)


def test_geotiff_series_nearest_is_the_pixel_under_the_centre(tmp_path):
    lon, lat = lonlat_axes(0.05, 10.0, 40.0, 14.0, 43.0)
    rng = np.random.default_rng(3)
    paths = []
    fields = []
    for day in ("2024-05-01", "2024-05-02", "2024-05-04"):
        f = rng.normal(20.0, 3.0, size=(lat.size, lon.size)).astype("f4")
        fields.append(f)
        paths.append(write_geotiff(tmp_path / f"tair_{day}.tif", f, west=10, north=43, step_x=0.05))
    summary = ingest(paths, str(tmp_path / "c"), LEVEL, cube_id="tair")
    cube = open_cube(str(tmp_path / "c"))
    assert list(cube.variables) == ["tair"]
    assert [str(t)[:10] for t in cube.times] == ["2024-05-01", "2024-05-02", "2024-05-04"]
    zones = _region_zones(LEVEL, 10.2, 40.2, 13.8, 42.8)
    got = cube.read("tair", zones)
    # reference: rasterio's own index() of the pixel holding each zone centre
    zlat, zlon = grid.zone_to_point(zones)
    with rasterio.open(paths[0]) as ds:
        rows, cols = rasterio.transform.rowcol(ds.transform, np.asarray(zlon), np.asarray(zlat))
    for k, f in enumerate(fields):
        np.testing.assert_array_equal(got[k], f[np.asarray(rows), np.asarray(cols)])
    assert summary.zones_written[LEVEL] >= zones.size
    assert summary.chunks_written > 0 and summary.bytes_stored > 0


def test_projected_netcdf_and_zarr(tmp_path):
    # a UTM grid (EPSG:32633) with a CF grid_mapping; pyproj is the reference transform
    x = 500_000.0 + 1000.0 * np.arange(60) + 500.0
    y = 4_600_000.0 - 1000.0 * np.arange(50) - 500.0
    times = np.array(["2024-01-01", "2024-01-02"], dtype="datetime64[ns]")
    data = np.stack([np.add.outer(y / 1e4, x / 1e4), np.add.outer(y / 1e4, -x / 1e4)])
    from pyproj import CRS

    ds = xr.Dataset(
        {
            "elev": (("time", "y", "x"), data, {"units": "m", "grid_mapping": "crs"}),
            "crs": ((), 0, CRS.from_epsg(32633).to_cf()),
        },
        coords={
            "time": times,
            "x": ("x", x, {"standard_name": "projection_x_coordinate"}),
            "y": ("y", y, {"standard_name": "projection_y_coordinate"}),
        },
    )
    nc = tmp_path / "elev.nc"
    ds.to_netcdf(nc)
    zarr_path = tmp_path / "elev.zarr"
    ds.to_zarr(zarr_path, zarr_format=3, consolidated=False)
    tr = Transformer.from_crs("EPSG:32633", "EPSG:4326", always_xy=True)
    lo, la = tr.transform(x[30], y[25])
    zones = grid.zone_disk(grid.point_to_zone(la, lo, 11), 3)
    zlat, zlon = grid.zone_to_point(zones)
    zx, zy = Transformer.from_crs("EPSG:4326", "EPSG:32633", always_xy=True).transform(
        np.asarray(zlon), np.asarray(zlat)
    )
    col = np.floor((zx - 500_000.0) / 1000.0).astype(int)
    row = np.floor((4_600_000.0 - zy) / 1000.0).astype(int)
    for src, cid in ((nc, "nc"), (zarr_path, "zr")):
        ingest([str(src)], str(tmp_path / cid), 11, variables=["elev"], cube_id=cid)
        got = open_cube(str(tmp_path / cid)).read("elev", zones)
        np.testing.assert_allclose(got, data[:, row, col], rtol=0, atol=1e-3)


def test_nodata_is_never_averaged(tmp_path):
    lon, lat = lonlat_axes(0.01, 5.0, 45.0, 7.0, 47.0)
    f = np.full((lat.size, lon.size), 5.0, dtype="f4")
    rng = np.random.default_rng(0)
    holes = rng.random(f.shape) < 0.3
    f[holes] = -9999.0
    path = write_geotiff(tmp_path / "five.tif", f, west=5, north=47, step_x=0.01, nodata=-9999.0)
    ingest(
        [path],
        str(tmp_path / "c"),
        9,
        method="mean",
        cube_id="five",
        min_coverage=0.0,
        time="2024-01-01",
    )
    cube = open_cube(str(tmp_path / "c"))
    got = cube.read("five", _region_zones(9, 5.3, 45.3, 6.7, 46.7))
    assert np.isfinite(got).all()
    np.testing.assert_allclose(got, 5.0, rtol=0, atol=1e-6)


def test_packed_integers_keep_their_packing(tmp_path):
    lon, lat = lonlat_axes(0.1, 0.0, 0.0, 4.0, 4.0)
    raw = (np.arange(lat.size * lon.size).reshape(lat.size, lon.size) % 3000).astype("int16")
    path = write_geotiff(
        tmp_path / "sm.tif", raw, west=0, north=4, step_x=0.1, nodata=-32768, scale=1e-4
    )
    ingest([path], str(tmp_path / "c"), 7, cube_id="sm", time="2024-01-01")
    cube = open_cube(str(tmp_path / "c"))
    info = cube.variables["sm"]
    assert info.dtype == "int16" and info.scale_factor == pytest.approx(1e-4)
    z = _region_zones(7, 0.5, 0.5, 3.5, 3.5)
    zlat, zlon = grid.zone_to_point(z)
    rows = np.floor((4 - np.asarray(zlat)) / 0.1).astype(int)
    cols = np.floor(np.asarray(zlon) / 0.1).astype(int)
    np.testing.assert_allclose(cube.read("sm", z)[0], raw[rows, cols] * 1e-4, atol=1e-9)


def test_netcdf_time_axis_across_files(tmp_path):
    lon, lat = lonlat_axes(1.0)
    t1 = np.array(["2024-01-01", "2024-01-02"], dtype="datetime64[D]")
    t2 = np.array(["2024-01-03"], dtype="datetime64[D]")
    d1 = np.stack([np.full((lat.size, lon.size), v) for v in (1.0, 2.0)])
    d2 = np.full((1, lat.size, lon.size), 3.0)
    a = write_netcdf(tmp_path / "b.nc", "p", d2, t2, lat, lon, {"units": "mm"})
    b = write_netcdf(tmp_path / "a.nc", "p", d1, t1, lat, lon, {"units": "mm"})
    ingest([a, b], str(tmp_path / "c"), 3, variables=["p"], cube_id="p")
    cube = open_cube(str(tmp_path / "c"))
    assert cube.times.size == 3 and cube.variables["p"].units == "mm"
    got = cube.read("p", grid.all_zones(3))
    np.testing.assert_array_equal(got, np.array([[1.0], [2.0], [3.0]]) * np.ones_like(got))


@pytest.mark.parametrize("suffix", [".csv", ".parquet"])
def test_points_are_binned_per_zone_and_day(tmp_path, suffix):
    rng = np.random.default_rng(11)
    n = 3000
    table = pd.DataFrame(
        {
            "lat": rng.uniform(47.0, 48.0, n),
            "lon": rng.uniform(8.0, 9.5, n),
            "time": pd.Timestamp("2024-06-01", tz="UTC")
            + pd.to_timedelta(rng.uniform(0, 3 * 86400, n), unit="s"),
            "no2": rng.gamma(3.0, 5.0, n),
        }
    )
    path = tmp_path / f"obs{suffix}"
    if suffix == ".csv":
        table.to_csv(path, index=False)
    else:
        table.to_parquet(path)
    level = 9
    ingest([str(path)], str(tmp_path / "c"), level, cube_id="obs")
    cube = open_cube(str(tmp_path / "c"))
    assert set(cube.variables) == {"no2", "no2_count"}
    # reference: pandas groupby over (zone, UTC day)
    table["zone"] = grid.point_to_zone(table["lat"].to_numpy(), table["lon"].to_numpy(), level)
    table["day"] = table["time"].dt.floor("1D").dt.tz_localize(None)
    ref = table.groupby(["day", "zone"])["no2"].agg(["mean", "count"])
    zones = np.unique(table["zone"].to_numpy())
    mean = cube.read("no2", zones)
    count = cube.read("no2_count", zones)
    for (day, zone), row in ref.iterrows():
        t = int(np.flatnonzero(cube.times == np.datetime64(day, "s"))[0])
        z = int(np.flatnonzero(zones == zone)[0])
        assert mean[t, z] == pytest.approx(row["mean"], rel=1e-6)
        assert count[t, z] == row["count"]
    assert np.nansum(count) == n
