"""A small HTTP client for the alveary service, on httpx: one method per operation.

Answers come back as dicts (JSON, GeoJSON) or ``pyarrow.Table`` (``f="arrow"``); CSV as
text. Error responses (problem+json) are raised as the package's own exceptions:
422 -> :class:`InvalidInput`, 404 -> :class:`NotFound`, 413 -> :class:`LimitExceeded`,
503 -> :class:`StoreUnavailable`, 502 -> :class:`ChunkDecodeError`, 504 ->
:class:`DeadlineExceeded`, anything else -> :class:`AlvearyError`.
"""

from __future__ import annotations

import datetime as _dt
import inspect
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import httpx

from alveary._errors import (
    AlvearyError,
    ChunkDecodeError,
    DeadlineExceeded,
    InvalidInput,
    LimitExceeded,
    NotFound,
    StoreUnavailable,
)

__all__ = ["AsyncClient", "Client", "format_datetime"]

_ACCEPT = {
    "json": "application/json",
    "geojson": "application/geo+json",
    "arrow": "application/vnd.apache.arrow.stream",
    "csv": "text/csv",
}

Instant = str | _dt.datetime | _dt.date | None
Datetime = str | _dt.datetime | _dt.date | tuple[Instant, Instant] | None


def _instant(value: Instant) -> str:
    if value is None:
        return ".."
    if isinstance(value, _dt.datetime):
        if value.tzinfo is None:
            value = value.replace(tzinfo=_dt.UTC)
        return value.astimezone(_dt.UTC).strftime("%Y-%m-%dT%H:%M:%S.%fZ").replace(".000000Z", "Z")
    if isinstance(value, _dt.date):
        return value.isoformat()
    return str(value)


def format_datetime(value: Datetime) -> str | None:
    """The ``datetime`` parameter for an instant or a ``(start, end)`` interval.

    >>> format_datetime((_dt.datetime(2024, 5, 1), None))
    '2024-05-01T00:00:00Z/..'
    >>> format_datetime("2024-05-01T00:00:00Z") is None, format_datetime(None)
    (False, None)
    """
    if value is None:
        return None
    if isinstance(value, tuple):
        start, end = value
        return f"{_instant(start)}/{_instant(end)}"
    return _instant(value)


@dataclass
class _Call:
    method: str
    path: str
    params: dict[str, Any] = field(default_factory=dict)
    body: Any = None
    fmt: str = "json"


def _selection(
    level: int | None, vars: Sequence[str] | str | None, datetime: Datetime
) -> dict[str, Any]:
    params: dict[str, Any] = {}
    if level is not None:
        params["level"] = int(level)
    if vars is not None:
        params["vars"] = vars if isinstance(vars, str) else ",".join(vars)
    text = format_datetime(datetime)
    if text is not None:
        params["datetime"] = text
    return params


def _raise(response: httpx.Response) -> None:
    try:
        doc = response.json()
    except ValueError:
        doc = {"detail": response.text[:200]}
    detail = str(doc.get("detail", ""))
    status = response.status_code
    if status == 422:
        raise InvalidInput(
            str(doc.get("parameter", "request")),
            doc.get("value"),
            doc.get("allowed"),
            message=detail,
        )
    if status == 404:
        raise NotFound(str(doc.get("kind", "resource")), doc.get("name", ""), message=detail)
    if status == 413:
        raise LimitExceeded(
            str(doc.get("limit", "request")), doc.get("requested", 0), doc.get("maximum", 0)
        )
    cls = {503: StoreUnavailable, 502: ChunkDecodeError, 504: DeadlineExceeded}.get(
        status, AlvearyError
    )
    raise cls(f"HTTP {status}: {detail}")


def _decode(response: httpx.Response, fmt: str) -> Any:
    if response.status_code >= 400:
        _raise(response)
    if fmt == "arrow":
        import pyarrow as pa

        return pa.ipc.open_stream(response.content).read_all()
    if fmt == "csv" or fmt == "text":
        return response.text
    return response.json()


