"""The executor: the only part of a query that reads from a store.

Every variable of a plan is read concurrently through the process-wide chunk cache; each
chunk the plan names is fetched at most once per request. Results come back as the
columnar :class:`ZoneResult` or, for area statistics, :class:`StatsResult`.
"""

from __future__ import annotations

import asyncio
from typing import Any

import numpy as np

from alveary import grid
from alveary._errors import DeadlineExceeded
from alveary.query._failures import as_domain_error
from alveary.query._plan import Plan
from alveary.query._result import StatsResult, ZoneResult
from alveary.query._stats import zone_statistics

__all__ = ["execute", "zone_areas"]


def zone_areas(zones: np.ndarray, level: int) -> np.ndarray:
    """Area in m² of each zone (hexagons ``zone_area(level)``, pentagons 5/6 of it).

    >>> a = zone_areas(grid.all_zones(1), 1)
    >>> round(float(a.sum()) / 1e12, 3)  # the whole Earth, 510.066 million km²
    510.066
    """
    zones = np.asarray(zones, dtype=np.uint64)
    full = grid.zone_area(level)
    if zones.size == 0:
        return np.zeros(0)
    return np.where(grid.is_pentagon(zones), full * 5.0 / 6.0, full)


async def _read_all(plan: Plan, cache: Any) -> dict[str, np.ndarray]:
    r = plan.resolved
    steps = r.t1 - r.t0
    n = plan.read_zones.size
    if steps == 0 or n == 0:
        return {v: np.full((steps, n), np.nan) for v in r.variables}
    times = r.times
    start, end = times[0], times[-1]

    cube = r.cube
    # Run the plan made without I/O as it is, unless the cube moved to a new version since.
    same = hasattr(cube, "execute_async") and str(cube.version) == r.version

    async def one(var: str) -> np.ndarray:
        try:
            if same and var in plan.reads:
                out = await cube.execute_async(plan.reads[var], cache)
            else:
                out = await cube.read_async(var, plan.read_zones, start, end, cache=cache)
        except Exception as exc:
            raise as_domain_error(exc, f"chunks of {var!r}") from exc
        return np.asarray(out, dtype=np.float64).reshape(steps, n)

    arrays = await asyncio.gather(*(one(v) for v in r.variables))
    return dict(zip(r.variables, arrays, strict=True))


async def execute(
    plan: Plan, cache: Any, *, deadline: float | None = None
) -> ZoneResult | StatsResult:
    """Read what a plan names and assemble the result.

    Parameters
    ----------
    plan:
        From :func:`make_plan`.
    cache:
        The process's chunk cache (:class:`alveary.cube.ChunkCache`), or None.
    deadline:
        Seconds the reads may take; past it :class:`DeadlineExceeded` is raised.
    """
    r = plan.resolved
    try:
        async with asyncio.timeout(deadline):
            values = await _read_all(plan, cache)
    except TimeoutError:
        raise DeadlineExceeded(f"the request ran past its deadline of {deadline} s") from None
    info = r.variable_info()
    if plan.stats:
        areas = zone_areas(plan.read_zones, r.level)
        stats = {v: zone_statistics(values[v], areas, plan.stats) for v in r.variables}
        return StatsResult(
            r.cube_id,
            r.version,
            r.level,
            info,
            r.times,
            int(plan.read_zones.size),
            float(areas.sum()),
            plan.stats,
            stats,
        )
    if plan.take is not None:
        values = {v: a[:, plan.take] for v, a in values.items()}
    result = ZoneResult(
        r.cube_id,
        r.version,
        r.level,
        info,
        r.times,
        plan.zones,
        values,
        dict(plan.extra),
        r.query.op,
    )
    if getattr(r.query, "nearest", False):
        result = _nearest_with_data(result)
    return result


def _nearest_with_data(result: ZoneResult) -> ZoneResult:
    """Keep only the nearest zone (rows are sorted by distance) that has any data."""
    have = np.zeros(result.zones.size, dtype=bool)
    for a in result.values.values():
        have |= ~np.all(np.isnan(a), axis=0) if a.shape[0] else False
    hits = np.nonzero(have)[0][:1]
    result.zones = result.zones[hits]
    result.values = {v: a[:, hits] for v, a in result.values.items()}
    result.extra = {k: a[hits] for k, a in result.extra.items()}
    return result
