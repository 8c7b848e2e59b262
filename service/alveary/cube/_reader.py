"""Reading published cubes: open the current version, plan reads, fetch chunks."""

from __future__ import annotations

import asyncio
import logging
import threading
from dataclasses import replace
from typing import Any

import numpy as np
import zarr
import zarr.api.asynchronous
from zarr.core.sync import _get_loop, sync

from alveary import grid
from alveary._errors import (
    ChunkDecodeError,
    CubeFormatError,
    GridError,
    InvalidInput,
    NotFound,
    StoreUnavailable,
)
from alveary.cube._cache import ChunkCache, IOStats
from alveary.cube._checksum import is_checksum_error
from alveary.cube._layout import LevelLayout
from alveary.cube._manifest import ResolvingStore
from alveary.cube._meta import CubeMeta, VariableInfo
from alveary.cube._plan import ChunkRead, ReadPlan, plan_cell, plan_cells
from alveary.cube._store import CountingStore, normalize_url, open_store
from alveary.cube._time import parse_time
from alveary.cube._versions import POINTER_KEY, VERSIONS, read_manifest, read_pointer

__all__ = ["Cube", "CubeVersion", "open_cube"]

log = logging.getLogger("alveary.cube")

# Exception classes of the store clients (by top-level module): the store cannot be reached.
_NETWORK_MODULES = ("botocore", "aiobotocore", "aiohttp", "urllib3", "s3fs", "fsspec")


def _is_network(exc: BaseException) -> bool:
    if isinstance(exc, OSError | ConnectionError | TimeoutError):
        return True
    return any(c.__module__.split(".")[0] in _NETWORK_MODULES for c in type(exc).__mro__)


def chunk_fault(exc: Exception, cube: str, version: str, key: str) -> Exception:
    """The domain error for a failed chunk read, naming the cube and the object key, logged.

    A chunk whose checksum fails, or whose bytes cannot be decoded, is a
    :class:`ChunkDecodeError`; a store that cannot be reached, or that lacks an object the
    manifest lists, a :class:`StoreUnavailable`. Anything else is returned unchanged.
    """
    err: StoreUnavailable | ChunkDecodeError
    if isinstance(exc, StoreUnavailable | ChunkDecodeError):
        err = exc
    elif is_checksum_error(exc):
        err = ChunkDecodeError(f"chunk {key!r} of cube {cube!r} fails its checksum")
    elif _is_network(exc):
        err = StoreUnavailable(f"chunk {key!r} of cube {cube!r} cannot be read: {exc}")
    elif isinstance(exc, ValueError | RuntimeError):
        err = ChunkDecodeError(f"chunk {key!r} of cube {cube!r} cannot be decoded: {exc}")
    else:
        return exc
    err.cube, err.key = cube, key
    log.error(
        "store fault: cube=%s version=%s key=%s error=%s: %s",
        cube,
        version,
        key,
        type(err).__name__,
        exc,
    )
    return err


# Chunk fetches in flight per read; the store's own connection pool limits further.
_MAX_INFLIGHT = 32
# Reads of more than 1/_SCAN_FRACTION of the chunk cache's bytes do not fill it.
_SCAN_FRACTION = 8


