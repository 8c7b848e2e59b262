"""The HTTP/1.1 protocol the server runs: uvicorn's httptools protocol with a header
deadline and a header size limit, and the logging set-up of ``alveary serve``.

uvicorn closes idle keep-alive connections (``timeout_keep_alive``) and answers 503 over a
connection cap (``limit_concurrency``), but has no limit on how long a client may take to
send a request's headers: a client sending one header line every few seconds holds its
connection (and a slot under the cap) for as long as it likes. :class:`HeaderDeadlineProtocol`
closes a connection whose request headers are not complete within :data:`settings` 's
``header_timeout`` seconds of the connection opening, or of the first byte of a later
request on a kept-alive connection, and answers 431 to request headers over
:data:`MAX_HEADER_BYTES`. The body and the response are not limited by it.
"""

from __future__ import annotations

import asyncio
import copy
import logging
from typing import Any

from uvicorn.config import LOGGING_CONFIG
from uvicorn.protocols.http.httptools_impl import HttpToolsProtocol

# light (standard library only): workers unpickle it before their health check
from alveary._context import RequestIdFilter

__all__ = ["MAX_HEADER_BYTES", "HeaderDeadlineProtocol", "configure_headers", "log_config"]

log = logging.getLogger("alveary.api")

#: Seconds a client may take to send a request's headers (set by :func:`configure_headers`).
HEADER_TIMEOUT = 10.0
#: Bytes a request line and its headers may take (16 KiB, as common servers allow).
MAX_HEADER_BYTES = 16 * 1024

_TOO_LARGE = (
    b"HTTP/1.1 431 Request Header Fields Too Large\r\n"
    b"content-type: application/problem+json\r\nconnection: close\r\ncontent-length: %d\r\n\r\n"
)
_TOO_LARGE_BODY = (
    b'{"type":"about:blank","title":"Request Header Fields Too Large","status":431,'
    b'"detail":"the request line and headers may take at most %d bytes"}' % MAX_HEADER_BYTES
)


def configure_headers(header_timeout: float) -> None:
    """Set the header deadline of connections made from now on in this process."""
    global HEADER_TIMEOUT
    HEADER_TIMEOUT = float(header_timeout)


class HeaderDeadlineProtocol(HttpToolsProtocol):
    """uvicorn's httptools protocol, closing connections whose headers arrive too slowly
    and refusing headers that are too large."""

    _header_timer: asyncio.TimerHandle | None = None
    _waiting_cycle: object = None
    _header_bytes = 0

    def connection_made(self, transport: asyncio.Transport) -> None:  # type: ignore[override]
        super().connection_made(transport)
        self._arm()

    def _arm(self) -> None:
        self._disarm()
        self._waiting_cycle = self.cycle
        self._header_bytes = 0
        self._header_timer = self.loop.call_later(HEADER_TIMEOUT, self._headers_too_slow)

    def _disarm(self) -> None:
        if self._header_timer is not None:
            self._header_timer.cancel()
            self._header_timer = None

    def data_received(self, data: bytes) -> None:
        idle = self.cycle is None or self.cycle.response_complete
        if self._header_timer is None and idle:
            self._arm()  # the first bytes of a new request on a kept-alive connection
        if self._header_timer is not None:
            self._header_bytes += len(data)
            if self._header_bytes > MAX_HEADER_BYTES and self._headers_incomplete(data):
                self._refuse_large()
                return
        super().data_received(data)
        if self._header_timer is not None and self.cycle is not self._waiting_cycle:
            self._disarm()  # a new request's headers are complete

    def _headers_incomplete(self, data: bytes) -> bool:
        """Whether the headers are still not complete after this data (a body may follow
        them in the same packet: only the bytes up to the blank line count)."""
        end = data.find(b"\r\n\r\n")
        return end < 0 or self._header_bytes - len(data) + end + 4 > MAX_HEADER_BYTES

    def _refuse_large(self) -> None:
        self._disarm()
        if not self.transport.is_closing():
            self.transport.write(_TOO_LARGE % len(_TOO_LARGE_BODY) + _TOO_LARGE_BODY)
            self.transport.close()

    def connection_lost(self, exc: Exception | None) -> None:
        self._disarm()
        super().connection_lost(exc)

    def _headers_too_slow(self) -> None:
        self._header_timer = None
        if self.cycle is self._waiting_cycle and not self.transport.is_closing():
            client = f"{self.client[0]}:{self.client[1]}" if self.client else "a client"
            log.info("closing the connection of %s: no request headers within the deadline", client)
            self.transport.close()


def log_config(level: str) -> dict[str, Any]:
    """uvicorn's logging configuration, plus the service's own loggers (``alveary.*``)
    on standard error with time, level and logger name."""
    config = copy.deepcopy(LOGGING_CONFIG)
    config["formatters"]["alveary"] = {
        # request: " request=<id>" inside a request (the id of its X-Request-Id), else ""
        "format": "%(asctime)s %(levelname)s %(name)s %(message)s%(request)s",
    }
    config.setdefault("filters", {})["alveary_request"] = {"()": RequestIdFilter}
    config["handlers"]["alveary"] = {
        "formatter": "alveary",
        "filters": ["alveary_request"],
        "class": "logging.StreamHandler",
        "stream": "ext://sys.stderr",
    }
    # The request log: bare JSON lines (alveary.api's RequestLogMiddleware), whatever
    # the level of the rest; off with ALVEARY_ACCESS_LOG=false.
    config["formatters"]["alveary_access"] = {"format": "%(message)s"}
    config["handlers"]["alveary_access"] = {
        "formatter": "alveary_access",
        "class": "logging.StreamHandler",
        "stream": "ext://sys.stderr",
    }
    config["loggers"]["alveary.access"] = {
        "handlers": ["alveary_access"],
        "level": "INFO",
        "propagate": False,
    }
    config["loggers"]["alveary"] = {
        "handlers": ["alveary"],
        "level": level.upper() if level.upper() != "TRACE" else "DEBUG",
        "propagate": False,
    }
    return config
