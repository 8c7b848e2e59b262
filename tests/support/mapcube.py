"""An invented cube for the map page and the map routes: two variables of an analytic
field on a box of coverage, written at zone centres (what a nearest-neighbour ingest of
the continuous field gives), so pictures can be judged against the field evaluated
independently at the centres of the zones under their pixels."""

from __future__ import annotations

import numpy as np

from alveary import grid
from alveary.cube import create_cube

__all__ = [
    "COVERAGE",
    "CUBE_ID",
    "LEVELS",
    "SERIES_TIMES",
    "TIMES",
    "VARIABLES",
    "build_map_cube",
    "build_series_cube",
    "field",
    "series_field",
]

CUBE_ID = "field-patch"
LEVELS = (3, 5, 7)
#: west, south, east, north: the cube covers this box only.
COVERAGE = (-30.0, -45.0, 50.0, 65.0)
TIMES = np.datetime64("2025-03-01T00:00:00", "s") + np.arange(8) * np.timedelta64(1, "D")
VARIABLES = {
    "moisture": {"units": "m3 m-3", "long_name": "root-zone moisture (invented)"},
    "canopy_temp": {"units": "K", "long_name": "canopy temperature (invented)"},
}


def field(variable: str, lat, lon, step) -> np.ndarray:
    """The invented cube's values: analytic in (lat, lon, step), NaN outside COVERAGE."""
    lat, lon, step = np.broadcast_arrays(
        np.asarray(lat, float), np.asarray(lon, float), np.asarray(step, float)
    )
    west, south, east, north = COVERAGE
    inside = (lat >= south) & (lat <= north) & (lon >= west) & (lon <= east)
    wave = np.sin(np.radians(3.0 * lat)) * np.cos(np.radians(2.0 * lon))
    if variable == "moisture":
        value = 0.25 + 0.15 * wave + 0.006 * step
    else:
        value = 285.0 - 0.2 * np.abs(lat) + 4.0 * wave + 0.5 * step
    return np.where(inside, value, np.nan)


def build_map_cube(url: str, storage_options=None, levels=LEVELS) -> str:
    """Write the cube (every zone whose centre lies in COVERAGE) and publish it."""
    writer = create_cube(
        url,
        cube_id=CUBE_ID,
        title="Invented test field",
        times=TIMES,
        levels=list(levels),
        coverage=COVERAGE,
        variables={k: dict(v, dtype="float64") for k, v in VARIABLES.items()},
        storage_options=storage_options,
    )
    steps = np.arange(TIMES.size, dtype=float)[:, None]
    west, south, east, north = COVERAGE
    for level in levels:
        zones = grid.zones_in_bbox(west, south, east, north, level)
        lat, lon = grid.zone_to_point(zones)
        for name in VARIABLES:
            writer.write(name, level, zones, field(name, lat[None, :], lon[None, :], steps))
    return writer.publish()


#: A daily series across three calendar months with a gap of four days in February.
SERIES_TIMES = np.array(
    [
        t
        for t in np.arange("2025-01-20", "2025-04-08", dtype="datetime64[D]")
        if not np.datetime64("2025-02-10") <= t < np.datetime64("2025-02-14")
    ]
).astype("datetime64[s]")


def series_field(lat, lon, day) -> np.ndarray:
    """Moisture of the series cube: the patch field with a wave in time and no data on
    some (zone, day) pairs (every ninth, by a hash of the position)."""
    lat, lon, day = np.broadcast_arrays(
        np.asarray(lat, float), np.asarray(lon, float), np.asarray(day, float)
    )
    value = field("moisture", lat, lon, 0.0) + 0.05 * np.sin(day / 6.0) + 0.001 * day
    gap = (np.floor(lat * 7.0 + lon * 3.0) + day) % 9 == 0
    return np.where(gap, np.nan, value)


def build_series_cube(url: str, storage_options=None, level: int = 5) -> str:
    """The series cube (one level, daily steps, ``moisture`` only) on COVERAGE."""
    writer = create_cube(
        url,
        cube_id="field-series",
        title="Invented daily series",
        times=SERIES_TIMES,
        levels=[level],
        coverage=COVERAGE,
        variables={"moisture": dict(VARIABLES["moisture"], dtype="float64")},
        storage_options=storage_options,
    )
    days = ((SERIES_TIMES - SERIES_TIMES[0]) / np.timedelta64(1, "D"))[:, None]
    west, south, east, north = COVERAGE
    zones = grid.zones_in_bbox(west, south, east, north, level)
    lat, lon = grid.zone_to_point(zones)
    writer.write("moisture", level, zones, series_field(lat[None, :], lon[None, :], days))
    return writer.publish()
