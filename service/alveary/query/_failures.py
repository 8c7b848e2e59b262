"""Failures of the store below a cube, as domain errors.

The executor and the catalogue are the only places that touch a store. Whatever escapes
the store client there is turned into :class:`StoreUnavailable` (the store cannot be
reached: connection refused, timeouts, client errors) or :class:`ChunkDecodeError` (bytes
arrived but cannot be decoded), so the HTTP layer maps it with its one table. Domain
errors pass through unchanged.
"""

from __future__ import annotations

import logging

from alveary._errors import AlvearyError, ChunkDecodeError, StoreUnavailable

__all__ = ["as_domain_error"]

log = logging.getLogger("alveary.query")

# Exception classes of the store clients (by module), read as "cannot reach the store".
_NETWORK_MODULES = ("botocore", "aiobotocore", "aiohttp", "urllib3", "s3fs", "fsspec")


def _is_network(exc: BaseException) -> bool:
    if isinstance(exc, OSError | ConnectionError | TimeoutError):
        return True
    for cls in type(exc).__mro__:
        if cls.__module__.split(".")[0] in _NETWORK_MODULES:
            return True
    return False


def as_domain_error(exc: Exception, what: str) -> AlvearyError:
    """The domain error for a failure while reading ``what`` from a store.

    >>> type(as_domain_error(ConnectionRefusedError(), "chunk")).__name__
    'StoreUnavailable'
    >>> type(as_domain_error(RuntimeError("error during decompression"), "chunk")).__name__
    'ChunkDecodeError'
    """
    if isinstance(exc, AlvearyError):
        return exc
    log.warning("reading %s failed: %s: %s", what, type(exc).__name__, exc)
    if _is_network(exc):
        return StoreUnavailable(f"the store cannot be reached while reading {what}")
    return ChunkDecodeError(f"{what} cannot be decoded")
