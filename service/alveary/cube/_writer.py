"""Writing cubes: a new version beside the old one, published by switching a pointer.

Layout of a cube at ``URL``::

    URL/current.json                    the pointer: current version, listed versions
    URL/versions/<version>/zarr.json    root group: metadata (consolidated)
    URL/versions/<version>/manifest.json   the chunks that hold data, and their owners
    URL/versions/<version>/time         int64 seconds since 1970-01-01T00:00:00Z
    URL/versions/<version>/<var>/<level>/strips    (time, 5, 2n, n)
    URL/versions/<version>/<var>/<level>/apex      (time, 2)

A build writes everything under a fresh version, then the manifest, then the root
metadata, then the pointer. Readers follow the pointer only, so they see the old version
or the new one, never a mix. A version may inherit the chunks of the published one
(``inherit=True``, for appending): it then writes only the chunks that change, and its
manifest names the older version as the owner of the others. Versions that were never
published are removed when the next build starts.
"""

from __future__ import annotations

import asyncio
import json
import secrets
import warnings
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, replace
from datetime import UTC, datetime
from functools import lru_cache
from typing import Any

import numpy as np
import zarr
import zarr.api.asynchronous as zasync
from numpy.typing import NDArray
from zarr.abc.codec import BytesBytesCodec
from zarr.abc.store import Store
from zarr.codecs import BloscCodec, Crc32cCodec
from zarr.core.array import AsyncArray
from zarr.core.buffer import default_buffer_prototype
from zarr.core.group import AsyncGroup, GroupMetadata
from zarr.core.metadata.v3 import ArrayV3Metadata
from zarr.core.sync import sync
from zarr.storage import MemoryStore, StorePath

from alveary import grid
from alveary._errors import CubeFormatError, InvalidInput
from alveary.cube._layout import ChunkShape, LevelLayout, default_chunk_shape
from alveary.cube._manifest import (
    MANIFEST_KEY,
    Manifest,
    ManifestBuilder,
    ResolvingStore,
    chunk_suffix,
    split_chunk_key,
)
from alveary.cube._meta import (
    FORMAT_NAME,
    TIME_UNITS,
    CubeMeta,
    VariableInfo,
    check_cube_id,
    to_times,
)
from alveary.cube._plan import ChunkRead, ReadPlan, plan_cells
from alveary.cube._store import normalize_url, open_store, put_json_atomic
from alveary.cube._versions import (
    POINTER_KEY,
    VERSIONS,
    Pointer,
    Retention,
    delete_versions,
    drop_unpublished,
    load_pointer,
    publish_pointer,
    read_manifest,
    write_pointer,
)

__all__ = [
    "ChunkSink",
    "ChunkWrite",
    "CubeWriter",
    "array_paths",
    "chunk_codecs",
    "create_cube",
    "new_version_id",
]

_ROOT_ENTRIES = {POINTER_KEY, VERSIONS, "zarr.json"}
_Floats = NDArray[np.float64]


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


def chunk_codecs(itemsize: int) -> list[BytesBytesCodec]:
    """Byte codecs of every chunk written: blosc (zstd, byte shuffle), then CRC32C.

    The checksum is verified on every read; a chunk whose stored bytes changed raises
    (see :func:`alveary.cube.is_checksum_error`).
    """
    return [BloscCodec(cname="zstd", clevel=5, shuffle="shuffle", typesize=itemsize), Crc32cCodec()]


def array_paths(variable: str, level: int) -> tuple[str, str]:
    """Paths of the strip and apex arrays of a variable at a level, within a version."""
    return f"{variable}/{level}/strips", f"{variable}/{level}/apex"


@lru_cache(maxsize=256)
def _array(url: str, options: str, version: str, path: str) -> zarr.Array[Any]:
    """An array of an unpublished version, opened for writing once per process.

    ``options`` is the storage options as JSON (so that the arguments are hashable).
    """
    store = open_store(url, json.loads(options), read_only=False)
    return zarr.open_array(store, path=f"{VERSIONS}/{version}/{path}", mode="r+", zarr_format=3)


