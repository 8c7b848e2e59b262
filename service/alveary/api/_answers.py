"""A byte-bounded LRU of encoded answers, and the ASGI front that serves repeats from it.

An answer is stored under its ETag, which is derived from the cube's published version
and the normalised query (and the format): a cached answer is exactly what the same
request would compute again. The front also remembers which raw GET request (path, query
string, Accept) led to which ETag, so an identical repeat, as dashboards send many times a
minute, is answered before routing and parameter parsing, after checking that the
requester may read the cube (else the request goes on to routing, which answers 404 as
for an unknown cube) and that the cube still serves the version the answer was made from.
A new version makes every old entry unreachable; they age out of the LRU.
"""

from __future__ import annotations

from collections.abc import Awaitable, Callable
from dataclasses import dataclass

import cachetools
from starlette.types import ASGIApp, Receive, Scope, Send

from alveary.api._access import Credentials
from alveary.api._etag import matches
from alveary.cube import ByteLRU
from alveary.query import Plan

__all__ = [
    "Answer",
    "AnswerCache",
    "AnswerFrontMiddleware",
    "PlanCache",
    "request_key",
]

# Paths under which answers are cached: the native cube queries and the EDR queries.
_QUERY_PREFIXES = ("/cubes/", "/collections/")


@dataclass(frozen=True)
class Answer:
    """One encoded answer and what it was made from."""

    cube: str
    version: str
    etag: str
    body: bytes
    media_type: str
    operation: str


def request_key(scope: Scope) -> str | None:
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


class AnswerCache(ByteLRU[str, Answer]):
    """LRU of ETag -> :class:`Answer`, at most ``max_bytes`` of bodies, and the raw
    requests (at most ``max_keys``) that led to each ETag.

    Examples
    --------
    >>> cache = AnswerCache(10)
    >>> cache.put_answer(Answer("c", "v1", '"a"', b"12345", "text/plain", "op"), "GET /a")
    >>> cache.lookup("GET /a").body
    b'12345'
    >>> cache.put_answer(Answer("c", "v1", '"b"', b"123456", "text/plain", "op"))
    >>> cache.get('"a"') is None, cache.lookup("GET /a") is None, cache.bytes
    (True, True, 6)
    """

    def __init__(self, max_bytes: int, max_entry_bytes: int | None = None, max_keys: int = 10_000):
        super().__init__(max_bytes, _body_size, max_entry_bytes)
        self._keys: cachetools.LRUCache[str, str] = cachetools.LRUCache(max_keys)

    def lookup(self, key: str) -> Answer | None:
        """The answer a raw request led to before (not counted: the caller checks it)."""
        etag = self._keys.get(key)
        return None if etag is None else self.peek(etag)

    def remember(self, key: str, etag: str) -> None:
        self._keys[key] = etag

    def put_answer(self, answer: Answer, key: str | None = None) -> None:
        self.put(answer.etag, answer)
        if key is not None:
            self.remember(key, answer.etag)


def _body_size(answer: Answer) -> int:
    return len(answer.body)


class AnswerFrontMiddleware:
    """Answer an identical repeat of a cube GET (native or EDR query) from the cache,
    before routing.

    ``current_version(cube_id)`` returns the version a cube serves now (or None); an entry
    made from another version is not used. ``credentials(scope)`` and
    ``readable(cube_id, credentials)`` are the service's access check: an entry of a cube
    the requester may not read is not used. ``headers(etag, cube_id)`` gives the caching
    headers.
    """

    def __init__(
        self,
        app: ASGIApp,
        cache: AnswerCache,
        current_version: Callable[[str], str | None],
        headers: Callable[[str, str], dict[str, str]],
        credentials: Callable[[Scope], Awaitable[Credentials]],
        readable: Callable[[str, Credentials], bool],
    ) -> None:
        self.app = app
        self.cache = cache
        self.current_version = current_version
        self.headers = headers
        self.credentials = credentials
        self.readable = readable

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if (
            scope["type"] == "http"
            and self.cache.max_bytes
            and scope["path"].startswith(_QUERY_PREFIXES)
        ):
            key = request_key(scope)
            answer = self.cache.lookup(key) if key is not None else None
            if (
                answer is not None
                and self.readable(answer.cube, await self.credentials(scope))
                and self.current_version(answer.cube) == answer.version
            ):
                self.cache.hits += 1
                scope["alveary.operation"] = answer.operation
                scope["alveary.cube"] = answer.cube
                await self._send(answer, scope, send)
                return
        await self.app(scope, receive, send)

    async def _send(self, answer: Answer, scope: Scope, send: Send) -> None:
        inm = None
        for name, value in scope.get("headers", ()):
            if name == b"if-none-match":
                inm = value.decode("latin-1")
        pairs = self.headers(answer.etag, answer.cube).items()
        headers = [(k.lower().encode(), v.encode()) for k, v in pairs]
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


class PlanCache(ByteLRU[str, Plan]):
    """LRU of query plans by normalised query (which includes the cube version).

    Plans are pure, so a repeated area query (the same polygon every minute) skips the
    zone enumeration and chunk arithmetic. Bounded by the plans' estimated bytes
    (:attr:`alveary.query.Plan.nbytes`); one plan may take at most a quarter.
    """

    def __init__(self, max_bytes: int) -> None:
        super().__init__(max_bytes, _plan_size, max_bytes // 4)


def _plan_size(plan: Plan) -> int:
    return plan.nbytes
