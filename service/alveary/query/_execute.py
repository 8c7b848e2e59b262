"""The executor: the only part of a query that reads from a store.

Every variable of a plan is read concurrently through the process-wide chunk cache; each
chunk the plan names is fetched at most once per request. Results come back as the
columnar :class:`ZoneResult` or, for area statistics, :class:`StatsResult`.
"""

from __future__ import annotations

import asyncio

import numpy as np

from alveary import grid
from alveary._errors import DeadlineExceeded
from alveary.cube import ChunkCache
from alveary.query._analysis import AnalysedValues, apply_analysis
from alveary.query._failures import as_domain_error
from alveary.query._models import RadiusQuery
from alveary.query._plan import Plan
from alveary.query._result import StatsResult, ZoneResult
from alveary.query._stats import zone_statistics

__all__ = ["execute"]

# Analyses of reads larger than this many values run in a worker thread.
_INLINE_VALUES = 200_000


def _shaped(plan: Plan, out: np.ndarray) -> np.ndarray:
    """A variable's values as the executor hands them on: (time, zone), float32 or
    float64 for plain zone answers (float32 variables keep half the memory of a large
    answer), float64 for analyses and statistics."""
    r = plan.resolved
    out = np.asarray(out)
    if plan.analysis is not None or plan.stats or out.dtype not in (np.float32, np.float64):
        out = out.astype(np.float64, copy=False)
    return out.reshape(r.t1 - r.t0, plan.read_zones.size)


def _read_cached(plan: Plan, cache: ChunkCache | None) -> dict[str, np.ndarray] | None:
    """Every variable's values if all the chunks are cached (no I/O, no await), else None."""
    r = plan.resolved
    if r.t1 == r.t0 or plan.read_zones.size == 0:
        return None
    values = {}
    for var in r.variables:
        out = r.cube.read_cached(plan.reads[var], cache)
        if out is None:
            return None
        values[var] = _shaped(plan, out)
    return values


async def _read_all(plan: Plan, cache: ChunkCache | None) -> dict[str, np.ndarray]:
    """variable -> (time, zone) values (see :func:`_shaped`)."""
    r = plan.resolved
    steps = r.t1 - r.t0
    n = plan.read_zones.size
    if steps == 0 or n == 0:
        return {v: np.full((steps, n), np.nan) for v in r.variables}

    async def one(var: str) -> np.ndarray:
        # The plan runs on the version it was made from (r.cube is that snapshot).
        try:
            out = await r.cube.execute_async(plan.reads[var], cache)
        except Exception as exc:
            raise as_domain_error(exc, f"chunks of {var!r}") from exc
        return _shaped(plan, out)

    if len(r.variables) == 1:  # nothing to overlap: no task to create and schedule
        arrays = [await one(r.variables[0])]
    else:
        arrays = list(await asyncio.gather(*(one(v) for v in r.variables)))
    return dict(zip(r.variables, arrays, strict=True))


async def execute(
    plan: Plan, cache: ChunkCache | None, *, deadline: float | None = None
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
    values = _read_cached(plan, cache)  # warm: no task, no timer
    if values is None:
        try:
            async with asyncio.timeout(deadline):
                values = await _read_all(plan, cache)
        except TimeoutError:
            raise DeadlineExceeded(f"the request ran past its deadline of {deadline} s") from None
    if plan.analysis is not None:
        return await _analysed(plan, values)
    if plan.stats:
        return _statistics(plan, values)
    return _zone_values(plan, values)


def _statistics(plan: Plan, values: dict[str, np.ndarray]) -> StatsResult:
    """Area-weighted statistics per time step over the plan's zones."""
    r = plan.resolved
    areas = grid.zone_areas(plan.read_zones)
    stats = {v: zone_statistics(values[v], areas, plan.stats) for v in r.variables}
    zone_count, area = int(plan.read_zones.size), float(areas.sum())
    info = r.variable_info()
    return StatsResult(
        r.cube_id, r.version, r.level, info, r.times, zone_count, area, plan.stats, stats
    )


def _zone_values(plan: Plan, values: dict[str, np.ndarray]) -> ZoneResult:
    """One answer row per zone (or per point, for multi-point queries)."""
    r = plan.resolved
    if plan.take is not None:
        values = {v: a[:, plan.take] for v, a in values.items()}
    info, extra = r.variable_info(), dict(plan.extra)
    result = ZoneResult(
        r.cube_id, r.version, r.level, info, r.times, plan.zones, values, extra, r.query.op
    )
    if isinstance(r.query, RadiusQuery) and r.query.nearest:
        result = _nearest_with_data(result)
    return result


def _nearest_with_data(result: ZoneResult) -> ZoneResult:
    """Keep only the nearest zone (rows are sorted by distance) that has any data; with
    none, no row and a note saying so."""
    searched = int(result.zones.size)
    have = np.zeros(result.zones.size, dtype=bool)
    for a in result.values.values():
        have |= ~np.all(np.isnan(a), axis=0) if a.shape[0] else False
    hits = np.nonzero(have)[0][:1]
    result.zones = result.zones[hits]
    result.values = {v: a[:, hits] for v, a in result.values.items()}
    result.extra = {k: a[hits] for k, a in result.extra.items()}
    if hits.size == 0:
        result.note = (
            f"no zone with data for the selected variables and time steps among the "
            f"{searched} zone(s) searched (the zone holding the point and those whose centres "
            "lie within the radius)"
        )
    return result


async def _analysed(plan: Plan, values: dict[str, np.ndarray]) -> ZoneResult | StatsResult:
    """Neighbourhood statistic, then time aggregation, then (with ``stats``) statistics
    over the target zones per output row."""
    r, analysis = plan.resolved, plan.analysis
    assert analysis is not None
    info, times = r.variable_info(), r.times
    size = sum(a.size for a in values.values())
    if size > _INLINE_VALUES:
        out = await asyncio.to_thread(apply_analysis, analysis, values, times, info)
    else:
        out = apply_analysis(analysis, values, times, info)
    if plan.stats:
        return _analysed_statistics(plan, out)
    rows = dict(out.values)
    if plan.take is not None:
        rows = {v: a[:, plan.take] for v, a in rows.items()}
    result = ZoneResult(
        r.cube_id,
        r.version,
        r.level,
        out.variables,
        out.times,
        plan.zones,
        rows,
        dict(plan.extra),
        r.query.op,
        axis=out.axis,
        analysis=out.meta,
    )
    if isinstance(r.query, RadiusQuery) and r.query.nearest:
        result = _nearest_with_data(result)
    return result


def _analysed_statistics(plan: Plan, out: AnalysedValues) -> StatsResult:
    r, analysis = plan.resolved, plan.analysis
    assert analysis is not None
    areas = grid.zone_areas(analysis.targets)
    stats = {v: zone_statistics(a, areas, plan.stats) for v, a in out.values.items()}
    return StatsResult(
        r.cube_id,
        r.version,
        r.level,
        out.variables,
        out.times,
        int(analysis.targets.size),
        float(areas.sum()),
        plan.stats,
        stats,
        axis=out.axis,
        analysis=out.meta,
    )
