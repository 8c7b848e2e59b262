"""Telling a chunk whose checksum fails from other read errors.

Chunks written by format 2 end in a CRC32C of their encoded bytes (zarr's ``crc32c``
codec, after blosc). zarr verifies it on every read and raises a ``ValueError`` when the
stored and computed checksums differ: the bytes in the store are not the bytes that were
written (bit rot, a truncated copy, a tampered object). Chunks of format-1 cubes carry
no checksum; a damaged one fails in blosc (a ``RuntimeError``) or decodes to wrong
values.
"""

from __future__ import annotations

__all__ = ["is_checksum_error"]

_MISMATCH = "checksum do not match"


def is_checksum_error(exc: BaseException) -> bool:
    """True if ``exc`` (or an exception it was raised from) is a failed chunk checksum.

    Examples
    --------
    >>> is_checksum_error(ValueError("Stored and computed checksum do not match. Stored: ..."))
    True
    >>> is_checksum_error(ValueError("bad shape"))
    False
    """
    seen: set[int] = set()
    cur: BaseException | None = exc
    while cur is not None and id(cur) not in seen:
        seen.add(id(cur))
        if isinstance(cur, ValueError) and _MISMATCH in str(cur):
            return True
        cur = cur.__cause__ or cur.__context__
    return False
