"""ETags: made from the normalised query, compared as RFC 9110 asks."""

from __future__ import annotations

import hashlib

__all__ = ["etag_for", "matches"]


def etag_for(key: str, fmt: str) -> str:
    """A strong ETag from the normalised query and the format.

    >>> etag_for("point|demo|v1|7|rain|0:1|lat=1.0;lon=2.0", "json")[:1]
    '"'
    """
    digest = hashlib.blake2b(f"{key}|{fmt}".encode(), digest_size=16).hexdigest()
    return f'"{digest}"'


def matches(if_none_match: str | None, etag: str) -> bool:
    """Whether an If-None-Match header matches an ETag (weak comparison, RFC 9110).

    >>> matches('W/"abc", "def"', '"abc"'), matches("*", '"x"'), matches('"y"', '"x"')
    (True, True, False)
    """
    if not if_none_match:
        return False
    for tag in if_none_match.split(","):
        tag = tag.strip()
        if tag == "*" or tag.removeprefix("W/") == etag:
            return True
    return False
