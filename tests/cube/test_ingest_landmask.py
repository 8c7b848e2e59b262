"""A real open dataset: the GLOBE 1 km land/sea mask shipped in the global-land-mask wheel.

Source: NOAA NGDC GLOBE (Global Land One-km Base Elevation) project, as packaged by the
``global-land-mask`` PyPI project (MIT licence): a boolean ocean mask of 21600 x 43200
cells of 1/120 degree, cell corners from 90 N / 180 W.
"""

from __future__ import annotations

import importlib.util
from pathlib import Path

import numpy as np
import pytest
from cube_sources import write_geotiff

from alveary import grid
from alveary.cube import open_cube
from alveary.ingest import ingest

STEP = 0.25  # degrees; 30 x 30 mask cells per raster pixel


@pytest.fixture(scope="module")
def land_fraction(tmp_path_factory):
    spec = importlib.util.find_spec("global_land_mask")
    if spec is None or not spec.submodule_search_locations:
        pytest.fail("global-land-mask (test extra) is not installed")
    npz = Path(next(iter(spec.submodule_search_locations))) / "globe_combined_mask_compressed.npz"
    with np.load(npz) as f:
        lat = f["lat"]
        ocean = f["mask"]
    assert ocean.shape == (21600, 43200) and lat[0] == 90.0
    b = round(STEP * 120)
    land = (~ocean).reshape(21600 // b, b, 43200 // b, b).sum(axis=(1, 3), dtype=np.uint32)
    frac = (land / float(b * b)).astype("f4")
    path = write_geotiff(
        tmp_path_factory.mktemp("globe") / "land.tif", frac, west=-180, north=90, step_x=STEP
    )
    return path, frac


def test_land_share_of_the_earth(tmp_path, land_fraction):
    path, frac = land_fraction
    level = 6
    ingest([path], str(tmp_path / "c"), level, method="mean", cube_id="land", time="2024-01-01")
    cube = open_cube(str(tmp_path / "c"))
    values = cube.read("land", grid.all_zones(level))[0]
    assert np.isfinite(values).all()
    ours = float(values.mean())  # equal-area zones: the plain mean is the area mean
    # independent figure from the same source: the cos(latitude)-weighted pixel mean
    lat = 90.0 - STEP * (np.arange(frac.shape[0]) + 0.5)
    w = np.cos(np.radians(lat))
    weighted = float((frac.mean(axis=1) * w).sum() / w.sum())
    assert abs(ours - weighted) < 2e-3
    # published figure (from memory, CIA World Factbook): land is about 29 % of the surface
    assert abs(ours - 0.29) < 0.01
    # the plain pixel mean over-weights high latitudes (Antarctica, Arctic land)
    assert float(frac.mean()) - ours > 0.02
