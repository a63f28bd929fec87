"""The one place that bounds the work a request may cause, before any of it is done.

:class:`RequestLimits` is plain ASGI, outside everything else, and costs a comparison
and two counter updates per request:

* **Shedding.** At most ``max_in_flight`` requests are in progress in this worker
  (counted from the moment the event loop first runs them, queued work included);
  beyond that a request is answered at once with 503 ``overloaded`` and ``Retry-After``,
  instead of queueing until its caller gives up. The probes ``/healthz`` and ``/metrics``
  are never shed, so an overloaded worker is not mistaken for a dead one.
* **Body size.** A declared ``Content-Length`` above ``max_body_bytes`` is refused (413)
  before the body is read; a streamed body stops being read as soon as it passes it.
* **No dropped connections.** An unexpected error before the response started becomes
  the one error shape with status 500 here, so the connection stays usable (Starlette's
  outermost handler answers too, but then re-raises, and the server closes the
  connection under the client's next request).

Authentication before the body is read is a step of the route classes
(:mod:`service.api.routing`), which know each route's role. :class:`HeavyReads` caps
concurrent reads over the whole decision log (429 with ``Retry-After`` beyond it).
"""

from __future__ import annotations

import asyncio
import logging
from collections.abc import Iterator
from contextlib import contextmanager

import orjson
from starlette.types import ASGIApp, Message, Receive, Scope, Send

from service.api.errors import ApiError, error_body
from service.api.metrics import Metrics

__all__ = [
    "SHED_RETRY_AFTER",
    "HEAVY_RETRY_AFTER",
    "HeavyReads",
    "RequestLimits",
    "payload_too_large",
]

logger = logging.getLogger(__name__)

SHED_RETRY_AFTER = 1
"""Seconds a shed caller is asked to wait (``Retry-After``)."""
HEAVY_RETRY_AFTER = 5
"""Seconds a refused heavy read is asked to wait: such a read takes seconds."""

_NEVER_SHED = frozenset({"/healthz", "/metrics"})


def payload_too_large(limit: int) -> ApiError:
    """The 413 refusal for a body above ``limit`` bytes."""
    return ApiError(
        413,
        "payload_too_large",
        f"The request body exceeds the limit of {limit} bytes (UPSHOT_MAX_BODY_BYTES); "
        "split the batch into smaller requests.",
        {"limit_bytes": limit},
    )


def _rendered(status: int, code: str, message: str, details: object, **headers: str) -> Message:
    body = orjson.dumps(error_body(code, message, details))
    raw = [(b"content-type", b"application/json"), (b"content-length", b"%d" % len(body))]
    raw += [(k.replace("_", "-").encode(), v.encode()) for k, v in headers.items()]
    return {"status": status, "headers": raw, "body": body}


class RequestLimits:
    """ASGI middleware: shed beyond ``max_in_flight``, refuse oversized bodies, and turn
    an unexpected error into a 500 that keeps the connection (see the module)."""

    def __init__(
        self, app: ASGIApp, *, max_in_flight: int, max_body_bytes: int, metrics: Metrics
    ) -> None:
        self.app = app
        self.max_in_flight = max_in_flight
        self.max_body_bytes = max_body_bytes
        self.in_flight = 0
        self._metrics = metrics
        self._shed_count = metrics.shed.labels("in_flight")
        self._shed = _rendered(
            503,
            "overloaded",
            f"The service is at its limit of {max_in_flight} requests in progress "
            f"(UPSHOT_MAX_IN_FLIGHT); retry after {SHED_RETRY_AFTER} s.",
            {"limit": max_in_flight, "retry_after_seconds": SHED_RETRY_AFTER},
            retry_after=str(SHED_RETRY_AFTER),
        )
        error = payload_too_large(max_body_bytes)
        self._too_large = _rendered(
            413, error.code, str(error.detail), error.details, connection="close"
        )
        self._internal = _rendered(
            500, "internal_error", "Internal error; the request was not carried out.", None
        )
        metrics.in_flight.set_function(lambda: self.in_flight)

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return
        if self.in_flight >= self.max_in_flight and scope["path"] not in _NEVER_SHED:
            self._shed_count.inc()
            await _send(send, self._shed)
            return
        for name, value in scope["headers"]:
            if name == b"content-length" and value.isdigit() and int(value) > self.max_body_bytes:
                self._metrics.errors.labels("payload_too_large").inc()
                await _send(send, self._too_large)
                return
        self.in_flight += 1
        try:
            # Yield once before any work: every request that arrived in this turn of the
            # event loop is then counted before the first one computes, so the count sees
            # the queue rather than only the requests already awaiting the log.
            await asyncio.sleep(0)
            await self._guarded(scope, receive, send)
        finally:
            self.in_flight -= 1

    async def _guarded(self, scope: Scope, receive: Receive, send: Send) -> None:
        seen = 0
        started = False

        async def limited_receive() -> Message:
            nonlocal seen
            message = await receive()
            if message["type"] == "http.request":
                seen += len(message.get("body", b""))
                if seen > self.max_body_bytes:
                    raise payload_too_large(self.max_body_bytes)
            return message

        async def watched_send(message: Message) -> None:
            nonlocal started
            started = True
            await send(message)

        try:
            await self.app(scope, limited_receive, watched_send)
        except Exception:
            if started:
                raise
            logger.exception("unhandled error on %s %s", scope["method"], scope["path"])
            self._metrics.errors.labels("internal_error").inc()
            await _send(send, self._internal)


async def _send(send: Send, rendered: Message) -> None:
    await send(
        {
            "type": "http.response.start",
            "status": rendered["status"],
            "headers": rendered["headers"],
        }
    )
    await send({"type": "http.response.body", "body": rendered["body"]})


class HeavyReads:
    """At most ``limit`` reads over the decision log at once; beyond it a 429."""

    def __init__(self, limit: int, metrics: Metrics) -> None:
        self.limit = limit
        self.active = 0
        self._refused = metrics.shed.labels("heavy_read")

    @contextmanager
    def slot(self) -> Iterator[None]:
        """Hold one of the slots for the duration of a read, or raise a 429 at once."""
        if self.active >= self.limit:
            self._refused.inc()
            raise ApiError(
                429,
                "too_many_heavy_reads",
                f"{self.active} reads over the decision log are running, the limit "
                f"(UPSHOT_MAX_HEAVY_READS); retry after {HEAVY_RETRY_AFTER} s, or narrow "
                "the window with since/until.",
                {"limit": self.limit, "retry_after_seconds": HEAVY_RETRY_AFTER},
                headers={"Retry-After": str(HEAVY_RETRY_AFTER)},
            )
        self.active += 1
        try:
            yield
        finally:
            self.active -= 1
