"""Route classes of the service: orjson request parsing, and a lean path for scoring.

:class:`OrjsonRoute` parses JSON bodies with orjson, which is several times faster than
the standard library on large batches and refuses ``NaN`` and ``Infinity`` (not JSON).

:class:`ScoringRoute` serves the hot endpoints (``/v1/score``, ``/v1/score/batch``,
``/v1/rank``), whose handlers take exactly one body model, the service state and an API
key. It resolves those three itself, parsing the body straight from bytes with pydantic,
instead of running FastAPI's general dependency solver, which costs more per request
than the whole decision for one customer. The handler signature, and so the OpenAPI
document, is unchanged; errors are raised as the same exception types and so get the
same shape. When the app has dependency overrides (tests), it uses the general path.
"""

from __future__ import annotations

import inspect
from collections.abc import Callable, Coroutine
from typing import Annotated, Any, get_args, get_origin, get_type_hints

import orjson
from fastapi import Request, Response
from fastapi.exceptions import RequestValidationError
from fastapi.params import Depends
from fastapi.routing import APIRoute
from pydantic import BaseModel, ValidationError

from service.api.errors import ApiError
from service.api.state import ServiceState

__all__ = ["OrjsonRoute", "ScoringRoute"]

Handler = Callable[[Request], Coroutine[Any, Any, Response]]


class _OrjsonRequest(Request):
    async def json(self) -> Any:
        if not hasattr(self, "_json"):
            self._json = orjson.loads(await self.body())
        return self._json


class OrjsonRoute(APIRoute):
    """An :class:`~fastapi.routing.APIRoute` whose JSON bodies are parsed by orjson."""

    def get_route_handler(self) -> Handler:
        handler = super().get_route_handler()

        async def parse_with_orjson(request: Request) -> Response:
            return await handler(_OrjsonRequest(request.scope, request.receive))

        return parse_with_orjson


class ScoringRoute(OrjsonRoute):
    """A route whose handler takes one body model, the state and an API key (see module)."""

    def get_route_handler(self) -> Handler:
        general = super().get_route_handler()
        plan = _plan(self.endpoint)
        if plan is None:
            return general
        endpoint = self.endpoint
        body_name, model, state_name, key_name, role = plan

        async def lean(request: Request) -> Response:
            if request.app.dependency_overrides:
                return await general(request)
            state: ServiceState = request.app.state.service
            principal = state.keyring.require(request.headers.get("authorization"), role)
            body = _parse(model, await request.body(), request.headers.get("content-type"))
            response: Response = await endpoint(
                **{body_name: body, state_name: state, key_name: principal}
            )
            return response

        return lean


def _parse(model: type[BaseModel], raw: bytes, content_type: str | None) -> BaseModel:
    if content_type is not None and "json" not in content_type.split(";")[0].lower():
        raise ApiError(
            415,
            "unsupported_media_type",
            f"Content-Type {content_type!r} is not JSON; send the body as application/json.",
        )
    if not raw:
        raise RequestValidationError(
            [{"type": "missing", "loc": ("body",), "msg": "Field required", "input": None}]
        )
    try:
        return model.model_validate_json(raw)
    except ValidationError as err:
        errors = [{**e, "loc": ("body", *e["loc"])} for e in err.errors(include_url=False)]
        raise RequestValidationError(errors) from None


def _plan(endpoint: Callable[..., Any]) -> tuple[str, type[BaseModel], str, str, str] | None:
    """Parameter names of (body, state, key) and the key's role, or None if not lean."""
    from service.api.deps import get_state, require_admin, require_scorer

    roles = {require_scorer: "scorer", require_admin: "admin"}
    hints = get_type_hints(endpoint, include_extras=True)
    body = state = key = role = None
    model: type[BaseModel] | None = None
    for name in inspect.signature(endpoint).parameters:
        hint = hints.get(name)
        call = _dependency(hint)
        if call is get_state:
            state = name
        elif call in roles:
            key, role = name, roles[call]
        elif call is None and inspect.isclass(hint) and issubclass(hint, BaseModel):
            body, model = name, hint
        else:
            return None
    if body is None or model is None or state is None or key is None or role is None:
        return None
    return body, model, state, key, role


def _dependency(hint: Any) -> Any:
    if get_origin(hint) is not Annotated:
        return None
    for meta in get_args(hint)[1:]:
        if isinstance(meta, Depends):
            return meta.dependency
    return None
