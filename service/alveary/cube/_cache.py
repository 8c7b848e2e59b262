"""Byte-bounded LRU caches (decoded chunks, and any other sized values), and the I/O
counters of cube reads."""

from __future__ import annotations

import threading
from collections.abc import Callable, Hashable
from contextvars import ContextVar
from typing import Generic, TypeVar

import cachetools
import numpy as np

from alveary._errors import InvalidInput

__all__ = ["ByteLRU", "ChunkCache", "IOStats", "io_totals", "request_io"]


K = TypeVar("K", bound=Hashable)
V = TypeVar("V")


class _CountingLRU(cachetools.LRUCache[K, V]):
    """cachetools' LRU, counting what it evicts to make room."""

    evictions = 0

    def popitem(self) -> tuple[K, V]:
        item = super().popitem()
        self.evictions += 1
        return item


class ByteLRU(Generic[K, V]):
    """A least-recently-used map bounded by the bytes of its values, safe across threads.

    cachetools' ``LRUCache`` with ``getsizeof`` does the bounding; this adds the counters
    the metrics export. A value larger than ``max_entry_bytes`` (default: ``max_bytes``)
    is not kept. :meth:`get` counts a hit or a miss; :meth:`peek` counts nothing.

    Attributes
    ----------
    hits, misses:
        Counters since creation (``evictions`` and ``bytes`` are properties).

    Examples
    --------
    >>> lru = ByteLRU(10, len)
    >>> lru.put("a", b"12345"); lru.put("b", b"123456")  # the second evicts the first
    >>> lru.get("a"), lru.get("b"), lru.bytes, (lru.hits, lru.misses, lru.evictions)
    (None, b'123456', 6, (1, 1, 1))
    """

    def __init__(
        self, max_bytes: int, sizeof: Callable[[V], int], max_entry_bytes: int | None = None
    ) -> None:
        if not isinstance(max_bytes, int | np.integer) or max_bytes < 0:
            raise InvalidInput("max_bytes", max_bytes, "an integer >= 0")
        self.max_bytes = int(max_bytes)
        limit = self.max_bytes if max_entry_bytes is None else min(max_entry_bytes, max_bytes)
        self.max_entry_bytes = int(limit)
        self._sizeof = sizeof
        self._items: _CountingLRU[K, V] = _CountingLRU(self.max_bytes, sizeof)
        self._lock = threading.Lock()
        self.hits = 0
        self.misses = 0

    def __len__(self) -> int:
        return len(self._items)

    @property
    def bytes(self) -> int:
        """Bytes currently held."""
        return int(self._items.currsize)

    @property
    def evictions(self) -> int:
        """Entries dropped to make room, since creation."""
        return self._items.evictions

    def peek(self, key: K) -> V | None:
        """The value (made the most recent), not counted."""
        with self._lock:
            return self._items.get(key)

    def get_all(self, keys: list[K]) -> list[V] | None:
        """The values of every key, counted as hits; None (nothing counted) if any is
        missing."""
        with self._lock:
            values = [self._items.get(key) for key in keys]
            if any(v is None for v in values):
                return None
            self.hits += len(values)
            return values  # type: ignore[return-value]

    def get(self, key: K) -> V | None:
        """The value, or None; counted as a hit or a miss."""
        with self._lock:
            value = self._items.get(key)
            if value is None:
                self.misses += 1
            else:
                self.hits += 1
            return value

    def put(self, key: K, value: V) -> None:
        """Keep a value, evicting the least recently used ones to make room."""
        if self._sizeof(value) > self.max_entry_bytes:
            return
        with self._lock:
            self._items[key] = value

    def clear(self) -> None:
        """Drop every entry (counters are kept)."""
        with self._lock:
            evictions = self._items.evictions
            self._items.clear()
            self._items.evictions = evictions


def _nbytes(value: np.ndarray) -> int:
    return int(value.nbytes)


class ChunkCache(ByteLRU[Hashable, np.ndarray]):
    """A least-recently-used cache of decoded chunks, bounded in bytes.

    One cache can be shared by many cubes and threads: keys carry the cube url, the
    published version and the chunk key, so a new version never hits an old entry.
    A chunk larger than ``max_bytes`` is not cached; a cached chunk is read-only.

    Examples
    --------
    >>> cache = ChunkCache(max_bytes=100)
    >>> cache.put(("u", "v1", "sm/6/strips", (0, 0, 0, 0)), np.zeros(10))
    >>> cache.get(("u", "v1", "sm/6/strips", (0, 0, 0, 0))).shape
    (10,)
    >>> cache.get(("u", "v2", "sm/6/strips", (0, 0, 0, 0))) is None
    True
    >>> cache.hits, cache.misses, cache.bytes
    (1, 1, 80)
    >>> cache.put("b", np.zeros(5))  # 80 + 40 bytes > 100: the older entry goes
    >>> len(cache), cache.bytes, cache.evictions
    (1, 40, 1)
    """

    def __init__(self, max_bytes: int) -> None:
        super().__init__(max_bytes, _nbytes)

    def put(self, key: Hashable, value: np.ndarray) -> None:
        """Store a chunk (made read-only), evicting the least recently used ones."""
        if _nbytes(value) <= self.max_entry_bytes:
            value.setflags(write=False)
            super().put(key, value)

    def stats(self) -> dict[str, int]:
        """Counters as a dict: hits, misses, evictions, bytes, items, max_bytes."""
        return {
            "hits": self.hits,
            "misses": self.misses,
            "evictions": self.evictions,
            "bytes": self.bytes,
            "items": len(self),
            "max_bytes": self.max_bytes,
        }


class IOStats:
    """Counters of store requests made while reading cubes.

    Attributes
    ----------
    requests:
        Every GET sent to the store (metadata, version pointer and chunks).
    chunk_gets:
        GETs of data chunks (strip and apex arrays; not the time axis).
    chunks_missing:
        Chunk GETs that found no object (an unwritten, all-no-data chunk).
    bytes_read:
        Bytes received (encoded, as stored).

    Examples
    --------
    >>> s = IOStats()
    >>> s.add(key="sm/6/strips/c/0/0/0/0", nbytes=120)
    >>> s.snapshot()
    {'requests': 1, 'chunk_gets': 1, 'chunks_missing': 0, 'bytes_read': 120}
    """

    __slots__ = ("_lock", "bytes_read", "chunk_gets", "chunks_missing", "requests")

    def __init__(self) -> None:
        self._lock = threading.Lock()
        self.requests = 0
        self.chunk_gets = 0
        self.chunks_missing = 0
        self.bytes_read = 0

    def add(self, key: str, nbytes: int | None) -> None:
        """Count one GET of ``key`` that returned ``nbytes`` (None: no such object)."""
        is_chunk = "/strips/c/" in key or "/apex/c/" in key
        with self._lock:
            self.requests += 1
            if is_chunk:
                self.chunk_gets += 1
                if nbytes is None:
                    self.chunks_missing += 1
            if nbytes:
                self.bytes_read += int(nbytes)

    def snapshot(self) -> dict[str, int]:
        with self._lock:
            return {
                "requests": self.requests,
                "chunk_gets": self.chunk_gets,
                "chunks_missing": self.chunks_missing,
                "bytes_read": self.bytes_read,
            }

    def __repr__(self) -> str:
        return f"IOStats({self.snapshot()})"


#: Totals over every cube opened in this process (what ``/metrics`` can export).
io_totals = IOStats()

#: The counters of the request being served, if its caller set them (the HTTP layer does,
#: for its request log); store reads made on the request's behalf also count there.
request_io: ContextVar[IOStats | None] = ContextVar("alveary_request_io", default=None)
