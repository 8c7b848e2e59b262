"""Writing cubes: a new version beside the old one, published by switching a pointer.

Layout of a cube at ``URL``::

    URL/current.json                    the pointer: cube id, current version, history
    URL/versions/<version>/zarr.json    root group: metadata (consolidated)
    URL/versions/<version>/time         int64 seconds since 1970-01-01T00:00:00Z
    URL/versions/<version>/<var>/<level>/strips    (time, 5, 2n, n)
    URL/versions/<version>/<var>/<level>/apex      (time, 2)

A build writes everything under a fresh version, then the root metadata, then the
pointer. Readers follow the pointer only, so they see the old version or the new one,
never a mix. Versions that were never published are removed when the next build starts.
"""

from __future__ import annotations

import asyncio
import secrets
import threading
import warnings
from datetime import UTC, datetime
from typing import Any

import numpy as np
import zarr
from zarr.codecs import BloscCodec
from zarr.core.buffer import default_buffer_prototype
from zarr.core.sync import sync
from zarr.storage import MemoryStore

from alveary._errors import CubeFormatError, InvalidInput
from alveary.cube._layout import ChunkShape, LevelLayout, default_chunk_shape
from alveary.cube._meta import (
    FORMAT_NAME,
    FORMAT_VERSION,
    MAX_LEVEL,
    TIME_UNITS,
    CubeMeta,
    VariableInfo,
    check_cube_id,
    to_times,
)
from alveary.cube._plan import plan_cells
from alveary.cube._store import get_json, normalize_url, open_store, put_json_atomic

__all__ = ["POINTER_KEY", "ChunkSink", "CubeWriter", "create_cube", "new_version_id"]

POINTER_KEY = "current.json"
VERSIONS = "versions"
_ROOT_ENTRIES = {POINTER_KEY, VERSIONS, "zarr.json"}


def new_version_id(now: datetime | None = None) -> str:
    """A sortable, unique version id: UTC time of the build (to the microsecond) and a
    random suffix.

    Examples
    --------
    >>> v = new_version_id(datetime(2025, 3, 1, 12, 0, 0, 5, tzinfo=UTC))
    >>> v.startswith("20250301T120000.000005Z-") and len(v) == 32
    True
    """
    now = now or datetime.now(UTC)
    return now.strftime("%Y%m%dT%H%M%S.%fZ") + "-" + secrets.token_hex(4)


def _compressor(itemsize: int) -> BloscCodec:
    return BloscCodec(cname="zstd", clevel=5, shuffle="shuffle", typesize=itemsize)


def array_paths(variable: str, level: int) -> tuple[str, str]:
    """Paths of the strip and apex arrays of a variable at a level, within a version."""
    return f"{variable}/{level}/strips", f"{variable}/{level}/apex"


async def read_pointer(store) -> dict[str, Any] | None:
    ptr = await get_json(store, POINTER_KEY)
    if ptr is not None and ptr.get("format") != FORMAT_NAME:
        raise CubeFormatError(POINTER_KEY, ptr.get("format"), FORMAT_NAME)
    return ptr


_OPEN_LOCK = threading.Lock()
_ARRAYS: dict[tuple, zarr.Array] = {}


def _sink_array(url: str, options: dict | None, version: str, path: str) -> zarr.Array:
    key = (url, repr(sorted((options or {}).items())), version, path)
    with _OPEN_LOCK:
        arr = _ARRAYS.get(key)
        if arr is None:
            store = open_store(url, options, read_only=False)
            arr = zarr.open_array(
                store, path=f"{VERSIONS}/{version}/{path}", mode="r+", zarr_format=3
            )
            if len(_ARRAYS) > 256:
                _ARRAYS.clear()
            _ARRAYS[key] = arr
        return arr


