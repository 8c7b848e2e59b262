"""Per-client request rate limits: 429 with ``Retry-After`` and a problem document.

A client is its verified API key (by key id) if it presents one, else its address: the
peer address of the connection, or, behind a trusted proxy, the last address of the
header that proxy sets (``rate_limit_client_header``, e.g. ``X-Forwarded-For``).

Each client has a budget of ``burst`` requests that refills at ``rps`` requests per
second, kept with the ``limits`` library as a moving window: at most ``burst`` requests in
any ``ceil(burst / rps)`` seconds. That admits a burst of ``burst`` at once and, over
time, no more than ``rps`` a second. Counters live in the process (``memory://``) unless
``rate_limit_storage`` names a shared store (e.g. ``redis://host:6379``, which needs the
``redis`` package) so that all replicas share one budget per client.

Liveness and readiness probes (``/healthz``, ``/readyz``) are never limited; nor are CORS
pre-flight requests (answered before this layer).
"""

from __future__ import annotations

import math
import time
from collections.abc import Awaitable, Callable

from limits import RateLimitItemPerSecond
from limits.storage import storage_from_string
from limits.strategies import MovingWindowRateLimiter
from starlette.types import ASGIApp, Receive, Scope, Send

from alveary._errors import InvalidInput, RateLimited
from alveary.api._access import Credentials
from alveary.api._problem import domain_response

__all__ = ["RateLimit", "RateLimitMiddleware"]

EXEMPT = frozenset({"/healthz", "/readyz"})


class RateLimit:
    """The limiter of one process.

    >>> limit = RateLimit(rps=2, burst=4)
    >>> [limit.hit("a") for _ in range(5)]
    [0, 0, 0, 0, 2]
    >>> limit.hit("b"), limit.window
    (0, 2)
    """

    def __init__(self, rps: float, burst: int, storage: str = "memory://") -> None:
        if not rps > 0:
            raise InvalidInput("rate_limit_rps", rps, "> 0 (0 turns rate limits off)")
        self.burst = max(int(burst), 1)
        self.window = max(math.ceil(self.burst / rps), 1)
        self.item = RateLimitItemPerSecond(self.burst, self.window)
        try:
            store = storage_from_string(storage)
        except Exception as exc:  # the library's own errors for unknown or unusable URIs
            raise InvalidInput(
                "rate_limit_storage", storage, f"a limits storage URI ({exc})"
            ) from None
        self.limiter = MovingWindowRateLimiter(store)

    def hit(self, client: str) -> int:
        """Count one request of ``client``: 0 if admitted, else seconds until it may retry."""
        if self.limiter.hit(self.item, "alveary", client):
            return 0
        reset = self.limiter.get_window_stats(self.item, "alveary", client).reset_time
        return max(math.ceil(reset - time.time()), 1)


class RateLimitMiddleware:
    """Refuse requests over the client's rate with 429 before routing.

    ``credentials(scope)`` gives the request's verified key (the service's check).
    """

    def __init__(
        self,
        app: ASGIApp,
        limit: RateLimit,
        credentials: Callable[[Scope], Awaitable[Credentials]],
        client_header: str | None = None,
    ) -> None:
        self.app = app
        self.limit = limit
        self.credentials = credentials
        self.client_header = client_header.lower().encode() if client_header else None

    def client(self, scope: Scope, credentials: Credentials) -> str:
        if credentials.key_id is not None:
            return "key:" + credentials.key_id
        if self.client_header is not None:
            for name, value in scope.get("headers", ()):
                if name == self.client_header:
                    last = str(value.decode("latin-1")).rsplit(",", 1)[-1].strip()
                    if last:
                        return "addr:" + last
        peer = scope.get("client")
        return "addr:" + (str(peer[0]) if peer else "unknown")

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] != "http" or scope["path"] in EXEMPT:
            await self.app(scope, receive, send)
            return
        client = self.client(scope, await self.credentials(scope))
        wait = self.limit.hit(client)
        if wait:
            limit = self.limit
            error = RateLimited(
                f"more than {limit.burst} requests in {limit.window} s from this client; "
                f"retry after {wait} s",
                wait,
            )
            scope["alveary.operation"] = "rate_limited"
            await domain_response(error, retry_after=wait)(scope, receive, send)
            return
        await self.app(scope, receive, send)
