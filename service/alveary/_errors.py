"""The one exception hierarchy of alveary.

Every error the package raises derives from :class:`AlvearyError` and mixes in the
built-in exception a caller would expect, so ``except ValueError`` keeps working::

    AlvearyError
    ├── InvalidInput (ValueError)          bad argument: names parameter, value, allowed range
    │   ├── GridError                      a grid function was given a bad value
    │   ├── CubeFormatError                a store holds something that is not a valid cube
    │   └── IngestError                    a source cannot be turned into a cube
    ├── NotFound (LookupError)             unknown cube, variable or zone
    ├── LimitExceeded (ValueError)         a request over a configured limit
    ├── RateLimited                        a client sent more requests than its rate allows
    ├── StoreUnavailable (OSError)         the object store cannot be reached
    ├── ChunkDecodeError (OSError)         a stored chunk cannot be decoded
    └── DeadlineExceeded (TimeoutError)    a request ran past its deadline

:data:`HTTP_STATUS` is the one table from this hierarchy to HTTP status codes: the service
answers with it and the client raises with it.
"""

from __future__ import annotations

from typing import Any, NamedTuple

__all__ = [
    "HTTP_STATUS",
    "AlvearyError",
    "ChunkDecodeError",
    "CubeFormatError",
    "DeadlineExceeded",
    "GridError",
    "HttpStatus",
    "IngestError",
    "InvalidInput",
    "LimitExceeded",
    "NotFound",
    "RateLimited",
    "StoreUnavailable",
    "error_for_status",
    "http_status",
]


class AlvearyError(Exception):
    """Base of every error alveary raises."""


class InvalidInput(AlvearyError, ValueError):
    """An argument is outside what is allowed.

    Parameters
    ----------
    parameter:
        The name of the offending parameter, as the caller spelled it.
    value:
        The offending value (one element if the argument was an array).
    allowed:
        A human-readable statement of the allowed range, e.g. ``"[-90, 90]"``.
    index:
        The position of the offending element when the argument was an array.
    """

    def __init__(
        self,
        parameter: str,
        value: Any = None,
        allowed: str | None = None,
        *,
        index: int | tuple[int, ...] | None = None,
        message: str | None = None,
    ) -> None:
        self.parameter = parameter
        self.value = value
        self.allowed = allowed
        self.index = index
        if message is None:
            where = "" if index is None else f" at position {index}"
            message = f"{parameter}{where} is {value!r}"
            if allowed:
                message += f"; allowed: {allowed}"
        self.message = message
        super().__init__(message)


class GridError(InvalidInput):
    """A grid function was given a value outside its domain."""


class CubeFormatError(InvalidInput):
    """A store does not hold a valid cube of this format version."""


class IngestError(InvalidInput):
    """A source cannot be ingested (unreadable, unknown CRS, mismatched grids, ...)."""


class NotFound(AlvearyError, LookupError):
    """An unknown cube, variable or zone, or a selection with nothing of a cube in it.

    ``members`` are further facts for the caller (``coverage`` for a selection outside a
    cube's coverage); the service adds them to the problem document.
    """

    def __init__(
        self,
        kind: str,
        name: Any,
        message: str | None = None,
        *,
        members: dict[str, Any] | None = None,
    ) -> None:
        self.kind = kind
        self.name = name
        self.message = message or f"unknown {kind}: {name!r}"
        self.members = dict(members or {})
        super().__init__(self.message)


class LimitExceeded(AlvearyError, ValueError):
    """A request would exceed a configured limit.

    ``finest_level``, when known, is the finest level of the cube at which the same
    request would fit (the service names it in the problem document).
    """

    def __init__(
        self,
        limit: str,
        requested: int | float,
        maximum: int | float,
        *,
        finest_level: int | None = None,
    ) -> None:
        self.limit = limit
        self.requested = requested
        self.maximum = maximum
        self.finest_level = finest_level
        self.message = f"{limit}: requested {requested}, the limit is {maximum}"
        if finest_level is not None:
            self.message += f"; level {finest_level} is the finest at which it fits"
        super().__init__(self.message)


class RateLimited(AlvearyError):
    """A client sent more requests than its rate limit allows; retry after ``retry_after``
    seconds."""

    def __init__(self, message: str = "too many requests", retry_after: int = 1) -> None:
        self.message = message
        self.retry_after = retry_after
        super().__init__(message)


class StoreUnavailable(AlvearyError, OSError):
    """The object store behind a cube cannot be reached.

    ``cube`` and ``key`` name the cube and the object being read, when known (for logs
    and readiness checks; never shown to a client).
    """

    cube: str | None = None
    key: str | None = None


class ChunkDecodeError(AlvearyError, OSError):
    """A stored chunk exists but cannot be decoded (``cube`` and ``key`` as above)."""

    cube: str | None = None
    key: str | None = None


class DeadlineExceeded(AlvearyError, TimeoutError):
    """A request ran past its deadline."""


class HttpStatus(NamedTuple):
    """One row of :data:`HTTP_STATUS`."""

    error: type[AlvearyError]
    status: int
    title: str


#: The one table between the error hierarchy and HTTP status codes, with the problem
#: title. The first row whose class matches wins, so subclasses come before their bases.
HTTP_STATUS: tuple[HttpStatus, ...] = (
    HttpStatus(LimitExceeded, 413, "Request over a configured limit"),
    HttpStatus(InvalidInput, 422, "Invalid parameter"),
    HttpStatus(NotFound, 404, "Not found"),
    HttpStatus(RateLimited, 429, "Too many requests"),
    HttpStatus(StoreUnavailable, 503, "Store unavailable"),
    HttpStatus(ChunkDecodeError, 502, "Stored data cannot be decoded"),
    HttpStatus(DeadlineExceeded, 504, "Request deadline exceeded"),
    HttpStatus(AlvearyError, 500, "Internal error"),
)


def http_status(error: BaseException | type[BaseException]) -> HttpStatus:
    """The row for an error (or error class); anything unknown is a 500.

    >>> http_status(NotFound("cube", "x"))
    HttpStatus(error=<class 'alveary._errors.NotFound'>, status=404, title='Not found')
    >>> http_status(GridError("level", 99)).status
    422
    """
    cls = error if isinstance(error, type) else type(error)
    for row in HTTP_STATUS:
        if issubclass(cls, row.error):
            return row
    return HTTP_STATUS[-1]


def error_for_status(status: int) -> type[AlvearyError]:
    """The error class an HTTP status stands for (the most general one listed).

    >>> error_for_status(413).__name__, error_for_status(418).__name__
    ('LimitExceeded', 'AlvearyError')
    """
    for row in HTTP_STATUS:
        if row.status == status:
            return row.error
    return AlvearyError
