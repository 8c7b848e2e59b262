"""A small HTTP client for the alveary service, on httpx: one method per operation.

Answers come back as dicts (JSON, GeoJSON) or ``pyarrow.Table`` (``f="arrow"``); CSV as
text. Error responses (problem+json) are raised as the package's own exceptions, the class
taken from the status by the one table the service answers with
(:data:`alveary._errors.HTTP_STATUS`: 422 :class:`InvalidInput`, 404 :class:`NotFound`,
413 :class:`LimitExceeded`, 503, 502, 504 the store and deadline errors).
"""

from __future__ import annotations

import datetime as _dt
from collections.abc import Awaitable, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any, Generic, NoReturn, TypeVar

import httpx

from alveary._errors import InvalidInput, LimitExceeded, NotFound, error_for_status

__all__ = ["AsyncClient", "Client", "format_datetime"]

_ACCEPT = {
    "json": "application/json",
    "geojson": "application/geo+json",
    "arrow": "application/vnd.apache.arrow.stream",
    "csv": "text/csv",
}

Instant = str | _dt.datetime | _dt.date | None
Datetime = str | _dt.datetime | _dt.date | tuple[Instant, Instant] | None
Names = str | Sequence[str] | None
Vars = Names
#: Analysis parameters by name (focal, focal_k, kernel, every, agg, climatology, anomaly);
#: a kernel may be given as a sequence of weights.
Analysis = Mapping[str, str | int | float | Sequence[float]] | None
ANALYSIS_PARAMETERS = ("focal", "focal_k", "kernel", "every", "agg", "climatology", "anomaly")
R = TypeVar("R")


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
    answers_error: bool = False  # an error status still carries the answer (readiness)


def _selection(
    level: int | None, vars: Vars, datetime: Datetime, analysis: Analysis = None
) -> dict[str, Any]:
    params: dict[str, Any] = {}
    for name, value in (analysis or {}).items():
        if name not in ANALYSIS_PARAMETERS:
            raise InvalidInput("analysis", name, "one of " + ", ".join(ANALYSIS_PARAMETERS))
        if isinstance(value, Sequence) and not isinstance(value, str):
            value = ",".join(repr(float(w)) for w in value)
        params[name] = value
    if level is not None:
        params["level"] = int(level)
    if vars is not None:
        params["vars"] = vars if isinstance(vars, str) else ",".join(vars)
    text = format_datetime(datetime)
    if text is not None:
        params["datetime"] = text
    return params


def _raise(response: httpx.Response) -> NoReturn:
    """Raise the package's exception for a problem response (status from the one table)."""
    try:
        doc = response.json()
    except ValueError:
        doc = {"detail": response.text[:200]}
    detail = str(doc.get("detail", ""))
    cls = error_for_status(response.status_code)
    if issubclass(cls, LimitExceeded):
        raise cls(str(doc.get("limit", "request")), doc.get("requested", 0), doc.get("maximum", 0))
    if issubclass(cls, InvalidInput):
        parameter = str(doc.get("parameter", "request"))
        raise cls(parameter, doc.get("value"), doc.get("allowed"), message=detail)
    if issubclass(cls, NotFound):
        raise cls(str(doc.get("kind", "resource")), doc.get("name", ""), message=detail)
    raise cls(f"HTTP {response.status_code}: {detail}")


def _decode(response: httpx.Response, call: _Call) -> Any:
    if response.status_code >= 400 and not call.answers_error:
        _raise(response)
    fmt = call.fmt
    if fmt == "arrow":
        import pyarrow as pa

        return pa.ipc.open_stream(response.content).read_all()
    if fmt == "csv" or fmt == "text":
        return response.text
    return response.json()


