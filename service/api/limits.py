"""Refuse request bodies above the configured size before they are read into memory."""

from __future__ import annotations

import orjson
from starlette.types import ASGIApp, Message, Receive, Scope, Send

from service.api.errors import ApiError, error_body

__all__ = ["BodySizeLimit", "payload_too_large"]


def payload_too_large(limit: int) -> ApiError:
    """The 413 refusal for a body above ``limit`` bytes."""
    return ApiError(
        413,
        "payload_too_large",
        f"The request body exceeds the limit of {limit} bytes (UPSHOT_MAX_BODY_BYTES); "
        "split the batch into smaller requests.",
        {"limit_bytes": limit},
    )


class BodySizeLimit:
    """ASGI middleware: 413 on a declared ``Content-Length`` above the limit, and stop
    reading a streamed body as soon as it passes the limit."""

    def __init__(self, app: ASGIApp, max_bytes: int) -> None:
        self.app = app
        self.max_bytes = max_bytes

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return
        for name, value in scope["headers"]:
            if name == b"content-length" and value.isdigit() and int(value) > self.max_bytes:
                await self._refuse(send)
                return
        seen = 0

        async def limited_receive() -> Message:
            nonlocal seen
            message = await receive()
            if message["type"] == "http.request":
                seen += len(message.get("body", b""))
                if seen > self.max_bytes:
                    raise payload_too_large(self.max_bytes)
            return message

        await self.app(scope, limited_receive, send)

    async def _refuse(self, send: Send) -> None:
        error = payload_too_large(self.max_bytes)
        body = orjson.dumps(error_body(error.code, str(error.detail), error.details))
        await send(
            {
                "type": "http.response.start",
                "status": 413,
                "headers": [
                    (b"content-type", b"application/json"),
                    (b"content-length", str(len(body)).encode()),
                    (b"connection", b"close"),
                ],
            }
        )
        await send({"type": "http.response.body", "body": body})