class _Described:
    """What a cube and a cube version share: metadata read from ``meta``, and reads."""

    def snapshot(self) -> CubeVersion:
        raise NotImplementedError

    @property
    def meta(self) -> CubeMeta:
        raise NotImplementedError

    @property
    def version(self) -> str:
        raise NotImplementedError

    @property
    def id(self) -> str:
        return self.meta.id

    @property
    def title(self) -> str:
        return self.meta.title

    @property
    def variables(self) -> dict[str, VariableInfo]:
        return self.meta.variables

    @property
    def levels(self) -> tuple[int, ...]:
        return self.meta.levels

    @property
    def times(self) -> np.ndarray:
        return self.meta.times

    @property
    def coverage(self) -> tuple[float, float, float, float]:
        return self.meta.coverage

    def value_range(self, variable: str, level: int) -> tuple[float, float] | None:
        """(min, max) of a variable's stored values at a level, as recorded at build time
        (None for versions built before ranges were recorded)."""
        return self.meta.value_range(variable, level)

    def __repr__(self) -> str:
        return (
            f"<{type(self).__name__} {self.id!r} version={self.version} "
            f"levels={list(self.levels)} variables={sorted(self.variables)} "
            f"times={self.times.size}>"
        )

    def read(
        self,
        variable: str,
        zones: Any,
        start: Any = None,
        end: Any = None,
        cache: ChunkCache | None = None,
    ) -> np.ndarray:
        """Values ``(time, zone)`` as float64; NaN where there is no data."""
        return sync(self.read_async(variable, zones, start, end, cache))

    async def read_async(
        self,
        variable: str,
        zones: Any,
        start: Any = None,
        end: Any = None,
        cache: ChunkCache | None = None,
    ) -> np.ndarray:
        """The same as :meth:`read`, awaitable from any event loop."""
        version = self.snapshot()
        return await version.execute_async(version.plan(variable, zones, start, end), cache)


async def _open_version(store: CountingStore, url: str, cache: ChunkCache | None) -> CubeVersion:
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
    if not isinstance(tarr, zarr.AsyncArray):
        raise CubeFormatError("time", vid, "a time array in the version")
    seconds = await tarr.getitem(slice(None))
    times = np.asarray(seconds, dtype=np.int64).astype("datetime64[s]")
    meta = replace(CubeMeta.from_attrs(dict(group.attrs), times), manifest=manifest)
    return CubeVersion(url, vid, meta, group, cache)