class _Operations(Generic[R]):
    """One method per operation of the service; ``_send`` makes the request.

    Every cube query takes ``analysis``, the analysis parameters by name, e.g.
    ``{"focal": "mean", "focal_k": 2, "every": "P1M"}`` (see service/docs/analysis.md).

    The sync client's ``_send`` returns the answer, the async client's an awaitable of it,
    so each operation is written once for both.
    """

    def _send(self, call: _Call) -> R:
        raise NotImplementedError

    def landing(self) -> R:
        """Links: API definition, conformance, collections, cubes (``GET /``)."""
        return self._send(_Call("GET", "/"))

    def cubes(self) -> R:
        """The cubes the server publishes."""
        return self._send(_Call("GET", "/cubes"))

    def cube(self, cube: str) -> R:
        """One cube: variables, units, levels, time axis, coverage and version."""
        return self._send(_Call("GET", f"/cubes/{cube}"))

    def point(
        self,
        cube: str,
        lat: float,
        lon: float,
        *,
        level: int | None = None,
        vars: Vars = None,
        datetime: Datetime = None,
        analysis: Analysis = None,
        f: str = "json",
    ) -> R:
        """Values at the zone under a point."""
        params = {"lat": lat, "lon": lon, **_selection(level, vars, datetime, analysis), "f": f}
        return self._send(_Call("GET", f"/cubes/{cube}/point", params, fmt=f))

    def disk(
        self,
        cube: str,
        lat: float | None = None,
        lon: float | None = None,
        *,
        k: int,
        zone: int | str | None = None,
        level: int | None = None,
        vars: Vars = None,
        datetime: Datetime = None,
        analysis: Analysis = None,
        f: str = "json",
    ) -> R:
        """Values of every zone within ``k`` steps of a zone (given, or under a point)."""
        params: dict[str, Any] = {"k": k, **_selection(level, vars, datetime, analysis), "f": f}
        if zone is not None:
            params["zone"] = str(zone)
        else:
            params.update(lat=lat, lon=lon)
        return self._send(_Call("GET", f"/cubes/{cube}/disk", params, fmt=f))

    def radius(
        self,
        cube: str,
        lat: float,
        lon: float,
        meters: float,
        *,
        nearest: bool = False,
        level: int | None = None,
        vars: Vars = None,
        datetime: Datetime = None,
        analysis: Analysis = None,
        f: str = "json",
    ) -> R:
        """Values of the zones whose centres lie within ``meters`` of a point."""
        params = {
            "lat": lat,
            "lon": lon,
            "meters": meters,
            **_selection(level, vars, datetime, analysis),
        }
        params.update(nearest="true" if nearest else "false", f=f)
        return self._send(_Call("GET", f"/cubes/{cube}/radius", params, fmt=f))

    def bbox(
        self,
        cube: str,
        bbox: str | Sequence[float],
        *,
        stats: Names = None,
        level: int | None = None,
        vars: Vars = None,
        datetime: Datetime = None,
        analysis: Analysis = None,
        f: str = "json",
    ) -> R:
        """Values or statistics of the zones whose centres lie in a box (w, s, e, n)."""
        text = bbox if isinstance(bbox, str) else ",".join(repr(float(v)) for v in bbox)
        params: dict[str, Any] = {
            "bbox": text,
            **_selection(level, vars, datetime, analysis),
            "f": f,
        }
        params.update(_stats(stats))
        return self._send(_Call("GET", f"/cubes/{cube}/bbox", params, fmt=f))

    def polygon(
        self,
        cube: str,
        geometry: Any,
        *,
        stats: Names = None,
        level: int | None = None,
        vars: Vars = None,
        datetime: Datetime = None,
        analysis: Analysis = None,
        f: str = "json",
    ) -> R:
        """Values or statistics in a GeoJSON (Multi)Polygon, a Feature or a shapely shape."""
        if hasattr(geometry, "__geo_interface__"):
            geometry = geometry.__geo_interface__
        params: dict[str, Any] = {**_selection(level, vars, datetime, analysis), "f": f}
        params.update(_stats(stats))
        # (tuples, as in __geo_interface__, are written as JSON arrays)
        return self._send(_Call("POST", f"/cubes/{cube}/polygon", params, geometry, fmt=f))

    def points(
        self,
        cube: str,
        lat: Sequence[float],
        lon: Sequence[float],
        *,
        level: int | None = None,
        vars: Vars = None,
        datetime: Datetime = None,
        analysis: Analysis = None,
        f: str = "arrow",
    ) -> R:
        """Values at many points at once (Arrow by default)."""
        body = {"lat": [float(v) for v in lat], "lon": [float(v) for v in lon]}
        params = {**_selection(level, vars, datetime, analysis), "f": f}
        return self._send(_Call("POST", f"/cubes/{cube}/points", params, body, fmt=f))

    def zone(self, zone: int | str, *, f: str = "json") -> R:
        """One zone: level, centre, boundary, neighbours, parent and children."""
        return self._send(_Call("GET", f"/zones/{zone}", {"f": f}, fmt=f))

    def find_zone(self, lat: float, lon: float, level: int, *, f: str = "json") -> R:
        """The zone under a point at a level."""
        params = {"lat": lat, "lon": lon, "level": level, "f": f}
        return self._send(_Call("GET", "/zones", params, fmt=f))

    def health(self) -> R:
        """Liveness."""
        return self._send(_Call("GET", "/healthz"))

    def ready(self) -> R:
        """Readiness: ``{"ready": ..., "cubes": ...}`` (also when not ready)."""
        return self._send(_Call("GET", "/readyz", answers_error=True))

    def metrics(self) -> R:
        """Prometheus metrics, as text."""
        return self._send(_Call("GET", "/metrics", fmt="text"))


def _stats(stats: Names) -> dict[str, str]:
    if not stats:
        return {}
    return {"stats": stats if isinstance(stats, str) else ",".join(stats)}


def _request_args(call: _Call, headers: dict[str, str] | None) -> dict[str, Any]:
    params = {k: v for k, v in call.params.items() if v is not None}
    args: dict[str, Any] = {"params": params, "headers": dict(headers or {})}
    if call.fmt in _ACCEPT:
        args["headers"].setdefault("Accept", _ACCEPT[call.fmt])
    if call.body is not None:
        args["json"] = call.body
    return args


class Client(_Operations[Any]):
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

    def _send(self, call: _Call) -> Any:
        response = self._http.request(call.method, call.path, **_request_args(call, self.headers))
        return _decode(response, call)

    def close(self) -> None:
        self._http.close()

    def __enter__(self) -> Client:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()


class AsyncClient(_Operations[Awaitable[Any]]):
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

    def _send(self, call: _Call) -> Awaitable[Any]:
        return self._asend(call)

    async def _asend(self, call: _Call) -> Any:
        args = _request_args(call, self.headers)
        response = await self._http.request(call.method, call.path, **args)
        return _decode(response, call)

    async def aclose(self) -> None:
        await self._http.aclose()

    async def __aenter__(self) -> AsyncClient:
        return self

    async def __aexit__(self, *exc: object) -> None:
        await self.aclose()
