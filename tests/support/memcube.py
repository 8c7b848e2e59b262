"""A tiny in-memory stand-in for a cube, for fast unit tests of planning and execution.

It answers reads with an analytic field evaluated at zone centres, so tests can compare
against the same field computed independently. End-to-end tests use the real cube on the
S3-protocol test server instead.
"""

from __future__ import annotations

from types import SimpleNamespace

import numpy as np

from alveary import grid


def field(lat: np.ndarray, lon: np.ndarray, t: np.ndarray) -> np.ndarray:
    """f(lat, lon, t): smooth, distinct everywhere; t in days since the first step."""
    lat, lon, t = np.broadcast_arrays(lat, lon, t)
    return 10.0 + 0.5 * lat + 0.25 * np.cos(np.radians(lon)) * 40.0 + 0.1 * t


class MemoryCube:
    """Enough of the cube interface for the query layer: metadata, plan, read."""

    def __init__(self, levels=(3, 5), ntimes=4, nodata_below_lat=None):
        self.id = "mem"
        self.title = "In-memory field"
        self.version = "v1"
        self.levels = tuple(levels)
        self.variables = {
            "f": {"units": "K", "long_name": "analytic field"},
            "g": {"units": "1", "long_name": "twice the field"},
        }
        start = np.datetime64("2024-01-01T00:00:00", "s")
        self.times = start + np.arange(ntimes) * np.timedelta64(1, "D")
        self.coverage = (-180.0, -90.0, 180.0, 90.0)
        self.url = "memory://mem"
        self.nodata_below_lat = nodata_below_lat
        self.reads = []

    def _index(self, start, end):
        t = self.times
        return int(np.searchsorted(t, start, "left")), int(np.searchsorted(t, end, "right"))

    def plan(self, variable, zones, start, end):
        i0, i1 = self._index(start, end)
        keys = sorted({(variable, int(z) >> 6, i) for z in zones for i in range(i0, i1)})
        return SimpleNamespace(keys=tuple(keys), max_bytes=len(keys) * 8 * 64)

    def read(self, variable, zones, start=None, end=None):
        i0, i1 = self._index(start, end)
        zones = np.asarray(zones, dtype=np.uint64)
        self.reads.append((variable, zones.size, i0, i1))
        lat, lon = grid.zone_to_point(zones)
        days = (self.times[i0:i1] - self.times[0]).astype("timedelta64[D]").astype(float)
        values = field(lat[None, :], lon[None, :], days[:, None])
        if variable == "g":
            values = 2 * values
        if self.nodata_below_lat is not None:
            values = np.where(lat[None, :] < self.nodata_below_lat, np.nan, values)
        return values

    async def read_async(self, variable, zones, start=None, end=None, cache=None):
        return self.read(variable, zones, start, end)

    def refresh(self):
        return False
