"""Errors as application/problem+json (RFC 9457), with status and title from the one table
(:data:`alveary._errors.HTTP_STATUS`).

Every error a client sees is a problem document with ``type``, ``title``, ``status``,
``detail`` and the ``request_id`` of the request (also its ``X-Request-Id`` header);
input errors also name the ``parameter``, the offending ``value`` and what is
``allowed``; limit errors name the ``limit``, the ``requested`` amount and the
``maximum``.
Nothing else is passed on: no stack trace, no internal path, no store URL or credential.
"""

from __future__ import annotations

import logging
from http import HTTPStatus
from typing import Any

import orjson
from fastapi import FastAPI, Request
from fastapi.exceptions import RequestValidationError
from starlette.exceptions import HTTPException as StarletteHTTPException
from starlette.responses import Response

from alveary import grid
from alveary._context import REQUEST_ID
from alveary._errors import (
    HTTP_STATUS,
    AlvearyError,
    ChunkDecodeError,
    DeadlineExceeded,
    InvalidInput,
    LimitExceeded,
    NotFound,
    RateLimited,
    StoreUnavailable,
    http_status,
)
from alveary.api._edr_problem import EXCEPTION_CODES

__all__ = ["PROBLEM", "domain_response", "install_handlers", "problem_response"]

log = logging.getLogger("alveary.api")

PROBLEM = "application/problem+json"


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
    request_id = REQUEST_ID.get()
    if request_id is not None:
        body["request_id"] = request_id
    content = orjson.dumps(body, option=orjson.OPT_SERIALIZE_NUMPY | orjson.OPT_NON_STR_KEYS)
    return Response(content, status_code=status, media_type=PROBLEM, headers=headers)


# What a client is told of store and decode errors (they may carry URLs or paths).
_PUBLIC_DETAIL: tuple[tuple[type[AlvearyError], str], ...] = (
    (StoreUnavailable, "The data store cannot be reached; retry later."),
    (ChunkDecodeError, "A stored chunk cannot be decoded."),
    (DeadlineExceeded, "The request ran past its deadline."),
)


def domain_response(exc: AlvearyError, retry_after: int) -> Response:
    """The problem response for a domain error, status and title from the one table."""
    _, status, title = http_status(exc)
    headers = {"Retry-After": str(retry_after)} if isinstance(exc, StoreUnavailable) else None
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
            finest_level=exc.finest_level,
        )
    if isinstance(exc, NotFound):
        return problem_response(
            status, title, exc.message, kind=exc.kind, name=str(exc.name), **exc.members
        )
    if isinstance(exc, RateLimited):
        return problem_response(
            status,
            title,
            exc.message,
            headers={"Retry-After": str(exc.retry_after)},
            retry_after=exc.retry_after,
        )
    # Store and decode errors may carry URLs or paths: the client only gets the title.
    log.warning("%s: %s", type(exc).__name__, exc)
    detail = next((d for cls, d in _PUBLIC_DETAIL if isinstance(exc, cls)), "Internal error.")
    return problem_response(status, title, detail, headers=headers)


# The declared range of each bounded parameter, to name the whole range in errors.
_RANGES = {
    "lat": "[-90, 90] degrees",
    "lon": "[-180, 180] degrees",
    "level": f"integers in [0, {grid.MAX_LEVEL}]",
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
        return domain_response(exc, retry_after)

    @app.exception_handler(RequestValidationError)
    async def _validation(request: Request, exc: RequestValidationError) -> Response:
        info = _validation_detail(exc)
        _, status, title = http_status(InvalidInput)
        return problem_response(status, title, info.pop("detail"), **info)

    @app.exception_handler(StarletteHTTPException)
    async def _http(request: Request, exc: StarletteHTTPException) -> Response:
        # Routing errors (no such path, method not allowed): the table's title where the
        # status is one of ours, else the standard reason phrase.
        titles = {row.status: row.title for row in HTTP_STATUS}
        title = titles.get(exc.status_code) or HTTPStatus(exc.status_code).phrase
        detail = exc.detail if isinstance(exc.detail, str) else title
        edr: dict[str, str] = {}
        if exc.status_code in (404, 405) and request.url.path.startswith("/collections/"):
            # OGC API - EDR: the exception body (code, description) beside problem+json
            edr = {"code": EXCEPTION_CODES[exc.status_code], "description": detail}
        return problem_response(
            exc.status_code, title, detail, headers=getattr(exc, "headers", None), **edr
        )

    @app.exception_handler(Exception)
    async def _unexpected(request: Request, exc: Exception) -> Response:
        log.exception("unhandled error on %s", request.url.path)
        return problem_response(500, "Internal error", "An unexpected error occurred.")