class CubeVersion(_Described):
    """One published version of a cube, opened: immutable metadata, plans and reads.

    A plan made here is run here: a newer version published meanwhile changes nothing
    a holder of this object reads (the writer keeps the previous versions for that).

    Attributes
    ----------
    url, id, title, version:
        Where the cube is, its id and title, and this version's id.
    variables, levels, times, coverage, meta:
        As in :class:`Cube`.
    """

    def __init__(
        self,
        url: str,
        version: str,
        meta: CubeMeta,
        group: zarr.AsyncGroup,
        cache: ChunkCache | None,
    ) -> None:
        self.url = url
        self._version = version
        self._meta = meta
        self.cache = cache
        self._group = group
        self._layouts = {
            lv: LevelLayout(lv, int(meta.times.size), meta.chunks[lv]) for lv in meta.levels
        }
        self._arrays: dict[str, zarr.AsyncArray[Any]] = {}

    def snapshot(self) -> CubeVersion:
        """This version itself."""
        return self

    @property
    def meta(self) -> CubeMeta:
        return self._meta

    @property
    def version(self) -> str:
        return self._version

    # -- planning --------------------------------------------------------------------
    def time_indices(self, start: Any = None, end: Any = None) -> slice:
        """The time steps with ``start <= t <= end`` as a slice (open ends allowed).

        ``start`` and ``end`` are datetime64, datetime or RFC 3339 strings.
        """
        times = self.times.astype("datetime64[us]")
        i0, i1 = 0, times.size
        t0 = parse_time(start, "start") if start is not None else None
        t1 = parse_time(end, "end") if end is not None else None
        if t0 is not None:
            i0 = int(np.searchsorted(times, t0, side="left"))
        if t1 is not None:
            i1 = int(np.searchsorted(times, t1, side="right"))
        if t0 is not None and t1 is not None and t1 < t0:
            raise InvalidInput("end", str(end), f"a date-time not before start ({start})")
        return slice(i0, max(i0, i1))

    def _level_of(self, zones: np.ndarray) -> int:
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

    def plan(
        self,
        variable: str,
        zones: Any,
        start: Any = None,
        end: Any = None,
        *,
        steps: slice | None = None,
    ) -> ReadPlan:
        """The chunks a read would fetch, without any I/O (see :class:`ReadPlan`).

        The time steps are ``start <= t <= end`` (:meth:`time_indices`), or ``steps``
        when given (positions on the time axis, as a slice).
        """
        info = self._variable(variable)
        tsel = self.time_indices(start, end) if steps is None else steps
        one = grid.zone_fields(zones)
        if one is not None and one[0] in self._layouts:  # a point's read: no arrays
            lv, reg, row, col = one
            layout = self._layouts[lv]
            return plan_cell(
                layout, f"{variable}/{lv}", reg, row, col, tsel, info.itemsize, variable
            )
        ids = np.atleast_1d(np.asarray(zones)).ravel()
        if ids.size and ids.dtype.kind not in "ui":
            raise GridError("zones", ids.dtype.name, "integer zone ids")
        ids = ids.astype(np.uint64)
        level = self._level_of(ids)
        if ids.size:
            _, region, i, j = grid.zone_to_index(ids)
        else:
            region = i = j = np.zeros(0, dtype=np.int64)
        return plan_cells(
            self._layouts[level], f"{variable}/{level}", region, i, j, tsel, info.itemsize, variable
        )

    # -- reading ---------------------------------------------------------------------
    async def execute_async(self, plan: ReadPlan, cache: ChunkCache | None = None) -> np.ndarray:
        """Run a plan made by :meth:`plan` (on zarr's I/O loop, awaited from any loop).

        Values ``(time, zone)`` in the variable's ``value_dtype`` (float32 for an unpacked
        float32 variable, else float64), NaN where there is no data.

        When every chunk the plan names is in the cache the values are assembled right
        here, on the caller's loop: a warm read needs no hop to the I/O thread.
        """
        warm = self.read_cached(plan, cache)
        if warm is not None:
            return warm
        loop = _get_loop()
        coro = self._execute(plan, cache)
        try:
            running = asyncio.get_running_loop()
        except RuntimeError:
            running = None
        if running is loop:
            return await coro
        return await asyncio.wrap_future(asyncio.run_coroutine_threadsafe(coro, loop))

    def read_cached(self, plan: ReadPlan, cache: ChunkCache | None = None) -> np.ndarray | None:
        """The values of a plan (as :meth:`execute_async`) if every chunk it names is in
        the cache, else None: no I/O, no await."""
        cache = cache if cache is not None else self.cache
        if cache is None:
            return None
        chunks = cache.get_all([(self.url, self.version, cr.array, cr.coords) for cr in plan.reads])
        if chunks is None:
            return None
        info = self.meta.variables[plan.variable]
        if len(chunks) == 1 and plan.nzones == 1 and plan.reads[0].out_time.start == 0:
            cr = plan.reads[0]  # one zone, one chunk: its values are the answer
            if cr.out_time.stop == plan.shape[0]:
                where: tuple[Any, ...] = (cr.in_time, *cr.cells)
                values = info.decode(chunks[0][where])
                return values.astype(info.value_dtype, copy=False).reshape(plan.shape)
        out = np.full(plan.shape, np.nan, dtype=info.value_dtype)
        for cr, data in zip(plan.reads, chunks, strict=True):
            where = (cr.in_time, *cr.cells)
            out[cr.out_time, cr.columns] = info.decode(data[where])
        return out

    def object_key(self, cr: ChunkRead) -> str:
        """The store key (relative to the cube's root) of the object holding a chunk."""
        key = f"{VERSIONS}/{self.version}/{cr.key}"
        store = self._group.store
        if isinstance(store, ResolvingStore):
            target, _ = store.resolve(key)
            return target or key
        return key

    async def _array(self, path: str) -> zarr.AsyncArray[Any]:
        arr = self._arrays.get(path)
        if arr is None:
            found = await self._group.getitem(path)
            if not isinstance(found, zarr.AsyncArray):
                raise CubeFormatError("array", path, "an array of the cube version")
            arr = self._arrays[path] = found
        return arr

    async def _execute(self, plan: ReadPlan, cache: ChunkCache | None) -> np.ndarray:
        cache = cache if cache is not None else self.cache
        info = self.meta.variables[plan.variable]
        out = np.full(plan.shape, np.nan, dtype=info.value_dtype)
        if not plan.reads or plan.nzones == 0:
            return out
        sem = asyncio.Semaphore(_MAX_INFLIGHT)
        # A scan larger than a fraction of the cache would only push out the chunks small
        # requests share: its chunks are used (cached ones too) but not kept.
        keep = cache is not None and plan.max_bytes <= cache.max_bytes // _SCAN_FRACTION

        async def one(cr: ChunkRead) -> None:
            key = (self.url, self.version, cr.array, cr.coords)
            data = cache.get(key) if cache is not None else None
            if data is None:
                try:
                    arr = await self._array(cr.array)
                    async with sem:
                        data = np.asarray(await arr.getitem(cr.selection))
                except Exception as exc:
                    raise chunk_fault(exc, self.id, self.version, self.object_key(cr)) from exc
                if keep and cache is not None:
                    cache.put(key, data)
            where: tuple[Any, ...] = (cr.in_time, *cr.cells)
            raw = data[where]
            out[cr.out_time, cr.columns] = info.decode(raw)

        await asyncio.gather(*(one(cr) for cr in plan.reads))
        return out


