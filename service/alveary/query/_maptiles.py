"""Map tiles of a cube: a tile request bound to one cube version, its one read plan, and
the read.

Like every query, a tile is first resolved without I/O (:func:`resolve_tile`: the cube
version, one variable, one time step, the level, the tile; its ``key`` is the normalised
request an ETag is made from), then planned without I/O (:func:`plan_tile`: the zones
under the tile's pixels, from a :class:`PixelZoneCache`, and the chunks that hold them),
then read (:func:`read_tile`, the only step that touches the store). A tile outside the
cube's coverage has no zones and no chunk to read.
"""

from __future__ import annotations

import asyncio
from dataclasses import dataclass, field

import numpy as np

from alveary import grid
from alveary._errors import DeadlineExceeded, InvalidInput
from alveary.cube import ChunkCache, ReadPlan
from alveary.query._cube import CubeSnapshot
from alveary.query._failures import as_domain_error
from alveary.query._tiles import (
    PixelZoneCache,
    TileZones,
    check_tile,
    default_level,
    tile_intersects,
)
from alveary.query._time import TimeSpec, parse_datetime, select_times

__all__ = [
    "ResolvedTile",
    "TilePlan",
    "one_variable",
    "plan_tile",
    "read_tile",
    "read_zone_values",
    "resolve_tile",
    "value_range",
]


@dataclass(frozen=True)
class ResolvedTile:
    """A tile request bound to one cube version: variable, time step and level fixed."""

    cube_id: str
    cube: CubeSnapshot = field(repr=False)
    version: str
    variable: str
    step: int
    level: int
    z: int
    y: int
    x: int

    @property
    def time(self) -> np.datetime64:
        return np.datetime64(self.cube.times[self.step])

    @property
    def key(self) -> str:
        """The normalised request: equal for requests that must give equal tiles."""
        return "|".join(
            [
                "tile",
                self.cube_id,
                self.version,
                str(self.level),
                self.variable,
                f"{self.step}:{self.step + 1}",
                f"{self.z}/{self.y}/{self.x}",
            ]
        )


def one_variable(cube: CubeSnapshot, names: tuple[str, ...] | None) -> str:
    """The one variable a picture shows (default: the cube's first).

    Raises :class:`InvalidInput` naming ``vars`` for several or unknown variables.
    """
    have = tuple(cube.variables)
    if not names:
        return have[0]
    if len(names) != 1:
        raise InvalidInput("vars", ",".join(names), "one variable")
    if names[0] not in cube.variables:
        raise InvalidInput("vars", names[0], f"one variable of this cube: {', '.join(have)}")
    return names[0]


def resolve_tile(
    cube_id: str,
    cube: CubeSnapshot,
    z: int,
    y: int,
    x: int,
    *,
    variables: tuple[str, ...] | None = None,
    time: TimeSpec | None = None,
    level: int | None = None,
    target: float | None = None,
) -> ResolvedTile:
    """Bind a tile request to a cube version (no I/O).

    ``time`` must select exactly one step (an instant selects the step in force then;
    default: the latest step); ``level`` defaults to the level whose zones are a few
    pixels across at this zoom (:func:`default_level`, ``target`` pixels if given),
    clamped to the cube's levels.
    """
    z, y, x = check_tile(z, y, x)
    variable = one_variable(cube, variables)
    times = np.asarray(cube.times)
    t0, t1 = select_times(time if time is not None else parse_datetime(None), times)
    if t1 - t0 != 1:
        raise InvalidInput(
            "datetime",
            "an interval" if t1 - t0 > 1 else "no time step",
            "one time step: an instant, or an interval holding one step",
        )
    levels = tuple(int(v) for v in cube.levels)
    if level is None:
        chosen = default_level(z, y, levels, **({} if target is None else {"target": target}))
    else:
        chosen = int(level)
        if chosen not in levels:
            raise InvalidInput("level", chosen, f"one of the cube's levels {list(levels)}")
    return ResolvedTile(cube_id, cube, cube.version, variable, t0, chosen, z, y, x)


@dataclass(frozen=True)
class TilePlan:
    """What a tile needs, computed without I/O: the pixel-to-zone map (None outside the
    cube's coverage) and the one read plan of its zones."""

    resolved: ResolvedTile
    pixels: TileZones | None
    read: ReadPlan | None

    @property
    def chunk_count(self) -> int:
        return 0 if self.read is None else len(self.read)


