"""Errors as application/problem+json (RFC 9457), and the one table from errors to status.

Every error a client sees is a problem document with ``type``, ``title``, ``status`` and
``detail``; input errors also name the ``parameter``, the offending ``value`` and what is
``allowed``; limit errors name the ``limit``, the ``requested`` amount and the ``maximum``.
Nothing else is passed on: no stack trace, no internal path, no store URL or credential.
"""

from __future__ import annotations

import logging
from typing import Any

import orjson
from fastapi import FastAPI, Request
from fastapi.exceptions import RequestValidationError
from starlette.exceptions import HTTPException as StarletteHTTPException
from starlette.responses import Response

from alveary._errors import (
    AlvearyError,
    ChunkDecodeError,
    DeadlineExceeded,
    InvalidInput,
    LimitExceeded,
    NotFound,
    StoreUnavailable,
)

__all__ = ["PROBLEM", "STATUS", "install_handlers", "problem_response", "status_for"]

log = logging.getLogger("alveary.api")

PROBLEM = "application/problem+json"

#: The one table from the domain error hierarchy to HTTP status and title. The first
#: entry that matches (isinstance) wins, so subclasses come before their bases.
STATUS: tuple[tuple[type[BaseException], int, str], ...] = (
    (LimitExceeded, 413, "Request over a configured limit"),
    (InvalidInput, 422, "Invalid parameter"),
    (NotFound, 404, "Not found"),
    (StoreUnavailable, 503, "Store unavailable"),
    (ChunkDecodeError, 502, "Stored data cannot be decoded"),
    (DeadlineExceeded, 504, "Request deadline exceeded"),
    (AlvearyError, 500, "Internal error"),
)


def status_for(exc: BaseException) -> tuple[int, str]:
    """HTTP status and title for a domain error.

    >>> status_for(NotFound("cube", "x"))
    (404, 'Not found')
    """
    for cls, status, title in STATUS:
        if isinstance(exc, cls):
            return status, title
    return 500, "Internal error"


def _jsonable(value: Any) -> Any:
    try:
        orjson.dumps(value, option=orjson.OPT_SERIALIZE_NUMPY)
    except TypeError:
        return str(value)
    return value


def problem_response(
    status: int,
    title: str,
    detail: str,
    *,
    headers: dict[str, str] | None = None,
    **members: Any,
) -> Response:
    """A problem+json response; extra members are added when not None."""
    body: dict[str, Any] = {
        "type": "about:blank",
        "title": title,
        "status": status,
        "detail": detail,
    }
    body.update({k: _jsonable(v) for k, v in members.items() if v is not None})
    content = orjson.dumps(body, option=orjson.OPT_SERIALIZE_NUMPY | orjson.OPT_NON_STR_KEYS)
    return Response(content, status_code=status, media_type=PROBLEM, headers=headers)


def _domain(exc: AlvearyError, retry_after: int) -> Response:
    status, title = status_for(exc)
    headers = {"Retry-After": str(retry_after)} if status == 503 else None
    if isinstance(exc, InvalidInput):
        value = exc.value
        if isinstance(value, str) and len(value) > 200:
            value = value[:197] + "..."
        return problem_response(
            status,
            title,
            exc.message,
            parameter=exc.parameter,
            value=value,
            allowed=exc.allowed,
            index=exc.index,
        )
    if isinstance(exc, LimitExceeded):
        return problem_response(
            status,
            title,
            exc.message,
            limit=exc.limit,
            requested=exc.requested,
            maximum=exc.maximum,
        )
    if isinstance(exc, NotFound):
        return problem_response(status, title, exc.message, kind=exc.kind, name=str(exc.name))
    # Store and decode errors may carry URLs or paths: the client only gets the title.
    log.warning("%s: %s", type(exc).__name__, exc)
    details = {
        503: "The data store cannot be reached; retry later.",
        502: "A stored chunk cannot be decoded.",
        504: "The request ran past its deadline.",
    }
    return problem_response(status, title, details.get(status, "Internal error."), headers=headers)


# The declared range of each bounded parameter, to name the whole range in errors.
_RANGES = {
    "lat": "[-90, 90] degrees",
    "lon": "[-180, 180] degrees",
    "level": "integers in [0, 24]",
    "k": "integers in [0, 10000] (and at most the configured max_k)",
    "meters": "[0, 20037509] metres",
    "f": "json, geojson, arrow or csv",
}
_OPS = {"ge": ">=", "gt": ">", "le": "<=", "lt": "<"}


def _validation_detail(exc: RequestValidationError) -> dict[str, Any]:
    errors = exc.errors()
    first = errors[0] if errors else {}
    loc = [str(p) for p in first.get("loc", ()) if p not in ("query", "path", "body", "header")]
    parameter = ".".join(loc) or "request"
    msg = str(first.get("msg", "invalid"))
    ctx = first.get("ctx") or {}
    allowed = _RANGES.get(parameter)
    if allowed is None:
        allowed = ", ".join(f"{_OPS[k]} {v}" for k, v in ctx.items() if k in _OPS) or None
    if allowed is None and "expected" in ctx:
        allowed = str(ctx["expected"])
    value = first.get("input")
    if isinstance(value, (dict, list)):
        value = None
    return {
        "detail": f"{parameter}: {msg}" + (f"; allowed: {allowed}" if allowed else ""),
        "parameter": parameter,
        "value": value,
        "allowed": allowed,
    }


def install_handlers(app: FastAPI, retry_after: int) -> None:
    """Route every exception to a problem+json response."""

    @app.exception_handler(AlvearyError)
    async def _alveary(request: Request, exc: AlvearyError) -> Response:
        return _domain(exc, retry_after)

    @app.exception_handler(RequestValidationError)
    async def _validation(request: Request, exc: RequestValidationError) -> Response:
        info = _validation_detail(exc)
        return problem_response(422, "Invalid parameter", info.pop("detail"), **info)

    @app.exception_handler(StarletteHTTPException)
    async def _http(request: Request, exc: StarletteHTTPException) -> Response:
        titles = {404: "Not found", 405: "Method not allowed", 413: "Request body too large"}
        title = titles.get(exc.status_code, "HTTP error")
        detail = exc.detail if isinstance(exc.detail, str) else title
        return problem_response(
            exc.status_code, title, detail, headers=getattr(exc, "headers", None)
        )

    @app.exception_handler(Exception)
    async def _unexpected(request: Request, exc: Exception) -> Response:
        log.exception("unhandled error on %s", request.url.path)
        return problem_response(500, "Internal error", "An unexpected error occurred.")
