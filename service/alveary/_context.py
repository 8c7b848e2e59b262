"""The request being served, for log records: a context variable and a logging filter.

Light on purpose (standard library only): uvicorn worker processes load their logging
configuration, which names :class:`RequestIdFilter`, before they answer their parent's
health check.
"""

from __future__ import annotations

import logging
from contextvars import ContextVar

__all__ = ["REQUEST_ID", "RequestIdFilter"]

#: The id of the request being served (None outside a request); set by the HTTP layer,
#: seen by the threads and tasks working for the request.
REQUEST_ID: ContextVar[str | None] = ContextVar("alveary_request_id", default=None)


class RequestIdFilter(logging.Filter):
    """Give every log record ``request``: `` request=<id>`` while a request is served (in
    its threads too), else empty; a format ending in ``%(request)s`` names the request
    a store error or warning happened in.

    >>> record = logging.LogRecord("x", logging.INFO, "", 0, "m", None, None)
    >>> token = REQUEST_ID.set("abc")
    >>> RequestIdFilter().filter(record), record.request
    (True, ' request=abc')
    >>> REQUEST_ID.reset(token)
    """

    def filter(self, record: logging.LogRecord) -> bool:
        rid = REQUEST_ID.get()
        record.request = f" request={rid}" if rid else ""
        return True
