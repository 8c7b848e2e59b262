"""Reading published cubes: open the current version, plan reads, fetch chunks."""

from __future__ import annotations

import asyncio
import threading
from dataclasses import dataclass, replace
from typing import Any

import numpy as np
import zarr
from zarr.core.sync import _get_loop, sync

from alveary._errors import CubeFormatError, GridError, InvalidInput, NotFound
from alveary.cube._cache import ChunkCache, IOStats
from alveary.cube._layout import LevelLayout
from alveary.cube._manifest import ResolvingStore
from alveary.cube._meta import CubeMeta, VariableInfo, parse_time
from alveary.cube._plan import ChunkRead, ReadPlan, plan_cells
from alveary.cube._store import CountingStore, normalize_url, open_store
from alveary.cube._versions import POINTER_KEY, VERSIONS, read_manifest, read_pointer

__all__ = ["Cube", "open_cube"]

# Chunk fetches in flight per read; the store's own connection pool limits further.
_MAX_INFLIGHT = 32


@dataclass(frozen=True, eq=False)
class _Version:
    """One opened, immutable version of a cube."""

    id: str
    meta: CubeMeta
    group: Any  # zarr AsyncGroup with consolidated metadata
    layouts: dict[int, LevelLayout]
    arrays: dict[str, Any]


async def _open_version(store: CountingStore, url: str) -> _Version:
    pointer = await read_pointer(store)
    if pointer is None:
        raise NotFound("cube", url, f"no published cube at {url} (no {POINTER_KEY})")
    vid = pointer.get("version")
    if not isinstance(vid, str):
        raise CubeFormatError(POINTER_KEY, vid, "a version id")
    # -- manifest (format 2): chunk keys resolve through it; format 1 has none --------
    manifest = await read_manifest(store, vid)
    vstore = store if manifest is None else ResolvingStore(store, f"{VERSIONS}/{vid}", manifest)
    # -- end manifest ------------------------------------------------------------------
    try:
        group = await zarr.api.asynchronous.open_group(
            store=vstore,
            path=f"{VERSIONS}/{vid}",
            mode="r",
            zarr_format=3,
            use_consolidated=True,
        )
    except FileNotFoundError:
        raise CubeFormatError("version", vid, "a version that exists in the store") from None
    tarr = await group.getitem("time")
    seconds = await tarr.getitem(slice(None))
    times = np.asarray(seconds, dtype=np.int64).astype("datetime64[s]")
    meta = replace(CubeMeta.from_attrs(dict(group.attrs), times), manifest=manifest)
    layouts = {lv: LevelLayout(lv, int(times.size), meta.chunks[lv]) for lv in meta.levels}
    return _Version(vid, meta, group, layouts, {})