class _Operations:
    """Request builders shared by the sync and async clients (no I/O here)."""

    @staticmethod
    def landing() -> _Call:
        return _Call("GET", "/")

    @staticmethod
    def cubes() -> _Call:
        return _Call("GET", "/cubes")

    @staticmethod
    def cube(cube: str) -> _Call:
        return _Call("GET", f"/cubes/{cube}")

    @staticmethod
    def point(cube, lat, lon, *, level=None, vars=None, datetime=None, f="json") -> _Call:
        params = {"lat": lat, "lon": lon, **_selection(level, vars, datetime), "f": f}
        return _Call("GET", f"/cubes/{cube}/point", params, fmt=f)

    @staticmethod
    def disk(
        cube, lat=None, lon=None, *, k, zone=None, level=None, vars=None, datetime=None, f="json"
    ) -> _Call:
        params: dict[str, Any] = {"k": k, **_selection(level, vars, datetime), "f": f}
        if zone is not None:
            params["zone"] = str(zone)
        else:
            params.update(lat=lat, lon=lon)
        return _Call("GET", f"/cubes/{cube}/disk", params, fmt=f)

    @staticmethod
    def radius(
        cube, lat, lon, meters, *, nearest=False, level=None, vars=None, datetime=None, f="json"
    ) -> _Call:
        params = {"lat": lat, "lon": lon, "meters": meters, **_selection(level, vars, datetime)}
        params.update(nearest="true" if nearest else "false", f=f)
        return _Call("GET", f"/cubes/{cube}/radius", params, fmt=f)

    @staticmethod
    def bbox(cube, bbox, *, stats=None, level=None, vars=None, datetime=None, f="json") -> _Call:
        text = bbox if isinstance(bbox, str) else ",".join(repr(float(v)) for v in bbox)
        params: dict[str, Any] = {"bbox": text, **_selection(level, vars, datetime), "f": f}
        if stats:
            params["stats"] = stats if isinstance(stats, str) else ",".join(stats)
        return _Call("GET", f"/cubes/{cube}/bbox", params, fmt=f)

    @staticmethod
    def polygon(
        cube, geometry, *, stats=None, level=None, vars=None, datetime=None, f="json"
    ) -> _Call:
        if hasattr(geometry, "__geo_interface__"):
            geometry = geometry.__geo_interface__
        params: dict[str, Any] = {**_selection(level, vars, datetime), "f": f}
        if stats:
            params["stats"] = stats if isinstance(stats, str) else ",".join(stats)
        return _Call("POST", f"/cubes/{cube}/polygon", params, _plain(geometry), fmt=f)

    @staticmethod
    def points(cube, lat, lon, *, level=None, vars=None, datetime=None, f="arrow") -> _Call:
        body = {"lat": [float(v) for v in lat], "lon": [float(v) for v in lon]}
        params = {**_selection(level, vars, datetime), "f": f}
        return _Call("POST", f"/cubes/{cube}/points", params, body, fmt=f)

    @staticmethod
    def zone(zone, *, f="json") -> _Call:
        return _Call("GET", f"/zones/{zone}", {"f": f}, fmt=f)

    @staticmethod
    def find_zone(lat, lon, level, *, f="json") -> _Call:
        return _Call("GET", "/zones", {"lat": lat, "lon": lon, "level": level, "f": f}, fmt=f)

    @staticmethod
    def health() -> _Call:
        return _Call("GET", "/healthz")

    @staticmethod
    def ready() -> _Call:
        return _Call("GET", "/readyz")

    @staticmethod
    def metrics() -> _Call:
        return _Call("GET", "/metrics", fmt="text")


def _plain(obj: Any) -> Any:
    if isinstance(obj, dict):
        return {k: _plain(v) for k, v in obj.items()}
    if isinstance(obj, list | tuple):
        return [_plain(v) for v in obj]
    return obj


def _request_args(call: _Call, headers: dict[str, str] | None) -> dict[str, Any]:
    params = {k: v for k, v in call.params.items() if v is not None}
    args: dict[str, Any] = {"params": params, "headers": dict(headers or {})}
    if call.fmt in _ACCEPT:
        args["headers"].setdefault("Accept", _ACCEPT[call.fmt])
    if call.body is not None:
        args["json"] = call.body
    return args


def _describe(method: Any, build: Any, name: str) -> None:
    sig = inspect.signature(build)
    self_param = inspect.Parameter("self", inspect.Parameter.POSITIONAL_OR_KEYWORD)
    method.__signature__ = sig.replace(parameters=[self_param, *sig.parameters.values()])
    method.__name__ = method.__qualname__ = name
    method.__doc__ = f"The ``{name}`` operation of the service (see its /docs)."


def _sync_method(name: str):
    build = getattr(_Operations, name)

    def method(self: Client, *args: Any, **kwargs: Any) -> Any:
        call = build(*args, **kwargs)
        response = self._http.request(call.method, call.path, **_request_args(call, self.headers))
        if call.path == "/readyz" and response.status_code == 503:
            return response.json()
        return _decode(response, call.fmt)

    _describe(method, build, name)
    return method


def _async_method(name: str):
    build = getattr(_Operations, name)

    async def method(self: AsyncClient, *args: Any, **kwargs: Any) -> Any:
        call = build(*args, **kwargs)
        response = await self._http.request(
            call.method, call.path, **_request_args(call, self.headers)
        )
        if call.path == "/readyz" and response.status_code == 503:
            return response.json()
        return _decode(response, call.fmt)

    _describe(method, build, name)
    return method


_NAMES = [n for n in vars(_Operations) if not n.startswith("_")]


class Client:
    """Synchronous client.

    Parameters
    ----------
    base_url:
        Where the service runs, e.g. ``"http://127.0.0.1:8000"``.
    timeout:
        Seconds per request.
    headers:
        Extra headers sent with every request.
    transport:
        An httpx transport (e.g. ``httpx.ASGITransport(app)`` or one with retries).

    Examples
    --------
    >>> with Client("http://127.0.0.1:8000") as client:  # doctest: +SKIP
    ...     client.point("demo", 45.2, 7.6, datetime=("2024-05-01", None))
    """

    def __init__(
        self,
        base_url: str = "http://127.0.0.1:8000",
        *,
        timeout: float = 30.0,
        headers: dict[str, str] | None = None,
        transport: httpx.BaseTransport | None = None,
    ) -> None:
        self.headers = headers
        self._http = httpx.Client(base_url=base_url, timeout=timeout, transport=transport)

    def close(self) -> None:
        self._http.close()

    def __enter__(self) -> Client:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()


class AsyncClient:
    """Asynchronous client, the same methods as :class:`Client` (awaitable)."""

    def __init__(
        self,
        base_url: str = "http://127.0.0.1:8000",
        *,
        timeout: float = 30.0,
        headers: dict[str, str] | None = None,
        transport: httpx.AsyncBaseTransport | None = None,
    ) -> None:
        self.headers = headers
        self._http = httpx.AsyncClient(base_url=base_url, timeout=timeout, transport=transport)

    async def aclose(self) -> None:
        await self._http.aclose()

    async def __aenter__(self) -> AsyncClient:
        return self

    async def __aexit__(self, *exc: object) -> None:
        await self.aclose()


for _name in _NAMES:
    setattr(Client, _name, _sync_method(_name))
    setattr(AsyncClient, _name, _async_method(_name))
