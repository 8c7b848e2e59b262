"""An invented cube for the map page and the map routes: two variables of an analytic
field on a box of coverage, written at zone centres (what a nearest-neighbour ingest of
the continuous field gives), so pictures can be judged against the field evaluated
independently at the centres of the zones under their pixels."""

from __future__ import annotations

import numpy as np

from alveary import grid
from alveary.cube import create_cube

__all__ = ["COVERAGE", "CUBE_ID", "LEVELS", "TIMES", "VARIABLES", "build_map_cube", "field"]

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
