"""Lean lanes: hot GET operations answered without FastAPI's generic parameter machinery.

A field app sends a new point with every GPS fix, so point answers are rarely repeats:
each one pays for routing and parameter handling. A :class:`Lane` is an ASGI app placed
before the routers for one operation's path. It reads the query string itself and, when
every parameter is plainly valid (known, given once, of the right shape), answers with
the same work as the operation's route; anything it does not recognise at a glance (an
unknown or repeated parameter, a value out of range or not a number, a format it does
not name) is handed to the route itself, so every error is exactly the documented one.

The native ``/cubes/{cube}/point`` and the EDR ``/collections/{cube}/position`` (one
``POINT``) each have a lane; what a lane checks and how it answers is the operation's
own (its ``parse`` and ``answer``), the rest is here.
"""

from __future__ import annotations

from collections.abc import Awaitable, Callable
from typing import Any, Generic, TypeVar
from urllib.parse import parse_qsl

from starlette.responses import Response
from starlette.routing import Route
from starlette.types import Receive, Scope, Send

__all__ = ["Lane", "finite_in", "header", "install_lane", "plain_args"]

Args = TypeVar("Args")


def plain_args(scope: Scope, allowed: frozenset[str]) -> dict[str, str] | None:
    """The query parameters if each is one of ``allowed`` and given once, else None.

    >>> plain_args({"query_string": b"lat=1&lon=2"}, frozenset({"lat", "lon"}))
    {'lat': '1', 'lon': '2'}
    >>> plain_args({"query_string": b"lat=1&lat=2"}, frozenset({"lat"})) is None
    True
    >>> plain_args({"query_string": b"lat=1&vars=a"}, frozenset({"lat"})) is None
    True
    """
    raw = scope.get("query_string", b"")
    try:
        pairs = parse_qsl(raw.decode("latin-1"), keep_blank_values=True, strict_parsing=bool(raw))
    except ValueError:
        return None
    args = dict(pairs)
    if len(args) != len(pairs) or not args.keys() <= allowed:
        return None
    return args


def finite_in(text: str, low: float, high: float) -> float | None:
    """``text`` as a number within [low, high], else None (NaN and words included).

    >>> finite_in("45.2", -90, 90), finite_in("nan", -90, 90), finite_in("91", -90, 90)
    (45.2, None, None)
    """
    try:
        value = float(text)
    except ValueError:
        return None
    return value if low <= value <= high else None  # NaN fails both comparisons


def header(scope: Scope, name: bytes) -> str | None:
    """The first value of a request header (``name`` in lower case), else None."""
    for key, value in scope.get("headers", ()):
        if key == name:
            return str(value.decode("latin-1"))
    return None


class Lane(Generic[Args]):
    """An ASGI app for one GET operation, placed before the routers.

    ``parse(scope)`` gives the operation's arguments when the request is plainly valid,
    else None, and the request goes to the route whose ``operation_id`` is
    ``operation``; ``answer(scope, args)`` makes the response.
    """

    def __init__(
        self,
        operation: str,
        parse: Callable[[Scope], Args | None],
        answer: Callable[[Scope, Args], Awaitable[Response]],
    ) -> None:
        self.operation = operation
        self._parse = parse
        self._answer = answer
        self._route: Any = None

    def route(self, app: Any) -> Any:
        """The operation's own route (looked up once, through included routers)."""
        if self._route is None:
            stack = list(app.router.routes)
            while stack:
                route = stack.pop(0)
                inner = getattr(route, "original_router", None)
                if inner is not None:
                    stack[:0] = list(inner.routes)
                elif getattr(route, "operation_id", None) == self.operation:
                    self._route = route
                    break
            if self._route is None:
                raise LookupError(f"no route has operation_id {self.operation!r}")
        return self._route

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        args = self._parse(scope)
        if args is None:
            route = self.route(scope["app"])
            scope["route"] = route
            await route.handle(scope, receive, send)
            return
        scope["alveary.operation"] = self.operation
        response = await self._answer(scope, args)
        await response(scope, receive, send)


def install_lane(app: Any, path: str, lane: Lane[Any]) -> None:
    """Put a lane in front of the routers (call before including the operation's router)."""
    app.router.routes.append(Route(path, lane, methods=["GET"]))