class ChunkSink:
    """Writes whole chunks into one unpublished version; small and picklable.

    Build workers (threads or processes of a dask cluster) each hold one and write
    disjoint chunks, so no chunk is written twice and no lock is needed.
    """

    def __init__(
        self,
        url: str,
        version: str,
        variables: dict[str, VariableInfo],
        layouts: dict[int, LevelLayout],
        storage_options: dict | None = None,
    ) -> None:
        self.url = url
        self.version = version
        self.variables = variables
        self.layouts = layouts
        self.storage_options = storage_options

    def write_strip_chunk(
        self, variable: str, level: int, tblock: int, region: int, rb: int, cb: int, values
    ) -> int:
        """Write one strip chunk from float values ``(t, rows, cols)``; NaN is no data.

        Returns the number of zones with data in it (0: nothing was written).
        """
        info = self.variables[variable]
        lay = self.layouts[level]
        sel = lay.strip_chunk_selection(tblock, region, rb, cb)
        v = np.asarray(values, dtype=np.float64)
        expect = (
            sel[0].stop - sel[0].start,
            sel[2].stop - sel[2].start,
            sel[3].stop - sel[3].start,
        )
        if v.shape != expect:
            raise InvalidInput("values", v.shape, f"shape {expect}")
        valid = np.isfinite(v)
        if not valid.any():
            return 0
        raw = info.encode(v)
        arr = _sink_array(
            self.url, self.storage_options, self.version, array_paths(variable, level)[0]
        )
        arr[sel] = raw[:, None, :, :]
        return int(valid.any(axis=0).sum())

    def read(self, variable: str, level: int, zones, t0: int, t1: int) -> np.ndarray:
        """Read back values ``(t1 - t0, zone)`` already written to this version.

        Used to build coarser levels from finer ones before anything is published.
        """
        from alveary import grid

        info = self.variables[variable]
        lay = self.layouts[level]
        zones = np.asarray(zones, dtype=np.uint64).ravel()
        _, region, i, j = grid.zone_to_index(zones)
        plan = plan_cells(lay, f"{variable}/{level}", region, i, j, slice(t0, t1), info.itemsize)
        out = np.full(plan.shape, np.nan)
        for cr in plan.reads:
            arr = _sink_array(self.url, self.storage_options, self.version, cr.array)
            data = np.asarray(arr[cr.selection])
            out[cr.out_time, cr.columns] = info.decode(data[(cr.in_time, *cr.cells)])
        return out

    def write_apex_chunk(self, variable: str, level: int, tblock: int, values) -> int:
        """Write one apex chunk from float values ``(t, 2)``; returns zones with data."""
        info = self.variables[variable]
        lay = self.layouts[level]
        sel = lay.apex_chunk_selection(tblock)
        v = np.asarray(values, dtype=np.float64)
        if v.shape != (sel[0].stop - sel[0].start, 2):
            raise InvalidInput("values", v.shape, f"shape {(sel[0].stop - sel[0].start, 2)}")
        valid = np.isfinite(v)
        if not valid.any():
            return 0
        arr = _sink_array(
            self.url, self.storage_options, self.version, array_paths(variable, level)[1]
        )
        arr[sel] = info.encode(v)
        return int(valid.any(axis=0).sum())


