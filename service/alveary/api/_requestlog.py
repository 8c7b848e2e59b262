"""Request ids and the request log: one JSON line per request on ``alveary.access``.

Every response carries ``X-Request-Id``: the client's own if it sent a sane one (1-64
characters of letters, digits and ``._:-``), else a new random one. The same id is in
every problem document (``request_id``) and in the request's log line::

    {"time": "2026-12-02T14:20:00.123Z", "request_id": "8f1c...", "method": "GET",
     "path": "/cubes/rain/point", "status": 200, "duration_ms": 3.1, "cube": "rain",
     "operation": "query_point", "chunk_gets": 2, "bytes_read": 5120, "bytes_sent": 412,
     "client": "192.0.2.4", "key_id": null}

``chunk_gets`` and ``bytes_read`` are the store reads made for this request (0 when the
chunk cache or the answer cache served it); ``bytes_sent`` is the response body.
"""

from __future__ import annotations

import logging
import re
import secrets
import sys
import time
from contextvars import ContextVar
from datetime import UTC, datetime
from typing import Any

import orjson
from starlette.types import ASGIApp, Message, Receive, Scope, Send

from alveary.cube import IOStats, request_io

__all__ = ["REQUEST_ID", "RequestIdFilter", "RequestLogMiddleware", "access_logger"]

#: The id of the request being served (None outside a request).
REQUEST_ID: ContextVar[str | None] = ContextVar("alveary_request_id", default=None)

_SANE = re.compile(rb"^[A-Za-z0-9._:-]{1,64}$")
_CUBE_PARAMS = ("cube", "collectionId", "collection_id")


class RequestIdFilter(logging.Filter):
    """Give every log record ``request``: `` request=<id>`` while a request is served (in
    its threads too), else empty; a format ending in ``%(request)s`` names the request
    a store error or warning happened in."""

    def filter(self, record: logging.LogRecord) -> bool:
        rid = REQUEST_ID.get()
        record.request = f" request={rid}" if rid else ""
        return True


def access_logger() -> logging.Logger:
    """The ``alveary.access`` logger; unless logging was configured for it already
    (``alveary serve`` does), bare JSON lines to standard error."""
    logger = logging.getLogger("alveary.access")
    if not logger.handlers:
        handler = logging.StreamHandler(sys.stderr)
        handler.setFormatter(logging.Formatter("%(message)s"))
        logger.addHandler(handler)
        logger.setLevel(logging.INFO)
        logger.propagate = False
    return logger


def _request_id(scope: Scope) -> str:
    for name, value in scope.get("headers", ()):
        if name == b"x-request-id" and _SANE.match(value):
            return str(value.decode("ascii"))
    return secrets.token_hex(16)


class RequestLogMiddleware:
    """Outermost layer: give the request its id, and log it when the response is done."""

    def __init__(self, app: ASGIApp, logger: logging.Logger | None = None) -> None:
        self.app = app
        self.logger = logger

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return
        rid = _request_id(scope)
        scope["alveary.request_id"] = rid
        header = (b"x-request-id", rid.encode("ascii"))
        io = IOStats()
        state: dict[str, Any] = {"status": 500, "sent": 0}
        start = time.perf_counter()

        async def send_with_id(message: Message) -> None:
            if message["type"] == "http.response.start":
                state["status"] = message["status"]
                message["headers"] = [*message.get("headers", ()), header]
            elif message["type"] == "http.response.body":
                state["sent"] += len(message.get("body", b""))
            await send(message)

        rid_token = REQUEST_ID.set(rid)
        io_token = request_io.set(io)
        try:
            await self.app(scope, receive, send_with_id)
        finally:
            request_io.reset(io_token)
            REQUEST_ID.reset(rid_token)
            if self.logger is not None:
                elapsed = (time.perf_counter() - start) * 1000
                self.logger.info(_line(scope, rid, state, io, elapsed))


def _line(scope: Scope, rid: str, state: dict[str, Any], io: IOStats, ms: float) -> str:
    params = scope.get("path_params") or {}
    cube = scope.get("alveary.cube") or next((params[k] for k in _CUBE_PARAMS if k in params), None)
    route = scope.get("route")
    operation = scope.get("alveary.operation") or getattr(route, "operation_id", None)
    credentials = scope.get("alveary.credentials")
    peer = scope.get("client")
    now = datetime.now(UTC)
    record = {
        "time": now.strftime("%Y-%m-%dT%H:%M:%S.") + f"{now.microsecond // 1000:03d}Z",
        "request_id": rid,
        "method": scope.get("method"),
        "path": scope.get("path"),
        "status": state["status"],
        "duration_ms": round(ms, 3),
        "cube": cube,
        "operation": operation or "unmatched",
        "chunk_gets": io.chunk_gets,
        "bytes_read": io.bytes_read,
        "bytes_sent": state["sent"],
        "client": peer[0] if peer else None,
        "key_id": getattr(credentials, "key_id", None),
    }
    return orjson.dumps(record).decode()