@dataclass(frozen=True)
class ChunkWrite:
    """What writing one chunk did: ``state`` is ``"written"``, ``"dropped"`` (the chunk
    holds no data any more) or ``"empty"`` (nothing to store, nothing was there)."""

    array: str
    coords: tuple[int, ...]
    zones: int
    state: str
    #: the least and greatest value the chunk holds now (None when it holds none)
    low: float | None = None
    high: float | None = None


class ChunkSink:
    """Writes whole chunks into one unpublished version; small and picklable.

    Build workers (threads or processes of a dask cluster) each hold one and write
    disjoint chunks, so no chunk is written twice and no lock is needed. ``view`` says
    which chunks the version holds so far (inherited ones included); chunks are read
    back through it.
    """

    def __init__(
        self,
        url: str,
        version: str,
        variables: dict[str, VariableInfo],
        layouts: dict[int, LevelLayout],
        storage_options: dict[str, Any] | None = None,
        view: Manifest | None = None,
    ) -> None:
        self.url = url
        self.version = version
        self.variables = variables
        self.layouts = layouts
        self.storage_options = storage_options
        self.view = view
        self._options = json.dumps(storage_options or {}, sort_keys=True)

    def _writable(self, path: str) -> zarr.Array[Any]:
        return _array(self.url, self._options, self.version, path)

    def _readable(self, path: str) -> zarr.Array[Any]:
        """The array read through the view: inherited chunks come from their owner."""
        w = self._writable(path)
        if self.view is None:
            return w
        root = f"{VERSIONS}/{self.version}"
        store = ResolvingStore(w.store_path.store, root, self.view)
        return zarr.Array(AsyncArray(w.metadata, StorePath(store, f"{root}/{path}")))

    def holds(self, array: str, coords: tuple[int, ...]) -> bool:
        return self.view is not None and self.view.locate(array, coords) is not None

    def _put(
        self,
        info: VariableInfo,
        array: str,
        coords: tuple[int, ...],
        sel: tuple[slice, ...],
        values: _Floats,
        steps: NDArray[np.bool_] | None,
    ) -> ChunkWrite:
        """Write one chunk; steps not in ``steps`` keep what the version holds."""
        held = self.holds(array, coords)
        v = values
        if held and steps is not None and not steps.all():
            cur = info.decode(np.asarray(self._readable(array)[sel])).reshape(values.shape)
            mask = steps.reshape((-1,) + (1,) * (values.ndim - 1))
            v = np.where(mask, values, cur)
        valid = np.isfinite(v)
        if not valid.any():
            return ChunkWrite(array, coords, 0, "dropped" if held else "empty")
        arr = self._writable(array)
        arr[sel] = info.encode(v).reshape(tuple(s.stop - s.start for s in sel))
        held_values = info.decode(info.encode(v[valid]))  # as stored (packing rounds)
        low, high = float(held_values.min()), float(held_values.max())
        return ChunkWrite(array, coords, int(valid.any(axis=0).sum()), "written", low, high)

    def write_strip_chunk(
        self,
        variable: str,
        level: int,
        tblock: int,
        region: int,
        rb: int,
        cb: int,
        values: _Floats,
        steps: NDArray[np.bool_] | None = None,
    ) -> ChunkWrite:
        """Write one strip chunk from float values ``(t, rows, cols)``; NaN is no data.

        ``steps`` (bool per time step of the chunk) limits the write to those steps; the
        others keep the values the version already holds (inherited ones included).
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
        path = array_paths(variable, level)[0]
        return self._put(info, path, (tblock, region, rb, cb), sel, v, steps)

    def write_apex_chunk(
        self,
        variable: str,
        level: int,
        tblock: int,
        values: _Floats,
        steps: NDArray[np.bool_] | None = None,
    ) -> ChunkWrite:
        """Write one apex chunk from float values ``(t, 2)``; see :meth:`write_strip_chunk`."""
        info = self.variables[variable]
        sel = self.layouts[level].apex_chunk_selection(tblock)
        v = np.asarray(values, dtype=np.float64)
        if v.shape != (sel[0].stop - sel[0].start, 2):
            raise InvalidInput("values", v.shape, f"shape {(sel[0].stop - sel[0].start, 2)}")
        path = array_paths(variable, level)[1]
        return self._put(info, path, (tblock, 0), sel, v, steps)

    def read(self, variable: str, level: int, zones: NDArray[Any], t0: int, t1: int) -> _Floats:
        """Read back values ``(t1 - t0, zone)`` this version holds (written or inherited).

        Used to build coarser levels from finer ones before anything is published.
        """
        info = self.variables[variable]
        lay = self.layouts[level]
        zones = np.asarray(zones, dtype=np.uint64).ravel()
        _, region, i, j = grid.zone_to_index(zones)
        plan = plan_cells(lay, f"{variable}/{level}", region, i, j, slice(t0, t1), info.itemsize)
        out = np.full(plan.shape, np.nan)
        for cr in plan.reads:
            if not self.holds(cr.array, cr.coords):
                continue
            data = np.asarray(self._readable(cr.array)[cr.selection])
            where: tuple[Any, ...] = (cr.in_time, *cr.cells)
            out[cr.out_time, cr.columns] = info.decode(data[where])
        return np.asarray(out, dtype=np.float64)


def _grids(
    layouts: Mapping[int, LevelLayout], variables: Iterable[str]
) -> dict[str, tuple[int, ...]]:
    out: dict[str, tuple[int, ...]] = {}
    for name in variables:
        for level, lay in layouts.items():
            strips, apex = array_paths(name, level)
            out[strips] = tuple(lay.chunk_grid)
            out[apex] = (lay.chunk_grid[0], 1)
    return out


@dataclass(frozen=True)
class _Base:
    """The published version a new one inherits from."""

    version: str
    meta: CubeMeta
    manifest: Manifest
    arrays: dict[str, ArrayV3Metadata]
    nodes: dict[str, bytes]  # group documents (zarr.json) by path, as stored


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
    keep_versions, grace_seconds:
        Retention: published versions kept after a publish (the current one included),
        and seconds a retired version's objects stay before deletion. Default: the
        cube's current setting (2 and 300 s for a new cube); a given value is recorded.
    inherit:
        Start from the published version: its chunks stay, by reference, unless written
        again. The levels and chunk shapes must be the same, its time axis must begin
        this one, and its variables must be among these with the same storage.

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
        times: Any,
        levels: Any,
        variables: Mapping[str, Any],
        title: str | None = None,
        chunks: ChunkShape | dict[int, ChunkShape] | None = None,
        shards: tuple[int, int, int] | None = None,
        coverage: tuple[float, float, float, float] = (-180.0, -90.0, 180.0, 90.0),
        storage_options: dict[str, Any] | None = None,
        summary: str = "",
        source: str = "",
        history: str = "",
        extra: dict[str, Any] | None = None,
        keep_versions: int | None = None,
        grace_seconds: float | None = None,
        inherit: bool = False,
    ) -> None:
        self.url = url
        self.storage_options = storage_options
        self.cube_id = check_cube_id(cube_id)
        self.title = title or cube_id
        self.times = to_times(times)
        lv = sorted({int(x) for x in np.atleast_1d(levels).tolist()})
        if not lv or lv[0] < 0 or lv[-1] > grid.MAX_LEVEL:
            raise InvalidInput("levels", levels, f"one or more integers in [0, {grid.MAX_LEVEL}]")
        self.levels = tuple(lv)
        if not variables:
            raise InvalidInput("variables", variables, "at least one variable")
        self.variables = {k: VariableInfo.from_any(k, v) for k, v in variables.items()}
        self.layouts = {lv: self._layout(lv, chunks) for lv in self.levels}
        if shards is not None and (len(shards) != 3 or min(int(x) for x in shards) < 1):
            raise InvalidInput("shards", shards, "(time_chunks, row_chunks, col_chunks) >= 1")
        self.shards = None if shards is None else (int(shards[0]), int(shards[1]), int(shards[2]))
        w, s, e, n_ = (float(x) for x in coverage)
        if not (-90 <= s <= n_ <= 90 and -180 <= w <= 180 and -180 <= e <= 180):
            raise InvalidInput("coverage", coverage, "(west, south, east, north) in degrees")
        self.coverage = (w, s, e, n_)
        self.summary, self.source, self.history = summary, source, history
        self.extra = dict(extra or {})
        self._retention_args = (keep_versions, grace_seconds)
        if keep_versions is not None or grace_seconds is not None:
            Retention(
                int(keep_versions) if keep_versions is not None else 1,
                float(grace_seconds) if grace_seconds is not None else 0.0,
            )  # checked now, before anything is written
        self.version = new_version_id()
        self.created = datetime.now(UTC).strftime("%Y-%m-%dT%H:%M:%SZ")
        self.published = False
        self.bytes_written = 0
        self._store = open_store(url, storage_options, read_only=False)
        self._staging = MemoryStore()
        self._pointer: Pointer | None = None
        self._base: _Base | None = None
        sync(self._prepare(inherit))
        self._builder = ManifestBuilder(self.version, self._grids())
        if self.shards is not None:
            for array in self._builder.grids:
                if array.endswith("/strips"):
                    self._builder.objects_per[array] = (self.shards[0], 1, *self.shards[1:])
        # variable -> level -> [min, max] of the values written (or inherited)
        self._ranges: dict[str, dict[int, tuple[float, float]]] = {}
        if self._base is not None:
            self._builder.inherit(self._base.manifest)
            for name, per in self._base.meta.ranges.items():
                for level, (lo, hi) in per.items():
                    self._widen(name, level, lo, hi)

    def _layout(self, level: int, chunks: ChunkShape | dict[int, ChunkShape] | None) -> LevelLayout:
        if chunks is None:
            cs = default_chunk_shape(level, self.times.size)
        elif isinstance(chunks, ChunkShape):
            cs = chunks
        else:
            cs = chunks.get(level) or default_chunk_shape(level, self.times.size)
        n = 1 << level
        cs = ChunkShape(int(cs.time), min(int(cs.rows), 2 * n), min(int(cs.cols), n))
        return LevelLayout(level, int(self.times.size), cs)

    def _grids(self) -> dict[str, tuple[int, ...]]:
        grids = _grids(self.layouts, self.variables)
        if self.shards is None:
            return grids
        ts, rs, cs = self.shards
        per = (ts, 1, rs, cs)
        return {
            k: tuple(-(-g // p) for g, p in zip(v, per, strict=True))
            if k.endswith("/strips")
            else v
            for k, v in grids.items()
        }

    # -- setup -----------------------------------------------------------------------
    @property
    def base_version(self) -> str | None:
        """The version this one inherits chunks from (None: a fresh version)."""
        return None if self._base is None else self._base.version

    async def _prepare(self, inherit: bool) -> None:
        store = self._store
        self._pointer = await load_pointer(store)
        if self._pointer is not None:
            other = self._pointer.cube_id
            if other != self.cube_id:
                raise CubeFormatError(
                    "cube_id",
                    self.cube_id,
                    f"{other!r}: the store at {self.url} already holds cube {other!r}",
                )
            if inherit:
                self._base = await self._load_base(self._pointer.version)
        else:
            entries = await _listdir(store, "")
            foreign = sorted(set(entries) - _ROOT_ENTRIES)
            if foreign:
                raise CubeFormatError(
                    "out",
                    self.url,
                    f"an empty location or an alveary cube (found {', '.join(foreign[:5])})",
                )
        await drop_unpublished(store, self._pointer, self.version)
        await self._stage()
        await self._copy_staged([k async for k in self._staging.list()])

    async def _load_base(self, version: str) -> _Base:
        root = f"{VERSIONS}/{version}"
        group = await zasync.open_group(
            store=self._store, path=root, mode="r", zarr_format=3, use_consolidated=True
        )
        tarr = await group.getitem("time")
        assert isinstance(tarr, AsyncArray)
        seconds = await tarr.getitem(slice(None))
        times = np.asarray(seconds, dtype=np.int64).astype("datetime64[s]")
        meta = CubeMeta.from_attrs(dict(group.attrs), times)
        self._check_base(meta)
        consolidated = group.metadata.consolidated_metadata
        assert consolidated is not None
        arrays: dict[str, ArrayV3Metadata] = {}
        nodes: dict[str, bytes] = {}
        proto = default_buffer_prototype()
        for path, node in consolidated.flattened_metadata.items():
            if isinstance(node, ArrayV3Metadata):
                arrays[path] = node
            elif isinstance(node, GroupMetadata):  # without its nested consolidated copy
                plain = replace(node, consolidated_metadata=None)
                nodes[path] = plain.to_buffer_dict(proto)["zarr.json"].to_bytes()
        manifest = await read_manifest(self._store, version)
        if manifest is None:
            manifest = await self._listed_manifest(version, arrays)
        return _Base(version, meta, manifest, arrays, nodes)

    def _check_base(self, base: CubeMeta) -> None:
        problems = []
        if base.levels != self.levels:
            problems.append(f"levels {list(base.levels)} (new: {list(self.levels)})")
        if {lv: base.chunks[lv] for lv in base.levels} != {
            lv: lay.chunks for lv, lay in self.layouts.items()
        }:
            problems.append("chunk shapes")
        n = base.times.size
        if self.times.size < n or not np.array_equal(self.times[:n], base.times):
            problems.append("a time axis that begins with the published one")
        for name, info in base.variables.items():
            if name not in self.variables:
                problems.append(f"variable {name!r}")
            elif self.variables[name] != info:
                problems.append(f"the storage of variable {name!r}")
        if self.shards is not None or any(v is not None for v in base.shards.values()):
            problems.append("unsharded arrays")
        if problems:
            raise CubeFormatError(
                "inherit", base.version, "a version with the same " + ", ".join(problems)
            )

    async def _listed_manifest(
        self, version: str, arrays: Mapping[str, ArrayV3Metadata]
    ) -> Manifest:
        """The manifest of a version written before manifests, from a store listing."""
        root = f"{VERSIONS}/{version}/"
        grids = {
            p: tuple(-(-s // c) for s, c in zip(m.shape, m.chunks, strict=True))
            for p, m in arrays.items()
            if p != "time"
        }
        builder = ManifestBuilder(version, grids)
        async for key in self._store.list_prefix(root):
            parsed = split_chunk_key(key[len(root) :])
            if parsed is not None and parsed[0] in grids:
                builder.add(*parsed)
        return builder.build()

    async def _stage(self) -> None:
        """Make the hierarchy's metadata in memory; it is copied over in one batch (zarr's
        node-by-node creation costs several requests per node)."""
        root = f"{VERSIONS}/{self.version}"
        group = await zasync.open_group(
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
            if self._base is not None and name in self._base.meta.variables:
                await self._stage_inherited(name)
            else:
                await self._stage_variable(group, name, info)

    async def _stage_variable(self, group: AsyncGroup, name: str, info: VariableInfo) -> None:
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
                compressors=chunk_codecs(info.itemsize),
                dimension_names=("time", "strip", "row", "col"),
                attributes=attrs,
            )
            await lgroup.create_array(
                "apex",
                shape=lay.apex_shape,
                chunks=lay.chunks.apex_chunks,
                dtype=info.dtype,
                fill_value=info.fill_value,
                compressors=chunk_codecs(info.itemsize),
                dimension_names=("time", "apex"),
                attributes=attrs,
            )

    async def _stage_inherited(self, name: str) -> None:
        """An inherited variable keeps its groups and array metadata (codecs included);
        only the time axis grows."""
        assert self._base is not None
        root = f"{VERSIONS}/{self.version}"
        proto = default_buffer_prototype()
        for path, doc in self._base.nodes.items():
            if path == name or path.startswith(name + "/"):
                await self._staging.set(f"{root}/{path}/zarr.json", proto.buffer.from_bytes(doc))
        for path, meta in self._base.arrays.items():
            if path.startswith(name + "/"):
                grown = meta.update_shape((int(self.times.size), *meta.shape[1:]))
                buf = grown.to_buffer_dict(proto)["zarr.json"]
                await self._staging.set(f"{root}/{path}/zarr.json", buf)

    async def _copy_staged(self, keys: list[str]) -> None:
        proto = default_buffer_prototype()

        async def one(key: str) -> None:
            buf = await self._staging.get(key, proto)
            if buf is not None:
                await self._store.set(key, buf)

        await asyncio.gather(*(one(k) for k in keys))

    # -- writing ---------------------------------------------------------------------
    @property
    def sink(self) -> ChunkSink:
        """A :class:`ChunkSink` for build workers, seeing the chunks recorded so far."""
        return ChunkSink(
            self.url,
            self.version,
            self.variables,
            self.layouts,
            self.storage_options,
            self._builder.build(),
        )

    def _widen(self, variable: str, level: int, low: float, high: float) -> None:
        """Widen the recorded value range of a variable at a level to hold [low, high]."""
        per = self._ranges.setdefault(variable, {})
        old = per.get(int(level))
        if old is not None:
            low, high = min(low, old[0]), max(high, old[1])
        per[int(level)] = (float(low), float(high))

    def record(self, writes: Iterable[ChunkWrite]) -> None:
        """Enter chunk writes made through a :class:`ChunkSink` in the manifest."""
        for w in writes:
            if w.state == "written":
                self._builder.add(w.array, w.coords)
                if w.low is not None and w.high is not None:
                    variable, level, _ = w.array.split("/")
                    self._widen(variable, int(level), w.low, w.high)
            elif w.state == "dropped":
                self._builder.drop(w.array, w.coords)

    def _check(self, variable: str, level: int) -> tuple[VariableInfo, LevelLayout]:
        if variable not in self.variables:
            raise InvalidInput("variable", variable, f"one of {sorted(self.variables)}")
        if level not in self.layouts:
            raise InvalidInput("level", level, f"one of {list(self.levels)}")
        return self.variables[variable], self.layouts[level]

    def write(self, variable: str, level: int, zones: Any, values: Any, start: int = 0) -> None:
        """Write values ``(time, zone)`` (or ``(zone,)`` for one step) of zones, for the
        time steps from ``start`` on (default: all of them).

        NaN means no data. Zones can be written in any grouping and order: a chunk the
        version holds already (written before, or inherited) is read, updated and
        written back; chunks left holding only no-data are not stored.
        """
        if self.published:
            raise InvalidInput("writer", self.version, "a writer that has not published yet")
        info, lay = self._check(variable, level)
        zones = np.asarray(zones, dtype=np.uint64).ravel()
        vals = np.asarray(values, dtype=np.float64)
        if vals.ndim == 1:
            vals = vals[None, :]
        start = int(start)
        steps = self.times.size - start if vals.shape[0] == 0 else vals.shape[0]
        if not 0 <= start < self.times.size or start + steps > self.times.size:
            raise InvalidInput("start", start, f"a step in [0, {self.times.size - steps}]")
        if start == 0 and vals.shape != (self.times.size, zones.size):
            raise InvalidInput("values", vals.shape, f"shape {(self.times.size, zones.size)}")
        if vals.shape[1] != zones.size:
            raise InvalidInput("values", vals.shape, f"shape (steps, {zones.size})")
        lvl, region, i, j = grid.zone_to_index(zones)
        if zones.size and (np.asarray(lvl) != level).any():
            raise InvalidInput("zones", None, f"zones of level {level} only")
        finite = vals[np.isfinite(vals)]
        if finite.size:
            stored = info.decode(info.encode(finite))  # as stored (packing rounds)
            self._widen(variable, level, float(stored.min()), float(stored.max()))
        plan = plan_cells(
            lay, f"{variable}/{level}", region, i, j, slice(start, start + steps), info.itemsize
        )
        sync(self._write_plan(info, plan, vals))

    async def _write_plan(self, info: VariableInfo, plan: ReadPlan, vals: _Floats) -> None:
        root = f"{VERSIONS}/{self.version}"
        reading = ResolvingStore(self._store, root, self._builder)
        arrays = {}
        for path in {cr.array for cr in plan.reads}:
            arrays[path] = await zasync.open_array(
                store=self._store, path=f"{root}/{path}", mode="r+", zarr_format=3
            )
        sem = asyncio.Semaphore(16)
        # chunks of one shard are read, changed and written back one after the other
        locks: dict[tuple[str, tuple[int, ...]], asyncio.Lock] = {}

        def lock(cr: ChunkRead) -> asyncio.Lock:
            per = self._builder.per_object(cr.array) or (1,) * len(cr.coords)
            obj = tuple(c // p for c, p in zip(cr.coords, per, strict=True))
            return locks.setdefault((cr.array, obj), asyncio.Lock())

        async def one(cr: ChunkRead) -> None:
            arr = arrays[cr.array]
            async with lock(cr), sem:
                owner = self._builder.locate(cr.array, cr.coords)
                if owner is not None:
                    src = AsyncArray(arr.metadata, StorePath(reading, f"{root}/{cr.array}"))
                    cur = info.decode(np.asarray(await src.getitem(cr.selection)))
                else:
                    cur = np.full(tuple(s.stop - s.start for s in cr.selection), np.nan)
                where: tuple[Any, ...] = (cr.in_time, *cr.cells)
                cur[where] = vals[cr.out_time][:, cr.columns]
                sharded = bool(self._builder.per_object(cr.array))
                if np.isfinite(cur).any() or (sharded and owner is not None):
                    # (a chunk emptied inside a shard stays listed with its shard)
                    await arr.setitem(cr.selection, info.encode(cur))
                    self._builder.add(cr.array, cr.coords)
                elif owner is not None:
                    if owner == self.version:
                        await self._store.delete(f"{root}/{cr.array}/{chunk_suffix(cr.coords)}")
                    self._builder.drop(cr.array, cr.coords)

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
            ranges={k: dict(v) for k, v in self._ranges.items()},
        )

    def stored_bytes(self) -> int:
        """Bytes stored under this version so far (all its own objects)."""
        return int(sync(self._store.getsize_prefix(f"{VERSIONS}/{self.version}")))

    def manifest(self) -> Manifest:
        """The manifest as it stands (what :meth:`publish` writes, less the summary)."""
        return self._builder.build()

    def publish(self, now: datetime | None = None) -> str:
        """Write the manifest and metadata, then switch the pointer; returns the version."""
        sync(self._publish(now or datetime.now(UTC)))
        self.published = True
        return self.version

    def _info(self, manifest: Manifest) -> dict[str, Any]:
        return {
            "variables": sorted(self.variables),
            "levels": list(self.levels),
            "time_count": int(self.times.size),
            "time_first": str(self.times[0]) + "Z",
            "time_last": str(self.times[-1]) + "Z",
            "base": self.base_version,
            "chunks_written": manifest.count(self.version),
            "chunks_inherited": manifest.count() - manifest.count(self.version),
            "bytes_written": self.bytes_written,
        }

    async def _publish(self, now: datetime) -> None:
        store = self._store
        root = f"{VERSIONS}/{self.version}"
        self.bytes_written = int(await store.getsize_prefix(root))
        draft = self._builder.build()
        await put_json_atomic(
            store, f"{root}/{MANIFEST_KEY}", draft.to_json() | {"info": self._info(draft)}
        )
        # Array metadata never changes after creation, so the staged copy consolidates
        # exactly what the store holds; only the root document is written again.
        group = await zasync.open_group(store=self._staging, path=root, mode="r+", zarr_format=3)
        await group.update_attributes(self.meta().to_attrs())
        with warnings.catch_warnings():
            # zarr notes that consolidated metadata is not yet in the v3 spec; we rely on
            # it knowingly (one GET opens a version) and document it in cube-format.md.
            warnings.simplefilter("ignore", UserWarning)
            await zasync.consolidate_metadata(self._staging, path=root, zarr_format=3)
        await self._copy_staged([f"{root}/zarr.json"])
        current = await load_pointer(store)
        if current is not None and current.cube_id != self.cube_id:
            raise CubeFormatError("cube_id", self.cube_id, f"{current.cube_id!r}")
        keep, grace = self._retention_args
        retention = None
        if keep is not None or grace is not None:
            base = current.retention if current is not None else Retention()
            retention = Retention(
                int(keep) if keep is not None else base.keep,
                float(grace) if grace is not None else base.grace_seconds,
            )
        pointer, due = publish_pointer(current, self.cube_id, self.version, now, retention)
        await write_pointer(store, pointer)
        await delete_versions(store, pointer, due)

    def abort(self) -> None:
        """Remove this unpublished version (the published one is untouched)."""
        if not self.published:
            sync(self._store.delete_dir(f"{VERSIONS}/{self.version}"))


async def _listdir(store: Store, prefix: str) -> list[str]:
    try:
        return [name async for name in store.list_dir(prefix)]
    except FileNotFoundError:
        return []


def create_cube(url: str, **kwargs: Any) -> CubeWriter:
    """Start a new version of the cube at ``url``; see :class:`CubeWriter`."""
    normalize_url(url)
    return CubeWriter(url, **kwargs)
