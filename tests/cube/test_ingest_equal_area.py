"""Equal area does what it promises: ingested fields against results of calculus."""

from __future__ import annotations

import math

import numpy as np
import pytest
from cube_sources import lonlat_axes, write_geotiff

from alveary import grid
from alveary.cube import open_cube
from alveary.ingest import ingest

# WGS84 (NIMA TR8350.2, common practice): a = 6378137 m, f = 1/298.257223563
A = 6378137.0
F = 1 / 298.257223563
E2 = F * (2 - F)
E = math.sqrt(E2)


def _q(phi):
    """Snyder (1987), Map Projections - A Working Manual, eq. 3-12."""
    s = np.sin(phi)
    return (1 - E2) * (s / (1 - E2 * s * s) - (1 / (2 * E)) * np.log((1 - E * s) / (1 + E * s)))


Q_P = float(_q(np.pi / 2))
R_Q = A * math.sqrt(Q_P / 2)  # radius of the authalic sphere, Snyder eq. 3-13


def _sin_beta(phi):
    return _q(phi) / Q_P  # authalic latitude, Snyder eq. 3-11


def _wgs84_mean_sin2():
    """∫ sin²φ d(sin β) / 2 over the whole ellipsoid (midpoint rule, 200k steps)."""
    edges = np.linspace(-np.pi / 2, np.pi / 2, 200_001)
    mid = (edges[1:] + edges[:-1]) / 2
    return float(np.sum(np.sin(mid) ** 2 * np.diff(_sin_beta(edges))) / 2)


def test_reference_values():
    # 1/3 on a sphere (calculus); 0.33453 on WGS84 (the design figure, rounded)
    assert abs(_wgs84_mean_sin2() - 0.33453) < 5e-6
    assert R_Q == pytest.approx(6371007.1809, abs=1e-3)  # published authalic radius


@pytest.fixture(scope="module")
def sin2_raster(tmp_path_factory):
    lon, lat = lonlat_axes(0.2)
    field = np.repeat((np.sin(np.radians(lat)) ** 2)[:, None], lon.size, axis=1)
    path = tmp_path_factory.mktemp("sin2") / "sin2.tif"
    return write_geotiff(path, field.astype("f8"), west=-180, north=90, step_x=0.2), field


@pytest.mark.parametrize(("level", "method"), [(7, "nearest"), (5, "mean")])
def test_plain_zone_mean_is_the_area_mean(tmp_path, sin2_raster, level, method):
    path, field = sin2_raster
    ingest([path], str(tmp_path / "c"), level, method=method, cube_id="sin2", time="2024-01-01")
    cube = open_cube(str(tmp_path / "c"))
    values = cube.read("sin2", grid.all_zones(level))[0]
    assert np.isfinite(values).all()
    expect = _wgs84_mean_sin2()
    assert abs(values.mean() - expect) < 5e-4
    assert abs(values.mean() - 1 / 3) > 5e-4  # the ellipsoid is visible: not the sphere
    assert abs(field.mean() - expect) > 0.1  # unweighted pixels: about 1/2


def test_area_north_of_a_latitude(tmp_path):
    # Archimedes on the authalic sphere: area north of φ is 2π R_q² (1 − sin β(φ)).
    lon, lat = lonlat_axes(0.1)
    north = np.where(lat >= 40.0, 1.0, np.nan)[:, None].repeat(lon.size, axis=1)
    path = write_geotiff(tmp_path / "north.tif", north, west=-180, north=90, step_x=0.1)
    level = 6
    ingest([path], str(tmp_path / "c"), level, cube_id="north", time="2024-01-01")
    cube = open_cube(str(tmp_path / "c"))
    zones = grid.all_zones(level)
    count = int(np.isfinite(cube.read("north", zones)[0]).sum())
    exact = 2 * math.pi * R_Q**2 * (1 - float(_sin_beta(math.radians(40.0))))
    assert count * grid.zone_area(level) == pytest.approx(exact, rel=3e-3)
    # the pixels of the same raster, counted without weights, are far off
    pixels = np.isfinite(north).mean() * 4 * math.pi * R_Q**2
    assert abs(pixels - exact) / exact > 0.1
