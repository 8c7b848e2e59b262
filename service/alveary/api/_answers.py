"""A byte-bounded LRU of encoded answers, and the ASGI front that serves repeats from it.

An answer is stored under its ETag, which is derived from the cube's published version
and the normalised query (and the format): a cached answer is exactly what the same
request would compute again. The front also remembers which raw GET request (path, query
string, Accept) led to which ETag, so an identical repeat, as dashboards send many times a
minute, is answered before routing and parameter parsing, after checking that the cube
still serves the version the answer was made from. A new version makes every old entry
unreachable; they age out of the LRU.
"""

from __future__ import annotations

from collections import OrderedDict
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

__all__ = ["Answer", "AnswerCache", "AnswerFrontMiddleware", "PlanCache", "request_key"]


@dataclass(frozen=True)
class Answer:
    """One encoded answer and what it was made from."""

    cube: str
    version: str
    etag: str
    body: bytes
    media_type: str
    operation: str


def request_key(scope: dict) -> str | None:
    """The cache key of a raw GET request (None for anything else).

    >>> request_key({"method": "GET", "path": "/cubes/c/point", "query_string": b"lat=1",
    ...              "headers": [(b"accept", b"text/csv")]})
    '/cubes/c/point?lat=1|text/csv'
    """
    if scope.get("method") != "GET":
        return None
    accept = b""
    for name, value in scope.get("headers", ()):
        if name == b"accept":
            accept = value
            break
    query = scope.get("query_string", b"").decode("latin-1")
    return f"{scope['path']}?{query}|{accept.decode('latin-1')}"


class AnswerCache:
    """LRU of ETag -> :class:`Answer`, at most ``max_bytes`` of bodies.

    Examples
    --------
    >>> cache = AnswerCache(10)
    >>> cache.put(Answer("c", "v1", '"a"', b"12345", "text/plain", "op"), "GET /a")
    >>> cache.lookup("GET /a").body
    b'12345'
    >>> cache.put(Answer("c", "v1", '"b"', b"123456", "text/plain", "op"))  # evicts "a"
    >>> cache.get('"a"') is None, cache.lookup("GET /a") is None, cache.bytes
    (True, True, 6)
    """

    def __init__(self, max_bytes: int, max_entry_bytes: int | None = None, max_keys: int = 10_000):
        self.max_bytes = int(max_bytes)
        self.max_entry_bytes = int(max_entry_bytes if max_entry_bytes is not None else max_bytes)
        self.max_keys = int(max_keys)
        self._items: OrderedDict[str, Answer] = OrderedDict()
        self._keys: OrderedDict[str, str] = OrderedDict()
        self.bytes = 0
        self.hits = 0
        self.misses = 0

    def get(self, etag: str) -> Answer | None:
        item = self._items.get(etag)
        if item is None:
            self.misses += 1
            return None
        self._items.move_to_end(etag)
        self.hits += 1
        return item

    def lookup(self, key: str) -> Answer | None:
        """The answer a raw request led to before (not counted: the caller checks it)."""
        etag = self._keys.get(key)
        if etag is None:
            return None
        item = self._items.get(etag)
        if item is None:
            del self._keys[key]
            return None
        self._items.move_to_end(etag)
        return item

    def remember(self, key: str, etag: str) -> None:
        self._keys[key] = etag
        self._keys.move_to_end(key)
        while len(self._keys) > self.max_keys:
            self._keys.popitem(last=False)

    def put(self, answer: Answer, key: str | None = None) -> None:
        size = len(answer.body)
        if size > self.max_entry_bytes or size > self.max_bytes:
            return
        old = self._items.pop(answer.etag, None)
        if old is not None:
            self.bytes -= len(old.body)
        self._items[answer.etag] = answer
        self.bytes += size
        while self.bytes > self.max_bytes:
            _, dropped = self._items.popitem(last=False)
            self.bytes -= len(dropped.body)
        if key is not None:
            self.remember(key, answer.etag)