class CubeWriter:
    """Build a new version of a cube and publish it.

    Parameters
    ----------
    url:
        The cube's location (local path, ``file://``, ``s3://bucket/prefix``, ``memory://``).
    cube_id, title:
        Identity of the cube; a store that already holds a cube with another id is refused.
    times:
        The time axis (datetime64, datetime or RFC 3339 strings), strictly increasing.
    levels:
        The refinement levels the cube will hold.
    variables:
        ``{name: VariableInfo | dict}`` with CF attributes (units, long_name, dtype,
        _FillValue, scale_factor, add_offset).
    chunks:
        ``None`` (defaults), a :class:`ChunkShape` for every level, or ``{level: ChunkShape}``.
    shards:
        ``None`` (no sharding) or ``(time_chunks, row_chunks, col_chunks)`` per shard.
    coverage:
        ``(west, south, east, north)`` in degrees.
    keep_versions:
        Published versions kept after a publish (the current one included).

    Examples
    --------
    >>> import numpy as np, alveary.grid as grid
    >>> w = create_cube("memory://doc/writer", cube_id="doc", times=["2024-01-01"],
    ...                 levels=[2], variables={"t": {"units": "K"}})
    >>> z = grid.all_zones(2)
    >>> w.write("t", 2, z, np.arange(z.size, dtype=float)[None, :])
    >>> w.publish() == w.version
    True
    """

    def __init__(
        self,
        url: str,
        *,
        cube_id: str,
        times,
        levels,
        variables: dict[str, Any],
        title: str | None = None,
        chunks: ChunkShape | dict[int, ChunkShape] | None = None,
        shards: tuple[int, int, int] | None = None,
        coverage: tuple[float, float, float, float] = (-180.0, -90.0, 180.0, 90.0),
        storage_options: dict | None = None,
        summary: str = "",
        source: str = "",
        history: str = "",
        extra: dict[str, Any] | None = None,
        keep_versions: int = 2,
    ) -> None:
        self.url = url
        self.storage_options = storage_options
        self.cube_id = check_cube_id(cube_id)
        self.title = title or cube_id
        self.times = to_times(times)
        lv = sorted({int(x) for x in np.atleast_1d(levels).tolist()})
        if not lv or lv[0] < 0 or lv[-1] > MAX_LEVEL:
            raise InvalidInput("levels", levels, f"one or more integers in [0, {MAX_LEVEL}]")
        self.levels = tuple(lv)
        if not variables:
            raise InvalidInput("variables", variables, "at least one variable")
        self.variables = {k: VariableInfo.from_any(k, v) for k, v in variables.items()}
        self.layouts: dict[int, LevelLayout] = {}
        for level in self.levels:
            if chunks is None:
                cs = default_chunk_shape(level, self.times.size)
            elif isinstance(chunks, ChunkShape):
                cs = chunks
            else:
                cs = chunks.get(level) or default_chunk_shape(level, self.times.size)
            n = 1 << level
            cs = ChunkShape(min(cs.time, self.times.size), min(cs.rows, 2 * n), min(cs.cols, n))
            self.layouts[level] = LevelLayout(level, int(self.times.size), cs)
        if shards is not None and (len(shards) != 3 or min(int(x) for x in shards) < 1):
            raise InvalidInput("shards", shards, "(time_chunks, row_chunks, col_chunks) >= 1")
        self.shards = None if shards is None else tuple(int(x) for x in shards)
        w, s, e, n_ = (float(x) for x in coverage)
        if not (-90 <= s <= n_ <= 90 and -180 <= w <= 180 and -180 <= e <= 180):
            raise InvalidInput("coverage", coverage, "(west, south, east, north) in degrees")
        self.coverage = (w, s, e, n_)
        self.summary, self.source, self.history = summary, source, history
        self.extra = dict(extra or {})
        self.keep_versions = max(1, int(keep_versions))
        self.version = new_version_id()
        self.created = datetime.now(UTC).strftime("%Y-%m-%dT%H:%M:%SZ")
        self.published = False
        self._written: set[str] = set()
        self._store = open_store(url, storage_options, read_only=False)
        self._staging = MemoryStore()
        sync(self._prepare())
        self.sink = ChunkSink(url, self.version, self.variables, self.layouts, storage_options)

    # -- setup -----------------------------------------------------------------------
    async def _prepare(self) -> None:
        store = self._store
        self._pointer = await read_pointer(store)
        if self._pointer is not None:
            other = self._pointer.get("cube_id")
            if other != self.cube_id:
                raise CubeFormatError(
                    "cube_id",
                    self.cube_id,
                    f"{other!r}: the store at {self.url} already holds cube {other!r}",
                )
        else:
            entries = await _listdir(store, "")
            foreign = sorted(set(entries) - _ROOT_ENTRIES)
            if foreign:
                raise CubeFormatError(
                    "out",
                    self.url,
                    f"an empty location or an alveary cube (found {', '.join(foreign[:5])})",
                )
        await self._drop_unpublished()
        # The hierarchy's metadata is made in memory first and then copied over in one
        # concurrent batch: zarr's node-by-node creation costs several requests per node.
        root = f"{VERSIONS}/{self.version}"
        group = await zarr.api.asynchronous.open_group(
            store=self._staging,
            path=root,
            mode="w",
            zarr_format=3,
            attributes={"alveary": {"format": FORMAT_NAME, "state": "building"}},
        )
        tarr = await group.create_array(
            "time",
            shape=(self.times.size,),
            chunks=(self.times.size,),
            dtype="int64",
            fill_value=0,
            dimension_names=("time",),
            attributes={
                "standard_name": "time",
                "long_name": "time",
                "units": TIME_UNITS,
                "calendar": "proleptic_gregorian",
                "axis": "T",
            },
        )
        await tarr.setitem(slice(None), self.times.astype(np.int64))
        for name, info in self.variables.items():
            vgroup = await group.create_group(name, attributes=info.cf_attrs())
            for level in self.levels:
                lay = self.layouts[level]
                lgroup = await vgroup.create_group(str(level), attributes={"level": level})
                attrs = {**info.cf_attrs(), "level": level}
                shard = None
                if self.shards is not None:
                    ts, rs, cs_ = self.shards
                    t, _, r, c = lay.chunks.strip_chunks
                    shard = (t * ts, 1, r * rs, c * cs_)
                await lgroup.create_array(
                    "strips",
                    shape=lay.strip_shape,
                    chunks=lay.chunks.strip_chunks,
                    shards=shard,
                    dtype=info.dtype,
                    fill_value=info.fill_value,
                    compressors=[_compressor(info.itemsize)],
                    dimension_names=("time", "strip", "row", "col"),
                    attributes=attrs,
                )
                await lgroup.create_array(
                    "apex",
                    shape=lay.apex_shape,
                    chunks=lay.chunks.apex_chunks,
                    dtype=info.dtype,
                    fill_value=info.fill_value,
                    compressors=[_compressor(info.itemsize)],
                    dimension_names=("time", "apex"),
                    attributes=attrs,
                )
        await self._copy_staged([k async for k in self._staging.list()])

    async def _copy_staged(self, keys: list[str]) -> None:
        proto = default_buffer_prototype()

        async def one(key: str) -> None:
            buf = await self._staging.get(key, proto)
            if buf is not None:
                await self._store.set(key, buf)

        await asyncio.gather(*(one(k) for k in keys))

    async def _drop_unpublished(self) -> None:
        published = set(self._pointer.get("history", [])) if self._pointer else set()
        for name in await _listdir(self._store, VERSIONS):
            if name != "zarr.json" and name not in published:
                await self._store.delete_dir(f"{VERSIONS}/{name}")

    # -- writing ---------------------------------------------------------------------
    def _check(self, variable: str, level: int) -> tuple[VariableInfo, LevelLayout]:
        if variable not in self.variables:
            raise InvalidInput("variable", variable, f"one of {sorted(self.variables)}")
        if level not in self.layouts:
            raise InvalidInput("level", level, f"one of {list(self.levels)}")
        return self.variables[variable], self.layouts[level]

    def write(self, variable: str, level: int, zones, values) -> None:
        """Write values ``(time, zone)`` (or ``(zone,)`` for a one-step axis) of zones.

        NaN means no data. Zones can be written in any grouping and order: a chunk
        written before by this writer is read, updated and written back; chunks left
        holding only no-data are not stored.
        """
        from alveary import grid

        if self.published:
            raise InvalidInput("writer", self.version, "a writer that has not published yet")
        info, lay = self._check(variable, level)
        zones = np.asarray(zones, dtype=np.uint64).ravel()
        vals = np.asarray(values, dtype=np.float64)
        if vals.ndim == 1:
            vals = vals[None, :]
        if vals.shape != (self.times.size, zones.size):
            raise InvalidInput("values", vals.shape, f"shape {(self.times.size, zones.size)}")
        lvl, region, i, j = grid.zone_to_index(zones)
        if zones.size and (np.asarray(lvl) != level).any():
            raise InvalidInput("zones", None, f"zones of level {level} only")
        plan = plan_cells(
            lay, f"{variable}/{level}", region, i, j, slice(0, self.times.size), info.itemsize
        )
        sync(self._write_plan(info, plan, vals))

    async def _write_plan(self, info: VariableInfo, plan, vals: np.ndarray) -> None:
        root = f"{VERSIONS}/{self.version}"
        arrays = {}
        for path in {cr.array for cr in plan.reads}:
            arrays[path] = await zarr.api.asynchronous.open_array(
                store=self._store, path=f"{root}/{path}", mode="r+", zarr_format=3
            )
        sem = asyncio.Semaphore(16)

        async def one(cr) -> None:
            arr = arrays[cr.array]
            async with sem:
                if cr.key in self._written:
                    cur = info.decode(np.asarray(await arr.getitem(cr.selection)))
                else:
                    shape = tuple(s.stop - s.start for s in cr.selection)
                    cur = np.full(shape, np.nan)
                cur[(cr.in_time, *cr.cells)] = vals[cr.out_time][:, cr.columns]
                if np.isfinite(cur).any():
                    await arr.setitem(cr.selection, info.encode(cur))
                    self._written.add(cr.key)

        await asyncio.gather(*(one(cr) for cr in plan.reads))

    # -- publishing ------------------------------------------------------------------
    def meta(self) -> CubeMeta:
        return CubeMeta(
            id=self.cube_id,
            title=self.title,
            levels=self.levels,
            times=self.times,
            variables=self.variables,
            chunks={lv: lay.chunks for lv, lay in self.layouts.items()},
            shards={lv: self.shards for lv in self.levels},
            coverage=self.coverage,
            version=self.version,
            created=self.created,
            summary=self.summary,
            source=self.source,
            history=self.history,
            extra=self.extra,
        )

    def stored_bytes(self) -> int:
        """Bytes stored under this version so far (all objects)."""
        return int(sync(self._store.getsize_prefix(f"{VERSIONS}/{self.version}")))

    def publish(self) -> str:
        """Write the metadata, then switch the pointer; returns the new version id."""
        sync(self._publish())
        self.published = True
        return self.version

    async def _publish(self) -> None:
        store = self._store
        root = f"{VERSIONS}/{self.version}"
        # Array metadata never changes after creation, so the staged copy consolidates
        # exactly what the store holds; only the root document is written again.
        group = await zarr.api.asynchronous.open_group(
            store=self._staging, path=root, mode="r+", zarr_format=3
        )
        await group.update_attributes(self.meta().to_attrs())
        with warnings.catch_warnings():
            # zarr notes that consolidated metadata is not yet in the v3 spec; we rely on
            # it knowingly (one GET opens a version) and document it in cube-format.md.
            warnings.simplefilter("ignore", UserWarning)
            await zarr.api.asynchronous.consolidate_metadata(
                self._staging, path=root, zarr_format=3
            )
        await self._copy_staged([f"{root}/zarr.json"])
        current = await read_pointer(store)
        if current is not None and current.get("cube_id") != self.cube_id:
            raise CubeFormatError("cube_id", self.cube_id, f"{current.get('cube_id')!r}")
        history = [self.version] + [v for v in (current or {}).get("history", [])]
        keep, drop = history[: self.keep_versions], history[self.keep_versions :]
        pointer = {
            "format": FORMAT_NAME,
            "format_version": FORMAT_VERSION,
            "cube_id": self.cube_id,
            "version": self.version,
            "published": datetime.now(UTC).strftime("%Y-%m-%dT%H:%M:%SZ"),
            "history": keep,
        }
        await put_json_atomic(store, POINTER_KEY, pointer)
        for old in drop:
            await store.delete_dir(f"{VERSIONS}/{old}")

    def abort(self) -> None:
        """Remove this unpublished version (the published one is untouched)."""
        if not self.published:
            sync(self._store.delete_dir(f"{VERSIONS}/{self.version}"))


async def _listdir(store, prefix: str) -> list[str]:
    try:
        return [name async for name in store.list_dir(prefix)]
    except FileNotFoundError:
        return []


def create_cube(url: str, **kwargs: Any) -> CubeWriter:
    """Start a new version of the cube at ``url``; see :class:`CubeWriter`."""
    normalize_url(url)
    return CubeWriter(url, **kwargs)
