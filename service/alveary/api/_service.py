"""The state one app process shares between requests, and the request life cycle.

:class:`Service` holds the catalogue, the chunk cache, the limits and the metrics; its
:meth:`Service.answer` is the path every cube query takes: access -> resolve (no I/O) ->
ETag -> 304 or admission at the cell gate (weighed by an estimate) -> plan (no I/O,
limits checked) -> execute (the only store reads) -> encode.
The native API encodes with :func:`alveary.api._encode.encode`; another surface (OGC API -
EDR) passes its own :data:`Encoder`, and takes the same path otherwise.

Access: every route reaches a cube through :meth:`Service.cube_for` (or lists cubes with
:meth:`Service.cubes_for`), with the request's :class:`Credentials` from
:meth:`Service.credentials`. A private cube the credentials may not read raises the same
:class:`NotFound` as an unknown cube id, so nobody learns that it exists.
"""

from __future__ import annotations

import asyncio
import contextlib
import logging
import sys
import time
from collections.abc import AsyncIterator, Awaitable, Callable, Iterator
from typing import Any

import anyio
import anyio.to_thread
from starlette.responses import Response, StreamingResponse
from starlette.types import Scope

from alveary._errors import (
    AlvearyError,
    ChunkDecodeError,
    DeadlineExceeded,
    NotFound,
    StoreUnavailable,
)
from alveary.api._access import Credentials, presented_key
from alveary.api._answers import Answer, AnswerCache, PlanCache
from alveary.api._encode import encode, encode_blocks
from alveary.api._etag import etag_for, matches
from alveary.api._gate import Busy, CellGate
from alveary.api._metrics import Metrics
from alveary.api._problem import problem_response
from alveary.api._settings import Settings
from alveary.cube import ChunkCache
from alveary.query import (
    BboxQuery,
    Catalog,
    CubeSnapshot,
    CubeSource,
    PixelZoneCache,
    Plan,
    PointQuery,
    PolygonQuery,
    Query,
    Resolved,
    ServedCube,
    StatsResult,
    ZoneResult,
    estimate_cells,
    execute,
    make_plan,
    resolve,
)

__all__ = ["Encoder", "Service"]

log = logging.getLogger("alveary.api")

# Answers with at most this many (zone, time) rows are encoded on the event loop; larger
# ones in a worker thread so that one big answer does not stall small ones; answers over
# the setting stream_rows are sent block by block as they are encoded (chunked transfer), never
# held whole, and not kept in the answer cache.
_INLINE_ROWS = 2_000
# Requests under this many cells never wait at the gate.
_SMALL_CELLS = 20_000
# Seconds a thread holds the GIL while another waits for it (see Service.start).
_SWITCH_INTERVAL = 0.001
# Seconds /readyz may take; past it the answer is "not ready".
READY_DEADLINE = 2.0

#: An answer's encoder: (result, the resolved query) -> (body, media type), or None when
#: the answer is to be "204 No Content" (no body, nothing cached).
Encoder = Callable[[ZoneResult | StatsResult, Resolved], tuple[bytes, str] | None]


