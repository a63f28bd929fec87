"""Map every error to one HTTP shape: ``{"error": {"code", "message", "details"}}``.

One table turns the classes of :mod:`service.errors` into statuses and codes; FastAPI's
own validation errors, HTTP errors and anything unexpected get the same shape, so a
client needs one parser for every failure.
"""

from __future__ import annotations

import logging
from typing import Any

from fastapi import FastAPI, Request
from fastapi.exceptions import RequestValidationError
from starlette.exceptions import HTTPException as StarletteHTTPException

from service.api.responses import OrjsonResponse
from service.errors import (
    BundleError,
    ConfigError,
    ConflictError,
    DataError,
    DecisionLogError,
    NotFittedError,
    NotFoundError,
    PolicyError,
    RegistryError,
    UpshotError,
)

__all__ = ["ApiError", "error_body", "install_error_handlers"]

logger = logging.getLogger(__name__)

# Most specific class first: the first match in the MRO wins.
_BY_CLASS: dict[type[UpshotError], tuple[int, str]] = {
    PolicyError: (422, "invalid_policy"),
    DataError: (422, "invalid_input"),
    NotFoundError: (404, "not_found"),
    ConflictError: (409, "conflict"),
    RegistryError: (409, "registry_conflict"),
    BundleError: (503, "model_unavailable"),
    NotFittedError: (503, "model_unavailable"),
    DecisionLogError: (503, "decision_log_unavailable"),
    ConfigError: (500, "config_error"),
}

_BY_STATUS = {
    400: "bad_request",
    401: "unauthorized",
    403: "forbidden",
    404: "not_found",
    405: "method_not_allowed",
    406: "not_acceptable",
    413: "payload_too_large",
    429: "too_many_requests",
    415: "unsupported_media_type",
    422: "invalid_input",
    503: "not_ready",
}


class ApiError(StarletteHTTPException):
    """An HTTP-level refusal with a stable code and optional details."""

    def __init__(
        self,
        status_code: int,
        code: str,
        message: str,
        details: Any = None,
        headers: dict[str, str] | None = None,
    ) -> None:
        super().__init__(status_code=status_code, detail=message, headers=headers)
        self.code = code
        self.details = details


def error_body(code: str, message: str, details: Any = None) -> dict[str, Any]:
    """The one error shape."""
    return {"error": {"code": code, "message": message, "details": details}}


def _respond(
    request: Request,
    status: int,
    code: str,
    message: str,
    details: Any,
    headers: dict[str, str] | None = None,
) -> OrjsonResponse:
    metrics = getattr(request.app.state, "metrics", None)
    if metrics is not None:
        metrics.errors.labels(code).inc()
    return OrjsonResponse(error_body(code, message, details), status_code=status, headers=headers)


def _status_of(exc: UpshotError) -> tuple[int, str]:
    for cls in type(exc).__mro__:
        if cls in _BY_CLASS:
            return _BY_CLASS[cls]
    return 500, "internal_error"


async def _upshot_error(request: Request, exc: Exception) -> OrjsonResponse:
    assert isinstance(exc, UpshotError)
    status, code = _status_of(exc)
    if status >= 500:
        logger.error("request failed: %s", exc)
    return _respond(request, status, code, str(exc), getattr(exc, "details", None))


async def _http_error(request: Request, exc: Exception) -> OrjsonResponse:
    assert isinstance(exc, StarletteHTTPException)
    code = getattr(exc, "code", None) or _BY_STATUS.get(exc.status_code, "http_error")
    message = exc.detail if isinstance(exc.detail, str) else str(exc.detail)
    if exc.status_code == 404 and not isinstance(exc, ApiError):
        message = f"No endpoint at {request.url.path}; see /docs for the endpoints."
    if exc.status_code == 405 and not isinstance(exc, ApiError):
        message = f"{request.method} is not allowed on {request.url.path}; see /docs."
    details = getattr(exc, "details", None)
    return _respond(
        request, exc.status_code, code, message, details, getattr(exc, "headers", None)
    )


async def _validation_error(request: Request, exc: Exception) -> OrjsonResponse:
    assert isinstance(exc, RequestValidationError)
    problems = [_problem(e) for e in exc.errors()]
    first = problems[0] if problems else {"field": "body", "problem": "invalid"}
    more = f" (and {len(problems) - 1} more)" if len(problems) > 1 else ""
    message = f"Field {first['field']!r}: {first['problem']}{more}; fix the request body."
    return _respond(request, 422, "invalid_input", message, {"problems": problems[:50]})


def _problem(error: Any) -> dict[str, Any]:
    loc = [str(p) for p in error.get("loc", ()) if p != "body"]
    problem: dict[str, Any] = {"field": ".".join(loc) or "body", "problem": error.get("msg", "")}
    if error.get("type") == "json_invalid":
        problem["field"] = f"body (at character {loc[0]})" if loc else "body"
        problem["problem"] = f"the body is not valid JSON ({error.get('msg', 'malformed')})"
    return problem


async def _unexpected(request: Request, exc: Exception) -> OrjsonResponse:
    logger.exception("unhandled error on %s %s", request.method, request.url.path)
    return _respond(
        request, 500, "internal_error", "Internal error; the request was not carried out.", None
    )


def install_error_handlers(app: FastAPI) -> None:
    """Register the handlers that give every failure the one error shape."""
    app.add_exception_handler(UpshotError, _upshot_error)
    app.add_exception_handler(StarletteHTTPException, _http_error)
    app.add_exception_handler(RequestValidationError, _validation_error)
    app.add_exception_handler(Exception, _unexpected)
