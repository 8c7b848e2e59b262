"""HEAD for every GET: the GET answer's status and headers, without its body.

A HEAD request is passed to the application as a GET (so routing, caching, ETags and
errors are exactly those of the GET) and the body is dropped on the way out; the headers,
``Content-Length`` included, are the GET's (RFC 9110 §9.3.2).
"""

from __future__ import annotations

from starlette.types import ASGIApp, Message, Receive, Scope, Send

__all__ = ["HeadMiddleware"]


class HeadMiddleware:
    """Answer HEAD requests with the headers of the same GET and no body."""

    def __init__(self, app: ASGIApp) -> None:
        self.app = app

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] != "http" or scope["method"] != "HEAD":
            await self.app(scope, receive, send)
            return
        done = False

        async def headers_only(message: Message) -> None:
            nonlocal done
            if message["type"] == "http.response.body":
                if done:
                    return
                more = bool(message.get("more_body", False))
                if more:
                    return
                done = True
                message = {"type": "http.response.body", "body": b"", "more_body": False}
            await send(message)

        await self.app({**scope, "method": "GET"}, receive, headers_only)