def plan_tile(resolved: ResolvedTile, pixels: PixelZoneCache) -> TilePlan:
    """The tile's zones (from the cache) and the chunks holding them (no I/O)."""
    r = resolved
    if not tile_intersects(r.z, r.y, r.x, r.cube.coverage):
        return TilePlan(r, None, None)
    tz = pixels.get(r.z, r.y, r.x, r.level)
    if tz.zones.size == 0:
        return TilePlan(r, tz, None)
    return TilePlan(r, tz, r.cube.plan(r.variable, tz.zones, r.time, r.time))


async def read_tile(
    plan: TilePlan, cache: ChunkCache | None, *, deadline: float | None = None
) -> np.ndarray:
    """Values (float, one per zone of the tile; NaN: no data) of a planned tile."""
    if plan.pixels is None:
        return np.zeros(0, dtype=np.float64)
    n = plan.pixels.zones.size
    if plan.read is None or n == 0:
        return np.full(n, np.nan)
    try:
        async with asyncio.timeout(deadline):
            out = await plan.resolved.cube.execute_async(plan.read, cache)
    except TimeoutError:
        raise DeadlineExceeded(f"the tile ran past its deadline of {deadline} s") from None
    except Exception as exc:
        raise as_domain_error(exc, f"chunks of {plan.resolved.variable!r}") from exc
    return np.asarray(out, dtype=np.float64).reshape(-1)[:n]


async def value_range(
    cube: CubeSnapshot,
    variable: str,
    level: int,
    cache: ChunkCache | None,
    *,
    max_cells: int,
    deadline: float | None = None,
) -> tuple[float, float]:
    """The range a picture of ``variable`` at ``level`` spans by default.

    The range recorded when the cube was built; for versions built before ranges were
    recorded, the range of the coarsest level's values over every time step, read once
    (at most ``max_cells`` values, else :class:`InvalidInput` asks for ``range``). A
    variable with no value, or a single one, gives a range of width 1 around it.
    """
    found = cube.value_range(variable, level)
    if found is None:
        coarsest = int(min(cube.levels))
        zones = grid.all_zones(coarsest)
        cells = zones.size * len(cube.times)
        if cells > max_cells:
            raise InvalidInput(
                "range",
                None,
                "min,max: this cube records no value range and is too large to scan",
            )
        plan = cube.plan(variable, zones)
        try:
            async with asyncio.timeout(deadline):
                values = await cube.execute_async(plan, cache)
        except TimeoutError:
            raise DeadlineExceeded(f"the range scan ran past {deadline} s") from None
        except Exception as exc:
            raise as_domain_error(exc, f"chunks of {variable!r}") from exc
        finite = np.asarray(values, dtype=np.float64)
        finite = finite[np.isfinite(finite)]
        found = (float(finite.min()), float(finite.max())) if finite.size else (0.0, 1.0)
    lo, hi = found
    if not hi > lo:
        lo, hi = lo - 0.5, hi + 0.5
    return lo, hi


async def read_zone_values(
    cube: CubeSnapshot,
    variables: tuple[str, ...],
    zones: np.ndarray,
    step: int,
    cache: ChunkCache | None,
    *,
    deadline: float | None = None,
) -> dict[str, np.ndarray]:
    """Values (one per zone; NaN: no data) of each variable at one time step."""
    ids = np.asarray(zones, dtype=np.uint64).reshape(-1)
    if ids.size == 0:
        return {v: np.zeros(0) for v in variables}
    when = np.datetime64(cube.times[step])

    async def one(variable: str) -> np.ndarray:
        plan = cube.plan(variable, ids, when, when)
        try:
            out = await cube.execute_async(plan, cache)
        except Exception as exc:
            raise as_domain_error(exc, f"chunks of {variable!r}") from exc
        return np.asarray(out, dtype=np.float64).reshape(-1)[: ids.size]

    try:
        async with asyncio.timeout(deadline):
            arrays = await asyncio.gather(*(one(v) for v in variables))
    except TimeoutError:
        raise DeadlineExceeded(f"the tile ran past its deadline of {deadline} s") from None
    return dict(zip(variables, arrays, strict=True))