class AnswerFrontMiddleware:
    """Answer an identical repeat of a cube GET from the cache, before routing.

    ``current_version(cube_id)`` returns the version a cube serves now (or None); an entry
    made from another version is not used.
    """

    def __init__(
        self,
        app: Any,
        cache: AnswerCache,
        current_version: Callable[[str], str | None],
        headers: Callable[[str], dict[str, str]],
    ) -> None:
        self.app = app
        self.cache = cache
        self.current_version = current_version
        self.headers = headers

    async def __call__(self, scope: dict, receive: Callable, send: Callable) -> None:
        if scope["type"] == "http" and self.cache.max_bytes and scope["path"].startswith("/cubes/"):
            key = request_key(scope)
            answer = self.cache.lookup(key) if key is not None else None
            if answer is not None and self.current_version(answer.cube) == answer.version:
                self.cache.hits += 1
                scope["alveary.operation"] = answer.operation
                await self._send(answer, scope, send)
                return
        await self.app(scope, receive, send)

    async def _send(self, answer: Answer, scope: dict, send: Callable) -> None:
        inm = None
        for name, value in scope.get("headers", ()):
            if name == b"if-none-match":
                inm = value.decode("latin-1")
        from alveary.api._service import matches

        headers = [(k.lower().encode(), v.encode()) for k, v in self.headers(answer.etag).items()]
        if matches(inm, answer.etag):
            await send({"type": "http.response.start", "status": 304, "headers": headers})
            await send({"type": "http.response.body", "body": b""})
            return
        headers += [
            (b"content-type", answer.media_type.encode()),
            (b"content-length", str(len(answer.body)).encode()),
        ]
        await send({"type": "http.response.start", "status": 200, "headers": headers})
        await send({"type": "http.response.body", "body": answer.body})


def plan_nbytes(plan: Any) -> int:
    """An estimate of the memory a plan holds: its arrays plus per-object overheads."""
    total = 4096
    for name in ("zones", "read_zones", "take"):
        arr = getattr(plan, name, None)
        total += int(getattr(arr, "nbytes", 0))
    for arr in getattr(plan, "extra", {}).values():
        total += int(arr.nbytes)
    for read_plan in getattr(plan, "reads", {}).values():
        for chunk in getattr(read_plan, "reads", ()):
            total += 512 + int(chunk.columns.nbytes) + sum(int(c.nbytes) for c in chunk.cells)
    return total


class PlanCache:
    """LRU of query plans by normalised query (which includes the cube version).

    Plans are pure, so a repeated area query (the same polygon every minute) skips the
    zone enumeration and chunk arithmetic. Bounded by the plans' estimated bytes.

    >>> import numpy as np
    >>> class P:  # a stand-in with the attributes the size estimate reads
    ...     def __init__(self, n): self.zones = np.zeros(n, dtype=np.uint64)
    >>> cache = PlanCache(max_bytes=60_000)
    >>> for key in "abcde":
    ...     cache.put(key, P(1000))  # about 12 KB each: the fifth evicts the first
    >>> cache.get("a") is None, cache.get("e") is not None
    (True, True)
    """

    def __init__(self, max_bytes: int) -> None:
        self.max_bytes = int(max_bytes)
        self._items: OrderedDict[str, tuple[Any, int]] = OrderedDict()
        self.bytes = 0

    def get(self, key: str) -> Any:
        item = self._items.get(key)
        if item is None:
            return None
        self._items.move_to_end(key)
        return item[0]

    def put(self, key: str, plan: Any) -> None:
        size = plan_nbytes(plan)
        if size > self.max_bytes // 4:
            return
        old = self._items.pop(key, None)
        if old is not None:
            self.bytes -= old[1]
        self._items[key] = (plan, size)
        self.bytes += size
        while self.bytes > self.max_bytes:
            _, (_, dropped) = self._items.popitem(last=False)
            self.bytes -= dropped
