"""What one client may ask of the API: requests per minute per key, and request body size.

The rate is counted per key in a moving window of one minute, in this process's memory (each
API process counts on its own; several processes behind one balancer each allow the rate).
"""

from __future__ import annotations

import math
import time

import orjson
from limits import RateLimitItemPerMinute
from limits.storage import MemoryStorage
from limits.strategies import MovingWindowRateLimiter
from starlette.exceptions import HTTPException
from starlette.types import ASGIApp, Message, Receive, Scope, Send

from tecfleet.api.errors import ApiError, error_body

__all__ = ["BodyLimit", "RateLimiter"]


class RateLimiter:
    """At most ``per_minute`` requests per key in any minute [requests/min]."""

    def __init__(self, per_minute: int) -> None:
        self.per_minute = per_minute
        self._item = RateLimitItemPerMinute(per_minute)
        self._limiter = MovingWindowRateLimiter(MemoryStorage())

    def check(self, key_id: int) -> None:
        """Count one request of the key; ApiError 429 with ``Retry-After`` when over."""
        ident = str(key_id)
        if self._limiter.hit(self._item, ident):
            return
        reset_s = self._limiter.get_window_stats(self._item, ident).reset_time
        wait = max(1, math.ceil(reset_s - time.time()))
        raise ApiError(
            429,
            "rate_limited",
            f"over {self.per_minute} requests per minute; retry after {wait} s",
            headers={"Retry-After": str(wait)},
        )


class BodyLimit:
    """ASGI middleware answering 413 to a request body over ``max_bytes`` [bytes].

    A declared ``Content-Length`` over the limit is refused before the body is read; a body
    sent without one is counted as it arrives. (The framework's own body limit answers in
    plain text, outside the app's error handlers; this one answers in the one error shape.)
    """

    def __init__(self, app: ASGIApp, max_bytes: int) -> None:
        self.app = app
        self.max_bytes = max_bytes

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return
        declared = dict(scope.get("headers") or []).get(b"content-length")
        if declared is not None and declared.isdigit() and int(declared) > self.max_bytes:
            await self._refuse(send)
            return
        seen = 0

        async def counted() -> Message:
            nonlocal seen
            message = await receive()
            if message["type"] == "http.request":
                seen += len(message.get("body", b""))
                if seen > self.max_bytes:
                    # Raised inside the handler's read, so it never sees a cut body; the
                    # framework passes an HTTPException from there to the error handlers.
                    raise HTTPException(413, self._message())
            return message

        await self.app(scope, counted, send)

    def _message(self) -> str:
        return f"the request body is over {self.max_bytes} bytes"

    async def _refuse(self, send: Send) -> None:
        body = orjson.dumps(error_body("body_too_large", self._message()))
        await send(
            {
                "type": "http.response.start",
                "status": 413,
                "headers": [
                    (b"content-type", b"application/json"),
                    (b"content-length", str(len(body)).encode()),
                ],
            }
        )
        await send({"type": "http.response.body", "body": body})
