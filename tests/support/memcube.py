"""Small real cubes on fsspec's in-process memory store, for fast tests of the query layer.

A cube here is written with :func:`alveary.cube.create_cube` and served by
:class:`alveary.query.Catalog` through :func:`alveary.cube.open_cube`, so the tests run
exactly the path production runs, only on ``memory://`` instead of disk or S3. The values
are an analytic field at the zone centres (what a nearest-neighbour ingest of the
continuous field gives); :attr:`MemoryCube.written` keeps what was written, by zone id,
as the reference answers are judged against.
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass, field

import numpy as np

from alveary import grid
from alveary.cube import create_cube
from alveary.query import Catalog, CubeSource

__all__ = ["START", "MemoryCube", "analytic", "memory_cube"]

START = np.datetime64("2024-01-01T00:00:00", "s")
_COUNTER = itertools.count()


def analytic(lat: np.ndarray, lon: np.ndarray, t: np.ndarray) -> np.ndarray:
    """f(lat, lon, t): smooth, distinct everywhere; t in days since the first step."""
    lat, lon, t = np.broadcast_arrays(lat, lon, t)
    return 10.0 + 0.5 * lat + 0.25 * np.cos(np.radians(lon)) * 40.0 + 0.1 * t


@dataclass
class MemoryCube:
    """A published cube on the memory store and what was written into it.

    ``written[(variable, level)]`` maps zone id -> the written series (NaN: no data).
    """

    url: str
    levels: tuple[int, ...]
    times: np.ndarray
    written: dict[tuple[str, int], dict[int, np.ndarray]] = field(default_factory=dict)
    versions: list[str] = field(default_factory=list)

    def catalog(self, cube_id: str = "mem") -> Catalog:
        """A catalogue serving this cube under ``cube_id``, opened."""
        cat = Catalog([CubeSource(cube_id, self.url)])
        cat.open_all()
        return cat

    def publish(self, offset: float = 0.0, nodata_below_lat: float | None = None) -> str:
        """Write and publish a new version: f (+ offset) and g = 2 f."""
        writer = create_cube(
            self.url,
            cube_id="mem",
            title="In-memory field",
            times=self.times,
            levels=list(self.levels),
            variables={
                "f": {"units": "K", "long_name": "analytic field", "dtype": "float64"},
                "g": {"units": "1", "long_name": "twice the field", "dtype": "float64"},
            },
        )
        days = ((self.times - self.times[0]) / np.timedelta64(1, "D")).astype(float)
        for level in self.levels:
            zones = grid.all_zones(level)
            lat, lon = grid.zone_to_point(zones)
            f = analytic(lat[None, :], lon[None, :], days[:, None]) + offset
            if nodata_below_lat is not None:
                f = np.where(lat[None, :] < nodata_below_lat, np.nan, f)
            for name, values in (("f", f), ("g", 2.0 * f)):
                writer.write(name, level, zones, values)
                self.written[(name, level)] = dict(zip(zones.tolist(), values.T, strict=True))
        version = writer.publish()
        self.versions.append(version)
        return version


def memory_cube(
    levels: tuple[int, ...] = (3, 5), ntimes: int = 4, nodata_below_lat: float | None = None
) -> MemoryCube:
    """A new cube (daily steps from 2024-01-01) at a fresh ``memory://`` URL, published."""
    times = START + np.arange(ntimes) * np.timedelta64(1, "D")
    cube = MemoryCube(f"memory://alveary-tests/cube-{next(_COUNTER)}", tuple(levels), times)
    cube.publish(nodata_below_lat=nodata_below_lat)
    return cube