class Cube:
    """A published cube, opened at its current version.

    Attributes
    ----------
    url, id, title, version:
        Where it is, what it is, and the published version being read.
    variables:
        ``{name: VariableInfo}`` (units, long_name, dtype, fill_value, ...).
    levels:
        The refinement levels present, ascending.
    times:
        The time axis, ``datetime64[s]`` (UTC).
    coverage:
        ``(west, south, east, north)`` in degrees.
    stats:
        :class:`IOStats` of this cube's store requests.
    cache:
        The default :class:`ChunkCache` of reads (None: no caching).
    """

    def __init__(
        self,
        url: str,
        storage_options: dict | None = None,
        cache: ChunkCache | None = None,
    ) -> None:
        self.url = normalize_url(url)[1]
        self.storage_options = storage_options
        self.cache = cache
        self.stats = IOStats()
        self._store = open_store(url, storage_options, read_only=True, stats=self.stats)
        self._lock = threading.Lock()
        self._v: _Version = sync(_open_version(self._store, self.url))

    # -- metadata --------------------------------------------------------------------
    @property
    def meta(self) -> CubeMeta:
        return self._v.meta

    @property
    def id(self) -> str:
        return self._v.meta.id

    @property
    def title(self) -> str:
        return self._v.meta.title

    @property
    def version(self) -> str:
        return self._v.id

    @property
    def variables(self) -> dict[str, VariableInfo]:
        return self._v.meta.variables

    @property
    def levels(self) -> tuple[int, ...]:
        return self._v.meta.levels

    @property
    def times(self) -> np.ndarray:
        return self._v.meta.times

    @property
    def coverage(self) -> tuple[float, float, float, float]:
        return self._v.meta.coverage

    def __repr__(self) -> str:
        return (
            f"<Cube {self.id!r} version={self.version} levels={list(self.levels)} "
            f"variables={sorted(self.variables)} times={self.times.size}>"
        )

    def refresh(self) -> bool:
        """Re-read the version pointer; True if a new version is now being read."""
        pointer = sync(read_pointer(self._store))
        if pointer is None or pointer.get("version") == self._v.id:
            return False
        new = sync(_open_version(self._store, self.url))
        with self._lock:
            self._v = new
        return True

    # -- planning --------------------------------------------------------------------
    def time_indices(self, start=None, end=None) -> slice:
        """The time steps with ``start <= t <= end`` as a slice (open ends allowed).

        ``start`` and ``end`` are datetime64, datetime or RFC 3339 strings.
        """
        times = self.times.astype(np.int64)
        i0, i1 = 0, times.size
        t0 = t1 = None
        if start is not None:
            t0 = parse_time(start, "start").astype(np.int64)
            i0 = int(np.searchsorted(times, t0, side="left"))
        if end is not None:
            t1 = parse_time(end, "end").astype(np.int64)
            i1 = int(np.searchsorted(times, t1, side="right"))
        if t0 is not None and t1 is not None and t1 < t0:
            raise InvalidInput("end", str(end), f"a date-time not before start ({start})")
        return slice(i0, max(i0, i1))

    def _level_of(self, zones: np.ndarray) -> int:
        from alveary import grid

        if zones.size == 0:
            return self.levels[-1]
        lv = np.asarray(grid.zone_level(zones))
        level = int(lv.flat[0])
        if (lv != level).any():
            bad = int(np.flatnonzero(lv != level)[0])
            raise GridError(
                "zones",
                int(zones[bad]),
                f"zones all at one level (the first is level {level})",
                index=bad,
            )
        if level not in self.levels:
            raise NotFound(
                "level",
                level,
                f"level {level} is not in cube {self.id!r}; levels present: "
                + ", ".join(str(x) for x in self.levels),
            )
        return level

    def _variable(self, variable: str) -> VariableInfo:
        info = self.variables.get(variable)
        if info is None:
            raise NotFound(
                "variable",
                variable,
                f"unknown variable {variable!r} in cube {self.id!r}; variables: "
                + ", ".join(sorted(self.variables)),
            )
        return info

    def _plan(self, v: _Version, variable, zones, start, end) -> ReadPlan:
        from alveary import grid

        info = self._variable(variable)
        zones = np.atleast_1d(np.asarray(zones)).ravel()
        if zones.size and zones.dtype.kind not in "ui":
            raise GridError("zones", zones.dtype.name, "integer zone ids")
        zones = zones.astype(np.uint64)
        level = self._level_of(zones)
        tsel = self.time_indices(start, end)
        if zones.size:
            _, region, i, j = grid.zone_to_index(zones)
        else:
            region = i = j = np.zeros(0, dtype=np.int64)
        return plan_cells(
            v.layouts[level], f"{variable}/{level}", region, i, j, tsel, info.itemsize, variable
        )

    def plan(self, variable: str, zones, start=None, end=None) -> ReadPlan:
        """The chunks a read would fetch, without any I/O (see :class:`ReadPlan`)."""
        return self._plan(self._v, variable, zones, start, end)

    # -- reading ---------------------------------------------------------------------
    def read(self, variable: str, zones, start=None, end=None, cache=None) -> np.ndarray:
        """Values ``(time, zone)`` as float64; NaN where there is no data."""
        v = self._v
        plan = self._plan(v, variable, zones, start, end)
        return sync(self._execute(v, plan, cache))

    async def read_async(
        self, variable: str, zones, start=None, end=None, cache=None
    ) -> np.ndarray:
        """The same as :meth:`read`, awaitable from any event loop."""
        v = self._v
        plan = self._plan(v, variable, zones, start, end)
        return await self.execute_async(plan, cache, _version=v)

    async def execute_async(self, plan: ReadPlan, cache=None, _version=None) -> np.ndarray:
        """Run a plan made by :meth:`plan` (on zarr's I/O loop, awaited from any loop)."""
        v = _version or self._v
        loop = _get_loop()
        coro = self._execute(v, plan, cache)
        try:
            running = asyncio.get_running_loop()
        except RuntimeError:
            running = None
        if running is loop:
            return await coro
        return await asyncio.wrap_future(asyncio.run_coroutine_threadsafe(coro, loop))

    async def _array(self, v: _Version, path: str):
        arr = v.arrays.get(path)
        if arr is None:
            arr = await v.group.getitem(path)
            v.arrays[path] = arr
        return arr

    async def _execute(self, v: _Version, plan: ReadPlan, cache) -> np.ndarray:
        cache = cache if cache is not None else self.cache
        info = v.meta.variables[plan.variable]
        out = np.full(plan.shape, np.nan, dtype=np.float64)
        if not plan.reads or plan.nzones == 0:
            return out
        sem = asyncio.Semaphore(_MAX_INFLIGHT)

        async def one(cr: ChunkRead) -> None:
            key = (self.url, v.id, cr.array, cr.coords)
            data = cache.get(key) if cache is not None else None
            if data is None:
                arr = await self._array(v, cr.array)
                async with sem:
                    data = await arr.getitem(cr.selection)
                data = np.asarray(data)
                if cache is not None:
                    cache.put(key, data)
            raw = data[(cr.in_time, *cr.cells)]
            out[cr.out_time, cr.columns] = info.decode(raw)

        await asyncio.gather(*(one(cr) for cr in plan.reads))
        return out


def open_cube(
    url: str, storage_options: dict | None = None, cache: ChunkCache | None = None
) -> Cube:
    """Open the published cube at ``url`` (local path, file://, s3://, memory://).

    Opening costs three GETs: the version pointer, the version's consolidated metadata
    and its time axis. Reads cost one GET per chunk not in the cache.

    Examples
    --------
    >>> import numpy as np, alveary.grid as grid
    >>> from alveary.cube import create_cube
    >>> w = create_cube("memory://doc/open", cube_id="doc", times=["2024-01-01", "2024-01-02"],
    ...                 levels=[1], variables={"t": {"units": "K"}})
    >>> z = grid.all_zones(1)
    >>> w.write("t", 1, z, np.vstack([np.arange(z.size), -np.arange(z.size)]).astype(float))
    >>> version = w.publish()
    >>> cube = open_cube("memory://doc/open")
    >>> cube.read("t", z[:3]).tolist()
    [[0.0, 1.0, 2.0], [0.0, -1.0, -2.0]]
    >>> cube.read("t", z[:1], start="2024-01-02").tolist()
    [[-0.0]]
    """
    return Cube(url, storage_options, cache)
