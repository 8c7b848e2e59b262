"""Errors on the OGC API - EDR paths: 400 for bad parameters, and the standard's body.

OGC API - EDR 1.1 answers an invalid or unsupported query parameter with 400 (the native
API keeps 422 for those) and describes an error with its exception schema
(``exception.yaml``: ``code``, required, and ``description``). alveary sends that pair
alongside the problem+json members (RFC 9457) the native API uses, so one document
satisfies both: ``code``, ``description``, ``type``, ``title``, ``status``, ``detail`` and,
for parameter errors, ``parameter``, ``value`` and ``allowed``.

Domain errors raised by the query layer name the native parameters (``vars``, ``meters``,
``lat``, ...); on the EDR paths they are renamed to the parameter the client sent
(``parameter-name``, ``within``, ``coords``, ...). Store and decode faults say no more
than their title, as on the native paths.
"""

from __future__ import annotations

import logging
from typing import Any

from alveary._errors import (
    AlvearyError,
    InvalidInput,
    LimitExceeded,
    NotFound,
    http_status,
)

__all__ = [
    "EDR_PARAMETERS",
    "EXCEPTION_CODES",
    "edr_error",
    "edr_status_for",
    "exception_body",
]

log = logging.getLogger("alveary.api")

#: HTTP status -> the exception ``code`` (OGC Web Service names where one exists).
EXCEPTION_CODES: dict[int, str] = {
    400: "InvalidParameterValue",
    404: "NotFound",
    405: "OperationNotSupported",
    406: "NotAcceptable",
    413: "LimitExceeded",
    500: "NoApplicableCode",
    502: "StoredDataUnreadable",
    503: "StoreUnavailable",
    504: "DeadlineExceeded",
}
_MISSING = "MissingParameterValue"

#: Native parameter names -> the EDR parameter a client sent instead.
EDR_PARAMETERS: dict[str, str] = {
    "vars": "parameter-name",
    "meters": "within",
    "lat": "coords",
    "lon": "coords",
    "geometry": "coords",
    "body": "coords",
}
_HIDDEN = {
    500: "Internal error.",
    502: "A stored chunk cannot be decoded.",
    503: "The data store cannot be reached; retry later.",
    504: "The request ran past its deadline.",
}


def edr_status_for(exc: BaseException) -> tuple[int, str]:
    """HTTP status and title of a domain error on an EDR path.

    Invalid input is 400 (not the native 422); an unknown variable named in
    ``parameter-name`` is an invalid parameter value too (400), while an unknown
    collection stays 404. Everything else as on the native paths.

    >>> edr_status_for(InvalidInput("coords", "POINT(", "WKT"))
    (400, 'Invalid parameter')
    >>> edr_status_for(NotFound("variable", "rain")), edr_status_for(NotFound("cube", "x"))
    ((400, 'Invalid parameter'), (404, 'Not found'))
    """
    if not isinstance(exc, LimitExceeded) and (
        isinstance(exc, InvalidInput) or (isinstance(exc, NotFound) and exc.kind == "variable")
    ):
        return 400, "Invalid parameter"
    row = http_status(exc)
    return row.status, row.title


def exception_body(
    status: int, title: str, detail: str, *, code: str | None = None, **members: Any
) -> dict[str, Any]:
    """An error document: EDR's ``code`` and ``description`` with problem+json members.

    Members given as None are left out.

    >>> exception_body(400, "Invalid parameter", "crs: EPSG:3857 is not supported", parameter="crs")
    {'code': 'InvalidParameterValue', 'description': 'crs: EPSG:3857 is not supported', 'type': 'about:blank', 'title': 'Invalid parameter', 'status': 400, 'detail': 'crs: EPSG:3857 is not supported', 'parameter': 'crs'}
    """  # noqa: E501
    body: dict[str, Any] = {
        "code": code or EXCEPTION_CODES.get(status, "NoApplicableCode"),
        "description": detail,
        "type": "about:blank",
        "title": title,
        "status": status,
        "detail": detail,
    }
    body.update({k: v for k, v in members.items() if v is not None})
    return body


def _value(value: Any) -> Any:
    if isinstance(value, str) and len(value) > 200:
        return value[:197] + "..."
    if value is None or isinstance(value, str | int | float | bool):
        return value
    if isinstance(value, list | tuple) and all(isinstance(v, int | float) for v in value):
        return list(value)
    return str(value)


def edr_error(exc: AlvearyError) -> tuple[int, dict[str, Any]]:
    """Status and body of a domain error raised while answering an EDR query.

    >>> status, body = edr_error(InvalidInput("meters", -1.0, ">= 0"))
    >>> status, body["code"], body["parameter"], body["detail"]
    (400, 'InvalidParameterValue', 'within', 'within is -1.0; allowed: >= 0')
    >>> edr_error(InvalidInput("within-units", None, "m, km or mi"))[1]["code"]
    'MissingParameterValue'
    """
    status, title = edr_status_for(exc)
    if isinstance(exc, InvalidInput):
        parameter = EDR_PARAMETERS.get(exc.parameter, exc.parameter)
        detail = exc.message
        if parameter != exc.parameter:
            renamed = InvalidInput(parameter, exc.value, exc.allowed, index=exc.index)
            detail = renamed.message
        return status, exception_body(
            status,
            title,
            detail,
            code=_MISSING if exc.value is None else None,
            parameter=parameter,
            value=_value(exc.value),
            allowed=exc.allowed,
            index=exc.index,
        )
    if isinstance(exc, NotFound):
        members: dict[str, Any] = {"kind": exc.kind, "name": str(exc.name)}
        if exc.kind == "variable":
            members["parameter"] = "parameter-name"
        return status, exception_body(status, title, exc.message, **members)
    if isinstance(exc, LimitExceeded):
        return status, exception_body(
            status,
            title,
            exc.message,
            limit=exc.limit,
            requested=exc.requested,
            maximum=exc.maximum,
        )
    log.warning("%s: %s", type(exc).__name__, exc)
    return status, exception_body(status, title, _HIDDEN.get(status, "Internal error."))