class Service:
    """Per-process state: catalogue, chunk cache, limits, metrics, refresh loop."""

    def __init__(self, settings: Settings, catalog: Catalog | None = None) -> None:
        self.settings = settings
        self.limits = settings.limits
        self.catalog = catalog if catalog is not None else Catalog(settings.sources())
        self.keys = settings.key_ring()
        self.cache = ChunkCache(settings.cache_bytes)
        self.answers = AnswerCache(
            settings.answer_cache_bytes, max(settings.answer_cache_bytes // 16, 1)
        )
        self.plans = PlanCache(settings.plan_cache_bytes)
        self.metrics = Metrics(self.catalog, self.cache, self.answers)
        # pixel-to-zone maps of map tiles: another time step of a tile reuses its map
        self.pixels = PixelZoneCache(settings.pixel_cache_bytes)
        self.cache_control = f"public, max-age={settings.max_age}"
        # Area plans enumerate many zones in worker threads: two at a time per process.
        self._planning = asyncio.Semaphore(2)
        self.gate = CellGate(settings.max_cells_in_flight, settings.queue_wait, _SMALL_CELLS)
        # cube id -> object key of the last object a read found missing or unreachable;
        # /readyz fails until the store has it again.
        self.faults: dict[str, str] = {}
        self._refresher: asyncio.Task[None] | None = None

    async def start(self) -> None:
        # Worker threads (planning, decoding, encoding) give the GIL back to the event
        # loop after at most this long, so health probes and small answers are not kept
        # waiting behind a heavy answer (Python's default is 5 ms).
        sys.setswitchinterval(_SWITCH_INTERVAL)
        status = await anyio.to_thread.run_sync(self.catalog.open_all)
        for cube_id, error in status.items():
            if error:
                log.warning("cube %s is not available yet (%s); will retry", cube_id, error)
        self._refresher = asyncio.create_task(self._refresh_loop())

    async def stop(self) -> None:
        if self._refresher is not None:
            self._refresher.cancel()
            with contextlib.suppress(asyncio.CancelledError):
                await self._refresher

    async def _refresh_loop(self) -> None:
        while True:
            await asyncio.sleep(self.settings.refresh_interval)
            try:
                changed = await anyio.to_thread.run_sync(self.catalog.refresh)
            except Exception:
                log.exception("cube refresh failed")
                continue
            for cube_id, flag in changed.items():
                if flag:
                    log.info("cube %s: picked up a new version", cube_id)

    def headers(self, etag: str, cube_id: str) -> dict[str, str]:
        """Caching headers of an answer; a private cube's answers stay out of shared caches."""
        if cube_id in self.keys.private:
            return {
                "ETag": etag,
                "Cache-Control": f"private, max-age={self.settings.max_age}",
                "Vary": "Accept, Authorization, X-API-Key",
            }
        return {"ETag": etag, "Cache-Control": self.cache_control, "Vary": "Accept"}

    # -- access: the one seam between a request and a cube ---------------------------

    async def credentials(self, scope: Scope) -> Credentials:
        """What the request's API key proves (checked once per request and key)."""
        found: Credentials | None = scope.get("alveary.credentials")
        if found is not None:
            return found
        key = presented_key(scope)
        found = self.keys.known(key)
        if found is None:  # a key not seen before: the slow hash, off the event loop
            found = await anyio.to_thread.run_sync(self.keys.check, key)
        scope["alveary.credentials"] = found
        return found

    def readable(self, cube_id: str, credentials: Credentials) -> bool:
        """Whether the credentials may read this cube (it need not exist)."""
        return self.keys.readable(cube_id, credentials)

    def source_for(self, cube_id: str, credentials: Credentials) -> CubeSource:
        """A cube's configuration; :class:`NotFound` if unknown or not readable."""
        if not self.keys.readable(cube_id, credentials):
            raise NotFound("cube", cube_id)
        return self.catalog.source(cube_id)

    def cube_for(self, cube_id: str, credentials: Credentials) -> ServedCube:
        """The open cube; :class:`NotFound` exactly as for an unknown id if these
        credentials may not read it, :class:`StoreUnavailable` if it is not open yet."""
        if not self.keys.readable(cube_id, credentials):
            raise NotFound("cube", cube_id)
        return self.catalog.get(cube_id)

    def cubes_for(self, credentials: Credentials) -> list[tuple[CubeSource, ServedCube | None]]:
        """(source, cube or None) of every configured cube these credentials may read."""
        return [(s, c) for s, c in self.catalog.cubes() if self.keys.readable(s.id, credentials)]

    def current_version(self, cube_id: str) -> str | None:
        """The version a cube serves now (None if it is not open)."""
        try:
            return self.catalog.get(cube_id).snapshot().version
        except AlvearyError:  # unknown, or not reachable yet
            return None

    def served(self, cube_id: str, credentials: Credentials) -> tuple[CubeSource, CubeSnapshot]:
        """One cube's configuration and the version it serves now, through the access
        check: NotFound if unknown or not readable, StoreUnavailable if not open yet."""
        source = self.source_for(cube_id, credentials)
        return source, self.cube_for(cube_id, credentials).snapshot()

    def served_all(self, credentials: Credentials) -> list[tuple[CubeSource, CubeSnapshot]]:
        """Every cube these credentials may read that can be reached now, with the
        version it serves."""
        return [(s, c.snapshot()) for s, c in self.cubes_for(credentials) if c is not None]

    async def answer(
        self,
        cube_id: str,
        query: Query,
        fmt: str,
        if_none_match: str | None,
        *,
        credentials: Credentials,
        geometry: dict[str, Any] | None = None,
        key: str | None = None,
        encoder: Encoder | None = None,
        operation: str | None = None,
    ) -> Response:
        """Run one cube query end to end and build the HTTP response.

        ``credentials`` are the request's (:meth:`credentials`): a cube they may not read
        is not found. ``fmt`` names the encoding (part of the ETag). ``key`` is the raw
        request's cache key (GET requests), for the answer front. ``encoder`` replaces
        the native encoders (``fmt`` must then name what it writes; such answers are
        encoded whole, not streamed); when it returns None the answer is 204 with no
        body. ``operation`` names the operation in the metrics of answers served from
        the cache (default ``query_<op>``).
        """
        self.cube_for(cube_id, credentials)
        resolved = resolve(self.catalog, cube_id, query)
        etag = etag_for(resolved.key, fmt)
        headers = self.headers(etag, cube_id)
        if matches(if_none_match, etag):
            return Response(status_code=304, headers=headers)
        caching = self.answers.max_bytes > 0
        cached = self.answers.get(etag) if caching else None
        if cached is not None:
            if key is not None:
                self.answers.remember(key, etag)
            return Response(cached.body, media_type=cached.media_type, headers=headers)
        # The gate comes before planning (planning a large area takes CPU seconds), weighed
        # by an estimate from the area; a request estimated over what the gate ever admits
        # is over the limits and is planned first, which refuses it cheaply.
        plan: Plan | None = None
        cells = estimate_cells(resolved)
        if cells > self.gate.capacity:
            plan = await self._plan(resolved)
            cells = _cells(plan)
        try:
            weight = await self.gate.acquire(cells)
        except Busy:
            return self.busy()
        handed_over = False
        try:
            if plan is None:
                plan = await self._plan(resolved)
            deadline_at = time.monotonic() + self.settings.deadline
            try:
                result = await execute(plan, self.cache, deadline=self.settings.deadline)
            except (StoreUnavailable, ChunkDecodeError) as exc:
                self.note_fault(cube_id, exc)
                raise
            if encoder is not None:
                written = await self._custom(encoder, result, resolved, deadline_at)
                if written is None:
                    return Response(status_code=204, headers=headers)
                body, media = written
                return self._keep(query, resolved, etag, body, media, key, operation, headers)
            rows = result.rows if isinstance(result, ZoneResult) else 0
            if rows > self.settings.stream_rows:
                blocks, media = encode_blocks(result, fmt, geometry=geometry)
                # The first block is made before the status line goes out, so an error
                # there is still an error response.
                first = await _next_block(blocks, deadline_at)
                stream = self._stream(first or b"", blocks, weight, deadline_at)
                handed_over = True
                return StreamingResponse(stream, media_type=media, headers=headers)
            body, media = await self._encode(result, fmt, geometry, deadline_at)
        finally:
            if not handed_over:
                self.gate.release(weight)
        return self._keep(query, resolved, etag, body, media, key, operation, headers)

    def _keep(
        self,
        query: Query,
        resolved: Resolved,
        etag: str,
        body: bytes,
        media: str,
        key: str | None,
        operation: str | None,
        headers: dict[str, str],
    ) -> Response:
        """Keep an encoded answer in the answer cache (if on) and send it."""
        if self.answers.max_bytes > 0:
            name = operation or f"query_{query.op}"
            answer = Answer(resolved.cube_id, resolved.version, etag, body, media, name)
            self.answers.put_answer(answer, key)
        return Response(body, media_type=media, headers=headers)

    async def cached(
        self,
        cube_id: str,
        version: str,
        etag: str,
        make: Callable[[], Awaitable[tuple[bytes, str]]],
        if_none_match: str | None,
        *,
        key: str | None = None,
        operation: str = "",
    ) -> Response:
        """An answer made by ``make()`` (body, media type) unless the client or the answer
        cache already holds it: 304 on a matching If-None-Match, else the cached body,
        else made now and kept under its ETag (and the raw request ``key``). The caller
        has checked access to the cube (:meth:`cube_for`)."""
        headers = self.headers(etag, cube_id)
        if matches(if_none_match, etag):
            return Response(status_code=304, headers=headers)
        caching = self.answers.max_bytes > 0
        found = self.answers.get(etag) if caching else None
        if found is not None:
            if key is not None:
                self.answers.remember(key, etag)
            return Response(found.body, media_type=found.media_type, headers=headers)
        try:
            body, media = await make()
        except (StoreUnavailable, ChunkDecodeError) as exc:
            self.note_fault(cube_id, exc)
            raise
        if caching:
            self.answers.put_answer(Answer(cube_id, version, etag, body, media, operation), key)
        return Response(body, media_type=media, headers=headers)

    def busy(self) -> Response:
        """503 for a request refused at the gate (too much large work in flight)."""
        return problem_response(
            503,
            "Service busy",
            "Too many large requests are being answered; retry later.",
            headers={"Retry-After": str(self.settings.retry_after)},
        )

    async def _stream(
        self, first: bytes, blocks: Iterator[bytes], weight: int, deadline_at: float
    ) -> AsyncIterator[bytes]:
        """The body of a streamed answer; the gate is released when it ends, however.

        Past the deadline the stream stops without its last chunk, so the client sees a
        broken transfer, never a short answer that looks whole.
        """
        try:
            yield first
            while True:
                block = await _next_block(blocks, deadline_at)
                if not block:
                    if block is None:
                        return
                    continue
                yield block
        finally:
            self.gate.release(weight)

    def note_fault(self, cube_id: str, exc: StoreUnavailable | ChunkDecodeError) -> None:
        """Remember an object the store should have but did not give (for /readyz)."""
        if isinstance(exc, StoreUnavailable) and exc.key is not None:
            self.faults[cube_id] = exc.key

    async def _plan(self, resolved: Resolved) -> Plan:
        """The query's plan: kept for repeats of area queries (they enumerate many zones);
        made off the event loop unless it is a single point."""
        keep = isinstance(resolved.query, BboxQuery | PolygonQuery) and self.plans.max_bytes > 0
        plan = self.plans.get(resolved.key) if keep else None
        if plan is None:
            if isinstance(resolved.query, PointQuery):
                plan = make_plan(resolved, self.limits)
            else:
                async with self._planning:
                    plan = await anyio.to_thread.run_sync(make_plan, resolved, self.limits)
            if keep:
                self.plans.put(resolved.key, plan)
        return plan

    async def _encode(
        self,
        result: ZoneResult | StatsResult,
        fmt: str,
        geometry: dict[str, Any] | None,
        deadline_at: float,
    ) -> tuple[bytes, str]:
        """Small answers are encoded on the event loop, large ones in a worker thread,
        within the request's deadline."""
        rows = result.rows if isinstance(result, ZoneResult) else 0
        if rows <= _INLINE_ROWS:
            return encode(result, fmt, geometry=geometry)
        with anyio.move_on_after(max(0.0, deadline_at - time.monotonic())) as scope:
            return await anyio.to_thread.run_sync(
                lambda: encode(result, fmt, geometry=geometry), abandon_on_cancel=True
            )
        assert scope.cancelled_caught
        raise DeadlineExceeded("the request ran past its deadline while encoding")

    async def _custom(
        self,
        encoder: Encoder,
        result: ZoneResult | StatsResult,
        resolved: Resolved,
        deadline_at: float,
    ) -> tuple[bytes, str] | None:
        """An encoder hook's answer, as :meth:`_encode` (inline if small, else in a worker
        thread within the deadline)."""
        rows = result.rows if isinstance(result, ZoneResult) else 0
        if rows <= _INLINE_ROWS:
            return encoder(result, resolved)
        with anyio.move_on_after(max(0.0, deadline_at - time.monotonic())) as scope:
            return await anyio.to_thread.run_sync(encoder, result, resolved, abandon_on_cancel=True)
        assert scope.cancelled_caught
        raise DeadlineExceeded("the request ran past its deadline while encoding")

    def ready(self) -> dict[str, str | None]:
        """Check every store now (blocking: run off the loop); id -> None or error name.

        A cube whose reads lately found an object missing or unreachable stays not ready
        until the store has that object again.
        """
        self.catalog.refresh()
        status = self.catalog.status()
        for cube_id, key in list(self.faults.items()):
            try:
                cube = self.catalog.get(cube_id)
                present = bool(cube.object_exists(key))  # type: ignore[attr-defined]
            except AlvearyError:
                present = False
            if present:
                self.faults.pop(cube_id, None)
            elif status.get(cube_id) is None:
                status[cube_id] = "StoreUnavailable"
        return status

    async def ready_async(self) -> dict[str, str | None]:
        """:meth:`ready` within :data:`READY_DEADLINE` seconds (past it: every cube is
        reported as unreachable)."""
        with anyio.move_on_after(READY_DEADLINE):
            return await anyio.to_thread.run_sync(self.ready, abandon_on_cancel=True)
        return {cube_id: "DeadlineExceeded" for cube_id in self.catalog.ids()}


def _cells(plan: Plan) -> int:
    """(zone, time step, variable) cells a plan reads."""
    r = plan.resolved
    return int(plan.read_zones.size) * max(1, r.t1 - r.t0) * max(1, len(r.variables))


async def _next_block(blocks: Iterator[bytes], deadline_at: float) -> bytes | None:
    """The next encoded block (made in a worker thread), or None at the end."""
    if time.monotonic() > deadline_at:
        log.warning("a streamed answer ran past its deadline; the transfer is cut short")
        raise DeadlineExceeded("the request ran past its deadline while encoding")
    return await anyio.to_thread.run_sync(next, blocks, None)
