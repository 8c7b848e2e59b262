"""The demo: invented sources through the real ingest path, into the embedded store."""

from __future__ import annotations

import numpy as np
import xarray as xr
from pyproj import CRS

from alveary import grid
from alveary.cube import open_cube
from alveary.ingest import build_demo
from alveary.ingest._demo import DEMO_LEVEL, DEMO_MIN_LEVEL, write_demo_sources


def test_demo_sources_are_cf_netcdf(tmp_path):
    paths = write_demo_sources(tmp_path, days=35)
    assert [p.rsplit("_", 1)[-1] for p in paths] == ["2025-01.nc", "2025-02.nc"]
    with xr.open_dataset(paths[0]) as ds:  # xarray's CF decoding is the reference
        assert CRS.from_cf(ds["crs"].attrs).to_epsg() == 32624
        sm = ds["soil_moisture"]
        assert sm.encoding["dtype"] == np.int16 and sm.attrs["units"] == "m3 m-3"
        assert 0.03 < float(sm.min()) and float(sm.max()) < 0.5
        assert bool(np.isnan(sm).any())  # the reservoir and river are water


def test_build_demo_into_a_store(tmp_path):
    url = build_demo(tmp_path, days=40)
    assert url == str(tmp_path / "velmora-irrigation")
    assert build_demo(tmp_path, days=40) == url  # already built: nothing to do
    cube = open_cube(url)
    assert cube.id == "velmora-irrigation"
    assert cube.levels == tuple(range(DEMO_MIN_LEVEL, DEMO_LEVEL + 1))
    assert set(cube.variables) == {"soil_moisture", "canopy_temperature"}
    assert cube.times.size == 40
    w, s, e, n = cube.coverage
    assert w < -36.10 < e and s < 30.55 < n
    zones = grid.zones_in_bbox(w, s, e, n, DEMO_LEVEL)
    sm = cube.read("soil_moisture", zones)
    tc = cube.read("canopy_temperature", zones)
    assert np.isfinite(sm).mean() > 0.5
    assert 0.03 < np.nanmin(sm) and np.nanmax(sm) < 0.5
    assert 270 < np.nanmin(tc) and np.nanmax(tc) < 320
    # area means agree between the finest level and its pyramid (same zones' footprint)
    day = cube.times[20]
    fine = np.nanmean(cube.read("soil_moisture", zones, day, day))
    coarse_z = grid.zones_in_bbox(w, s, e, n, DEMO_LEVEL - 1)
    coarse = np.nanmean(cube.read("soil_moisture", coarse_z, day, day))
    assert abs(fine - coarse) < 0.01
