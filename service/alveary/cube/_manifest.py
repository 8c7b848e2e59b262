"""The manifest of a cube version: which chunks hold data, and which version stores them.

Every version written by this format records, for each of its strip and apex arrays,
the chunks that were written (a chunk never written holds no data) and the version
whose objects hold each one. A version made by appending inherits the unchanged chunks
of the version before it by reference, so its manifest names that older version as the
owner of those chunks. Readers resolve chunk keys through the manifest with
:class:`ResolvingStore`; writers build one with :class:`ManifestBuilder`.

In JSON (``versions/<version>/manifest.json``), each array's chunks are its sorted flat
chunk indices (C order over the array's chunk grid; time is the first, slowest axis, so
an index does not change when the time axis grows) as little-endian uint64 differences,
zlib-compressed and base64-encoded; owners likewise as uint16 indices into ``owners``
(omitted when every chunk belongs to the version itself).
"""

from __future__ import annotations

import base64
import zlib
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from typing import Any, Protocol

import numpy as np
from numpy.typing import NDArray
from zarr.abc.store import ByteRequest, Store
from zarr.core.buffer import Buffer, BufferPrototype, default_buffer_prototype
from zarr.storage import WrapperStore

from alveary._errors import CubeFormatError, StoreUnavailable

__all__ = [
    "MANIFEST_FORMAT",
    "MANIFEST_KEY",
    "ArrayChunks",
    "ChunkLocator",
    "Manifest",
    "ManifestBuilder",
    "ResolvingStore",
    "chunk_suffix",
    "split_chunk_key",
]

MANIFEST_KEY = "manifest.json"
MANIFEST_FORMAT = "alveary-manifest"
_Index = NDArray[np.int64]


def chunk_suffix(coords: Iterable[int]) -> str:
    """The chunk part of a key, zarr v3's default encoding.

    Examples
    --------
    >>> chunk_suffix((0, 2, 1, 0))
    'c/0/2/1/0'
    """
    return "c/" + "/".join(str(int(c)) for c in coords)


def split_chunk_key(key: str) -> tuple[str, tuple[int, ...]] | None:
    """``"sm/6/strips/c/0/2/1/0"`` -> ``("sm/6/strips", (0, 2, 1, 0))``; None if no chunk.

    Examples
    --------
    >>> split_chunk_key("sm/6/apex/c/3/0")
    ('sm/6/apex', (3, 0))
    >>> split_chunk_key("sm/6/strips/zarr.json") is None
    True
    """
    array, sep, rest = key.partition("/c/")
    if not sep:
        return None
    try:
        return array, tuple(int(x) for x in rest.split("/"))
    except ValueError:
        return None


def _pack(values: NDArray[Any], dtype: str) -> str:
    return base64.b64encode(zlib.compress(values.astype(dtype).tobytes(), 6)).decode("ascii")


def _unpack(text: str, dtype: str) -> NDArray[Any]:
    return np.frombuffer(zlib.decompress(base64.b64decode(text)), dtype=dtype)


