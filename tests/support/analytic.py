"""A cube of an analytic field, written at zone centres (what a nearest-neighbour ingest
of the continuous field gives), so answers can be checked against the field evaluated
independently at the centres a service reports."""

from __future__ import annotations

import numpy as np

from alveary import grid
from alveary.cube import create_cube

__all__ = ["LEVELS", "NTIMES", "START", "TIMES", "build_cube", "field", "rain"]

LEVELS = (3, 7)
NTIMES = 6
START = np.datetime64("2024-05-01T00:00:00", "s")
TIMES = START + np.arange(NTIMES) * np.timedelta64(1, "D")


def field(lat, lon, days):
    """f(lat, lon, t), t in days since START: smooth, no two neighbours alike."""
    lat, lon, days = (np.asarray(a, dtype=np.float64) for a in (lat, lon, days))
    return 280.0 + 10.0 * np.cos(np.radians(lat)) + 3.0 * np.sin(np.radians(2.0 * lon)) + 0.5 * days


def rain(lat, lon, days):
    """A second variable with gaps: no data south of 44.8° N (clouds, say)."""
    value = 1.0 + 0.01 * np.abs(np.asarray(lat)) + 0.1 * np.asarray(days)
    return np.where(np.asarray(lat) < 44.8, np.nan, value)


def build_cube(url, storage_options, cube_id="analytic", offset=0.0, levels=LEVELS):
    writer = create_cube(
        url,
        cube_id=cube_id,
        title="Analytic test field",
        times=TIMES,
        levels=list(levels),
        variables={
            "temp": {"units": "K", "long_name": "analytic temperature", "dtype": "float64"},
            "rain": {"units": "mm", "long_name": "analytic rain with gaps", "dtype": "float64"},
        },
        storage_options=storage_options,
    )
    days = np.arange(NTIMES, dtype=np.float64)[:, None]
    for level in levels:
        zones = grid.all_zones(level)
        lat, lon = grid.zone_to_point(zones)
        writer.write("temp", level, zones, field(lat[None, :], lon[None, :], days) + offset)
        writer.write("rain", level, zones, rain(lat[None, :], lon[None, :], days))
    return writer.publish()
