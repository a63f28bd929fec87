"""Route classes of the service: orjson request parsing, and a lean path for scoring.

:class:`OrjsonRoute` parses JSON bodies with orjson, which is several times faster than
the standard library on large batches and refuses ``NaN`` and ``Infinity`` (not JSON).
Before the body is read, it checks the API key against the role the route requires, so an
unauthenticated caller costs no parsing (the body-size limit is checked even earlier, in
:mod:`service.api.limits`). A body that is not JSON gets a message that says why (a
byte-order mark, invalid UTF-8, nesting too deep, NaN, ...), from :func:`json_problem`.

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

__all__ = ["OrjsonRoute", "ScoringRoute", "json_problem"]

Handler = Callable[[Request], Coroutine[Any, Any, Response]]


class _OrjsonRequest(Request):
    async def json(self) -> Any:
        if not hasattr(self, "_json"):
            raw = await self.body()
            try:
                self._json = orjson.loads(raw)
            except orjson.JSONDecodeError as err:
                raise invalid_json(raw, err.msg, err.pos) from None
        return self._json


class OrjsonRoute(APIRoute):
    """An :class:`~fastapi.routing.APIRoute` whose JSON bodies are parsed by orjson, after
    the API key was checked against the route's role."""

    def get_route_handler(self) -> Handler:
        handler = super().get_route_handler()
        role = required_role(self.endpoint)

        async def parse_with_orjson(request: Request) -> Response:
            if role is not None and not request.app.dependency_overrides:
                state: ServiceState = request.app.state.service
                state.keyring.require(request.headers.get("authorization"), role)
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
        errors = err.errors(include_url=False)
        if errors and errors[0]["type"] == "json_invalid":
            raise invalid_json(raw, errors[0]["msg"]) from None
        raise RequestValidationError([{**e, "loc": ("body", *e["loc"])} for e in errors]) from None


def invalid_json(raw: bytes, parser_message: str, position: int | None = None) -> ApiError:
    """The 422 for a body that is not JSON, saying why (see :func:`json_problem`)."""
    problem = json_problem(raw, parser_message, position)
    return ApiError(
        422,
        "invalid_input",
        f"The body is not valid JSON: {problem}.",
        {"problems": [{"field": "body", "problem": problem}]},
    )


def json_problem(raw: bytes, parser_message: str, position: int | None = None) -> str:
    """Why ``raw`` is not JSON, in words that name the fix (only run on the error path).

    ``position`` is the parser's character offset of the error, when it gives one.
    """
    if raw.startswith(b"\xef\xbb\xbf"):
        return "it starts with a UTF-8 byte-order mark (BOM); send UTF-8 without a BOM"
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as err:
        return f"it is not valid UTF-8 (byte {err.start}); send the body encoded as UTF-8"
    lowered = parser_message.lower()
    if "recursion" in lowered or "depth" in lowered:
        return (
            "it nests arrays or objects deeper than the parser's limit; request bodies need "
            "only a few levels, so flatten it"
        )
    if "out of range" in lowered or "infinity when parsed" in lowered:
        return (
            "a number is beyond the range of a 64-bit float (about 1.8e308 either way); "
            "send a smaller number"
        )
    if position is not None:
        for token in ("NaN", "Infinity", "-Infinity"):
            if text.startswith(token, position):
                return (
                    f"{token} (at character {position}) is not JSON; send null for a missing value"
                )
    detail = parser_message.removeprefix("Invalid JSON: ").strip() or "malformed"
    return f"{detail}; check the syntax (quotes, commas, brackets)"


def required_role(endpoint: Callable[..., Any]) -> str | None:
    """The role an endpoint's API-key parameter requires, or None (no key needed)."""
    roles = _roles()
    hints = get_type_hints(endpoint, include_extras=True)
    for name in inspect.signature(endpoint).parameters:
        call = _dependency(hints.get(name))
        if call in roles:
            return roles[call]
    return None


def _roles() -> dict[Any, str]:
    from service.api.deps import require_admin, require_analyst, require_scorer

    return {require_scorer: "scorer", require_analyst: "analyst", require_admin: "admin"}


def _plan(endpoint: Callable[..., Any]) -> tuple[str, type[BaseModel], str, str, str] | None:
    """Parameter names of (body, state, key) and the key's role, or None if not lean."""
    from service.api.deps import get_state

    roles = _roles()
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