class Cube(_Described):
    """A published cube, opened at its current version; :meth:`refresh` moves it on.

    Metadata, plans and reads go to the current :class:`CubeVersion`; hold on to
    :meth:`snapshot` to plan and read against one version however often it refreshes.

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
        storage_options: dict[str, Any] | None = None,
        cache: ChunkCache | None = None,
    ) -> None:
        self.url = normalize_url(url)[1]
        self.storage_options = storage_options
        self.cache = cache
        self.stats = IOStats()
        self._store = open_store(url, storage_options, read_only=True, stats=self.stats)
        self._lock = threading.Lock()
        self._v: CubeVersion = sync(_open_version(self._store, self.url, cache))

    def snapshot(self) -> CubeVersion:
        """The version served now, fixed: plans and reads on it never see a newer one."""
        return self._v

    @property
    def meta(self) -> CubeMeta:
        return self._v.meta

    @property
    def version(self) -> str:
        return self._v.version

    def refresh(self) -> bool:
        """Re-read the version pointer; True if a new version is now being read."""
        pointer = sync(read_pointer(self._store))
        if pointer is None or pointer.get("version") == self._v.version:
            return False
        new = sync(_open_version(self._store, self.url, self.cache))
        with self._lock:
            self._v = new
        return True

    def object_exists(self, key: str) -> bool:
        """Whether the store holds the object ``key`` (relative to the cube's root) now.

        One request; a store that cannot be reached raises :class:`StoreUnavailable`.
        """
        try:
            return bool(sync(self._store.exists(key)))
        except StoreUnavailable:
            raise
        except Exception as exc:
            raise StoreUnavailable(f"cannot check {key!r} in the cube store: {exc}") from exc

    def time_indices(self, start: Any = None, end: Any = None) -> slice:
        """:meth:`CubeVersion.time_indices` of the current version."""
        return self._v.time_indices(start, end)

    def plan(
        self,
        variable: str,
        zones: Any,
        start: Any = None,
        end: Any = None,
        *,
        steps: slice | None = None,
    ) -> ReadPlan:
        """:meth:`CubeVersion.plan` of the current version (no I/O)."""
        return self._v.plan(variable, zones, start, end, steps=steps)

    async def execute_async(self, plan: ReadPlan, cache: ChunkCache | None = None) -> np.ndarray:
        """Run a plan on the current version (plan on :meth:`snapshot` to pin one)."""
        return await self._v.execute_async(plan, cache)


def open_cube(
    url: str, storage_options: dict[str, Any] | None = None, cache: ChunkCache | None = None
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