@dataclass(frozen=True, eq=False)
class ArrayChunks:
    """The chunks of one array that hold data.

    Attributes
    ----------
    grid:
        Number of stored objects along each axis of the array.
    index:
        Sorted flat indices (C order over ``grid``) of the objects that hold data.
    owner:
        For each index, the position of the owning version in :attr:`Manifest.owners`.
    per_object:
        Chunks per stored object along each axis (1 unless the array is sharded).
    """

    grid: tuple[int, ...]
    index: _Index = field(repr=False)
    owner: NDArray[np.uint16] = field(repr=False)
    per_object: tuple[int, ...] = ()

    def flat(self, coords: Iterable[int]) -> int:
        """Flat index of the object holding the chunk at ``coords`` (-1: off the grid)."""
        c = [int(x) for x in coords]
        if len(c) != len(self.grid):
            return -1
        if self.per_object:
            c = [a // b for a, b in zip(c, self.per_object, strict=True)]
        if any(a < 0 for a in c) or any(a >= g for a, g in zip(c[1:], self.grid[1:], strict=True)):
            return -1
        flat = 0
        for a, g in zip(c, self.grid, strict=True):
            flat = flat * g + a
        return flat

    def position(self, coords: Iterable[int]) -> int:
        """Position of the chunk in :attr:`index`, or -1 if it was never written."""
        f = self.flat(coords)
        if f < 0 or self.index.size == 0:
            return -1
        k = int(np.searchsorted(self.index, f))
        return k if k < self.index.size and int(self.index[k]) == f else -1

    def to_json(self) -> dict[str, Any]:
        out: dict[str, Any] = {
            "grid": list(self.grid),
            "count": int(self.index.size),
            "chunks": _pack(np.diff(self.index, prepend=np.int64(0)), "<u8"),
        }
        if self.owner.size and int(self.owner.max()) > 0:
            out["owners"] = _pack(self.owner, "<u2")
        if self.per_object and any(p != 1 for p in self.per_object):
            out["chunks_per_object"] = list(self.per_object)
        return out

    @classmethod
    def from_json(cls, data: Mapping[str, Any]) -> ArrayChunks:
        index = np.cumsum(_unpack(str(data["chunks"]), "<u8")).astype(np.int64)
        if index.size != int(data["count"]):
            raise CubeFormatError("manifest", data.get("count"), "a chunk count matching its list")
        owners = data.get("owners")
        owner = (
            _unpack(str(owners), "<u2").astype(np.uint16)
            if owners is not None
            else np.zeros(index.size, dtype=np.uint16)
        )
        grid = tuple(int(g) for g in data["grid"])
        per = tuple(int(p) for p in data.get("chunks_per_object", [1] * len(grid)))
        return cls(grid, index, owner, per)


class ChunkLocator(Protocol):
    """Anything that says which version stores a chunk of a version (None: unwritten).

    ``coords`` are chunk coordinates; ``per_object`` gives the chunks per stored object
    along each axis (empty: one chunk per object).
    """

    def locate(self, array: str, coords: tuple[int, ...]) -> str | None: ...

    def knows(self, array: str) -> bool: ...

    def per_object(self, array: str) -> tuple[int, ...]: ...


@dataclass(frozen=True, eq=False)
class Manifest:
    """Which chunks of a version hold data, and which version's objects store them.

    Examples
    --------
    >>> import json
    >>> b = ManifestBuilder("v2", {"t/1/apex": (3, 1)})
    >>> b.add("t/1/apex", (2, 0))
    >>> m = b.build()
    >>> m.written("t/1/apex", (2, 0)), m.written("t/1/apex", (0, 0))
    (True, False)
    >>> Manifest.from_json(json.loads(json.dumps(m.to_json()))).locate("t/1/apex", (2, 0))
    'v2'
    """

    version: str
    owners: tuple[str, ...]
    arrays: dict[str, ArrayChunks]
    info: dict[str, Any] = field(default_factory=dict)

    def knows(self, array: str) -> bool:
        return array in self.arrays

    def written(self, array: str, coords: Iterable[int]) -> bool:
        """True if the chunk at ``coords`` of ``array`` (e.g. ``"sm/6/strips"``) holds data.

        Pure and cheap (a binary search). An array this version does not have, or
        coordinates off its grid, are not written.
        """
        entry = self.arrays.get(array)
        return entry is not None and entry.position(coords) >= 0

    def locate(self, array: str, coords: tuple[int, ...]) -> str | None:
        """The version whose objects store the chunk, or None if it was never written."""
        entry = self.arrays.get(array)
        if entry is None:
            return None
        k = entry.position(coords)
        return None if k < 0 else self.owners[int(entry.owner[k])]

    def objects(self, array: str) -> NDArray[np.int64]:
        """Coordinates ``(m, ndim)`` of the stored objects of ``array`` (chunks, or shards
        of a sharded array) that hold data, as in their keys."""
        entry = self.arrays.get(array)
        if entry is None or entry.index.size == 0:
            return np.zeros((0, len(entry.grid) if entry else 0), dtype=np.int64)
        return np.stack(np.unravel_index(entry.index, entry.grid), axis=1).astype(np.int64)

    def chunks(self, array: str) -> NDArray[np.int64]:
        """Coordinates ``(m, ndim)`` of the first chunk of each object that holds data
        (the objects themselves unless the array is sharded)."""
        entry = self.arrays.get(array)
        objects = self.objects(array)
        if entry is None or not entry.per_object:
            return objects
        return objects * np.asarray(entry.per_object, dtype=np.int64)[None, :]

    def per_object(self, array: str) -> tuple[int, ...]:
        entry = self.arrays.get(array)
        return entry.per_object if entry is not None else ()

    def referenced(self) -> dict[str, set[str]]:
        """Per owning version, the object keys (relative to that version) this one uses."""
        out: dict[str, set[str]] = {}
        for array, entry in self.arrays.items():
            coords = self.objects(array).tolist()
            for obj, k in zip(coords, entry.owner.tolist(), strict=True):
                out.setdefault(self.owners[k], set()).add(f"{array}/{chunk_suffix(obj)}")
        return out

    def count(self, owner: str | None = None) -> int:
        """Chunks listed (only those stored by ``owner`` if given)."""
        if owner is None:
            return int(sum(e.index.size for e in self.arrays.values()))
        if owner not in self.owners:
            return 0
        k = self.owners.index(owner)
        return int(sum(int((e.owner == k).sum()) for e in self.arrays.values()))

    def to_json(self) -> dict[str, Any]:
        return {
            "format": MANIFEST_FORMAT,
            "manifest_version": 1,
            "version": self.version,
            "owners": list(self.owners),
            "arrays": {k: v.to_json() for k, v in sorted(self.arrays.items())},
            "info": self.info,
        }

    @classmethod
    def from_json(cls, data: Mapping[str, Any]) -> Manifest:
        if data.get("format") != MANIFEST_FORMAT:
            raise CubeFormatError(MANIFEST_KEY, data.get("format"), MANIFEST_FORMAT)
        try:
            owners = tuple(str(o) for o in data["owners"])
            arrays = {str(k): ArrayChunks.from_json(v) for k, v in data["arrays"].items()}
            if any(e.owner.size and int(e.owner.max()) >= len(owners) for e in arrays.values()):
                raise ValueError("owner index out of range")
            return cls(str(data["version"]), owners, arrays, dict(data.get("info", {})))
        except (KeyError, TypeError, ValueError, zlib.error) as exc:
            raise CubeFormatError("manifest", str(exc), "a complete manifest") from None


class ManifestBuilder:
    """A manifest in the making: inherited chunks, then this version's own writes.

    ``grids`` gives each array's object grid in the new version; arrays may be added.
    """

    def __init__(self, version: str, grids: Mapping[str, tuple[int, ...]]) -> None:
        self.version = version
        self.grids = {k: tuple(int(x) for x in v) for k, v in grids.items()}
        self.objects_per: dict[str, tuple[int, ...]] = {}
        self._owners: list[str] = [version]
        self._chunks: dict[str, dict[int, int]] = {k: {} for k in self.grids}

    def inherit(self, base: Manifest) -> None:
        """Take over every chunk of ``base`` for the arrays this version also has."""
        for array, entry in base.arrays.items():
            if array not in self.grids:
                continue
            chunks = self._chunks[array]
            for flat, k in zip(entry.index.tolist(), entry.owner.tolist(), strict=True):
                chunks[flat] = self._owner_index(base.owners[k])

    def _owner_index(self, owner: str) -> int:
        if owner not in self._owners:
            self._owners.append(owner)
        return self._owners.index(owner)

    def _flat(self, array: str, coords: Iterable[int]) -> int:
        per = self.objects_per.get(array, ())
        probe = ArrayChunks(self.grids[array], np.zeros(0, np.int64), np.zeros(0, np.uint16), per)
        flat = probe.flat(coords)
        if flat < 0:
            raise CubeFormatError("chunk", (array, tuple(coords)), f"a chunk of grid {probe.grid}")
        return flat

    def add(self, array: str, coords: Iterable[int], owner: str | None = None) -> None:
        """Record a chunk as written (by this version unless ``owner`` says otherwise)."""
        flat = self._flat(array, coords)
        self._chunks[array][flat] = self._owner_index(owner or self.version)

    def drop(self, array: str, coords: Iterable[int]) -> None:
        """Record a chunk as holding no data in this version."""
        self._chunks[array].pop(self._flat(array, coords), None)

    def knows(self, array: str) -> bool:
        return array in self.grids

    def per_object(self, array: str) -> tuple[int, ...]:
        return self.objects_per.get(array, ())

    def locate(self, array: str, coords: tuple[int, ...]) -> str | None:
        chunks = self._chunks.get(array)
        if chunks is None:
            return None
        k = chunks.get(self._flat(array, coords))
        return None if k is None else self._owners[k]

    def build(self, info: Mapping[str, Any] | None = None) -> Manifest:
        """The manifest as it stands (owners that no chunk uses are left out)."""
        used = sorted({k for chunks in self._chunks.values() for k in chunks.values()} | {0})
        remap = np.zeros(len(self._owners), dtype=np.uint16)
        remap[used] = np.arange(len(used), dtype=np.uint16)
        arrays = {}
        for array, chunks in self._chunks.items():
            index = np.fromiter(sorted(chunks), dtype=np.int64, count=len(chunks))
            owner = remap[np.array([chunks[i] for i in index.tolist()], dtype=np.int64)]
            per = self.objects_per.get(array, ())
            arrays[array] = ArrayChunks(self.grids[array], index, owner.astype(np.uint16), per)
        owners = tuple(self._owners[k] for k in used)
        return Manifest(self.version, owners, arrays, dict(info or {}))


class ResolvingStore(WrapperStore[Store]):
    """A read-only view of one version whose chunk keys are resolved through a manifest.

    A GET of ``<root>/<array>/c/<coords>`` goes to the version that stores the chunk;
    a chunk the manifest says was never written is answered as missing without any
    request; a chunk it lists that the store does not have raises
    :class:`alveary.StoreUnavailable` (a fault of the store, never "no data").
    Other keys (metadata, the time axis) pass through unchanged.
    """

    def __init__(self, store: Store, root: str, locator: ChunkLocator) -> None:
        super().__init__(store)
        self.root = root.rstrip("/")
        self.locator = locator
        self._versions = self.root.rsplit("/", 1)[0]

    def _with_store(self, store: Store) -> ResolvingStore:
        return type(self)(store, self.root, self.locator)

    def resolve(self, key: str) -> tuple[str | None, bool]:
        """``(key to fetch or None if unwritten, whether the manifest vouches for it)``."""
        if not key.startswith(self.root + "/"):
            return key, False
        parsed = split_chunk_key(key[len(self.root) + 1 :])
        if parsed is None or not self.locator.knows(parsed[0]):
            return key, False
        array, coords = parsed
        per = self.locator.per_object(array)
        first = tuple(c * p for c, p in zip(coords, per, strict=True)) if per else coords
        owner = self.locator.locate(array, first)
        if owner is None:
            return None, False
        return f"{self._versions}/{owner}/{array}/{chunk_suffix(coords)}", True

    async def get(
        self,
        key: str,
        prototype: BufferPrototype | None = None,
        byte_range: ByteRequest | None = None,
    ) -> Buffer | None:
        target, listed = self.resolve(key)
        if target is None:
            return None
        value = await self._store.get(target, prototype or default_buffer_prototype(), byte_range)
        if value is None and listed:
            raise StoreUnavailable(
                f"chunk {key!r} is listed in the version's manifest but the store has no "
                f"object {target!r}"
            )
        return value

    async def get_partial_values(
        self,
        prototype: BufferPrototype,
        key_ranges: Iterable[tuple[str, ByteRequest | None]],
    ) -> list[Buffer | None]:
        return [await self.get(k, prototype, r) for k, r in key_ranges]

    async def exists(self, key: str) -> bool:
        target, _ = self.resolve(key)
        return target is not None and await self._store.exists(target)
