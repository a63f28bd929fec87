"""``POST /v1/score`` straight to its handler, past the router.

A CRM asks about one customer per page load, so this endpoint's fixed cost matters more
than any other's. Matching the path against every route and wrapping the handler in
FastAPI's request/response layers (two exit stacks, the exception wrapper) cost about as
much as deciding for the customer. :class:`HotPath` sits inside the shedding, body-limit
and metrics middleware and hands ``POST /v1/score`` to the route's own handler (the lean
handler of :class:`~service.api.routing.ScoringRoute`: API key, body, state), so the
answer, its errors and its metrics are those of the routed request; a test sends the
same requests both ways and compares. Everything else, and every request while tests
override dependencies, takes the normal path.
"""

from __future__ import annotations

from collections.abc import Awaitable, Callable
from typing import Any

from fastapi import FastAPI, Request, Response
from fastapi.routing import APIRoute
from starlette.types import ASGIApp, Receive, Scope, Send

__all__ = ["HotPath"]

PATH = "/v1/score"

Handler = Callable[[Request], Awaitable[Response]]


class HotPath:
    """ASGI middleware: ``POST /v1/score`` without route matching (see module)."""

    def __init__(self, app: ASGIApp, owner: FastAPI) -> None:
        self.app = app
        self.owner = owner
        self._route: tuple[APIRoute, Handler] | None = None

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if (
            scope["type"] != "http"
            or scope["path"] != PATH
            or scope["method"] != "POST"
            or self.owner.dependency_overrides
        ):
            await self.app(scope, receive, send)
            return
        route, handler = self._route or self._find()
        scope["route"] = route  # what the router would set (metrics label by it)
        request = Request(scope, receive, send)
        try:
            response = await handler(request)
        except Exception as exc:
            on_error = self._error_handler(exc)
            if on_error is None:
                raise  # as routed: the server-error middleware answers
            response = await on_error(request, exc)
        await response(scope, receive, send)

    def _find(self) -> tuple[APIRoute, Handler]:
        routes = list(self.owner.router.routes)
        while routes:
            route = routes.pop(0)
            if (
                isinstance(route, APIRoute)
                and route.path == PATH
                and "POST" in (route.methods or ())
            ):
                self._route = (route, route.get_route_handler())
                return self._route
            included = getattr(route, "original_router", None)  # include_router (no prefix)
            if included is not None:
                routes.extend(included.routes)
        raise LookupError(f"no POST {PATH} route to shortcut")

    def _error_handler(self, exc: Exception) -> Callable[..., Any] | None:
        """The app's handler for ``exc`` as Starlette's exception middleware finds it
        (nearest class in the MRO); the catch-all ``Exception`` handler is the server
        error middleware's, which the exception reaches by being raised."""
        handlers = self.owner.exception_handlers
        for cls in type(exc).__mro__:
            if cls is Exception:
                return None
            if cls in handlers:
                handler: Callable[..., Any] = handlers[cls]
                return handler
        return None
