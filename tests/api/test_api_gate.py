"""Admission of large answers before planning, in process.

A small float32 cube on fsspec's in-process memory store, served by the real application
through Starlette's TestClient. Judges: the zones the plan enumerates (the estimate the
gate uses must agree with them), pyproj.Geod (the area of a box, independently of the
grid), the plan cache (a request refused at the gate leaves no plan behind), and the
float32 values written (plain answers keep them exactly, in float32).
"""

from __future__ import annotations

import asyncio

import numpy as np
import pyproj
import pytest
from fastapi.testclient import TestClient

from alveary import LimitExceeded, grid
from alveary.api import create_app
from alveary.api._settings import Settings
from alveary.cube import create_cube
from alveary.query import (
    BboxQuery,
    Catalog,
    CubeSource,
    Limits,
    Selection,
    estimate_cells,
    execute,
    make_plan,
    parse_datetime,
    resolve,
)

LEVEL = 5
STEPS = 8
URL = "memory://gate-tests/cube"
GEOD = pyproj.Geod(ellps="WGS84")
WGS84_AREA_M2 = 510_065_621.724e6  # the published surface area of the WGS84 ellipsoid
EVERY_STEP = Selection(level=LEVEL, time=parse_datetime("../.."))
# about half of the level-5 zones x 8 steps: well over the gate's small-request threshold
BIG = {"bbox": "-120,-50,120,50", "level": LEVEL, "datetime": "../.."}


def _field(lat: np.ndarray, lon: np.ndarray, t: np.ndarray) -> np.ndarray:
    return (280.0 + 0.3 * lat + 0.01 * lon + 0.1 * t).astype(np.float32)


@pytest.fixture(scope="module")
def catalog() -> Catalog:
    times = np.datetime64("2024-03-01", "s") + np.arange(STEPS) * np.timedelta64(1, "D")
    writer = create_cube(
        URL,
        cube_id="gate",
        times=times,
        levels=[LEVEL],
        variables={"temp": {"units": "K", "dtype": "float32"}},
    )
    zones = grid.all_zones(LEVEL)
    lat, lon = grid.zone_to_point(zones)
    writer.write(
        "temp", LEVEL, zones, _field(lat[None, :], lon[None, :], np.arange(STEPS)[:, None])
    )
    writer.publish()
    cat = Catalog([CubeSource("gate", URL)])
    cat.open_all()
    return cat


def _bbox(west: float, south: float, east: float, north: float) -> BboxQuery:
    return BboxQuery(west, south, east, north, selection=EVERY_STEP)


@pytest.mark.parametrize(
    "box", [(-120, -50, 120, 50), (-30, 10, 40, 60), (100, -80, 179, -20), (-180, -90, 180, 90)]
)
def test_the_estimate_agrees_with_the_enumerated_zones(catalog, box):
    resolved = resolve(catalog, "gate", _bbox(*box))
    plan = make_plan(resolved, Limits())
    exact = int(plan.zones.size) * STEPS
    estimate = estimate_cells(resolved)
    # the zones whose centres fall in the box, counted by enumeration: the estimate
    # differs by the zones along the edges only
    assert abs(estimate - exact) <= 0.06 * exact + 40 * STEPS
    # the area behind the estimate, judged by pyproj.Geod (a box on the ellipsoid)
    west, south, east, north = box
    area = WGS84_AREA_M2  # the whole Earth: the published figure
    if (west, south, east, north) != (-180, -90, 180, 90):
        # parallels are not geodesics: follow them in steps of a tenth of a degree
        along = np.linspace(west, east, int((east - west) * 10) + 1)
        lons = [*along, *along[::-1]]
        lats = [south] * along.size + [north] * along.size
        # Geod's signed areas lie within half the Earth's: bring them back to [0, Earth)
        area = GEOD.polygon_area_perimeter(lons, lats)[0] % WGS84_AREA_M2
    zones_by_geod = area / grid.zone_area(LEVEL)
    assert estimate == pytest.approx(zones_by_geod * STEPS, rel=0.01, abs=STEPS)


def test_an_area_clearly_over_the_cell_limit_is_refused_before_enumeration(catalog):
    resolved = resolve(catalog, "gate", _bbox(-180, -90, 180, 90))
    limits = Limits(max_cells=10_000)  # the whole globe is 10 242 zones x 8 steps
    with pytest.raises(LimitExceeded) as info:
        make_plan(resolved, limits)
    # refused from the area, before enumeration: the count is the estimate, within two
    # zones per step of the icosahedral count 10 x 4^5 + 2
    assert info.value.limit == "time steps × zones"
    assert info.value.requested == pytest.approx((10 * 4**LEVEL + 2) * STEPS, abs=2 * STEPS)


def test_plain_values_stay_float32_and_statistics_are_float64(catalog):
    resolved = resolve(catalog, "gate", _bbox(-30, 10, 40, 60))
    plan = make_plan(resolved, Limits())
    result = asyncio.run(execute(plan, None))
    values = result.values["temp"]
    assert values.dtype == np.float32
    lat, lon = grid.zone_to_point(result.zones)
    expected = _field(lat[None, :], lon[None, :], np.arange(STEPS)[:, None])
    np.testing.assert_array_equal(values, expected)  # exactly what was written
    stats = BboxQuery(-30, 10, 40, 60, stats=("mean",), selection=EVERY_STEP)
    summary = asyncio.run(execute(make_plan(resolve(catalog, "gate", stats), Limits()), None))
    assert summary.stats["temp"]["mean"].dtype == np.float64


def test_the_gate_refuses_before_planning(catalog):
    # room for one request of BIG's size (about 42 000 cells); the whole globe (82 000
    # cells) is over the cell limit of 60 000
    settings = Settings(
        answer_cache_bytes=0,
        queue_wait=0.05,
        retry_after=7,
        max_cells_in_flight=50_000,
        max_cells=60_000,
    )
    app = create_app(settings, Catalog([CubeSource("gate", URL)]))
    with TestClient(app) as client:
        service = app.state.service
        gate = service.gate
        gate.in_use = gate.capacity  # the process is full of large work
        try:
            r = client.get("/cubes/gate/bbox", params=BIG)
            assert r.status_code == 503 and r.headers["retry-after"] == "7"
            assert r.headers["content-type"] == "application/problem+json"
            assert len(service.plans) == 0, "a refused request must not have been planned"
            # a request over the limits is refused as such (413), not queued
            r = client.get("/cubes/gate/bbox", params=dict(BIG, bbox="-180,-90,180,90"))
            assert r.status_code == 413 and "time steps" in r.text
            # small requests never wait
            r = client.get("/cubes/gate/point", params={"lat": 10, "lon": 20})
            assert r.status_code == 200
        finally:
            gate.in_use = 0
        r = client.get("/cubes/gate/bbox", params=BIG)
        assert r.status_code == 200 and len(service.plans) == 1
        assert gate.in_use == 0 and gate.refused == 1
