"""What the OpenAPI document declares beyond the models: error statuses and examples.

Every operation declares each status it can answer with the one error shape
(:class:`~service.api.schemas.ErrorBody`), including 503 ``overloaded`` (shedding, see
:mod:`service.api.limits`), which any route but the probes may answer.
"""

from __future__ import annotations

from typing import Any

from service.api.schemas import ErrorBody

__all__ = ["error_responses", "request_examples", "with_example"]

_RETRY_AFTER = {
    "Retry-After": {
        "description": "Seconds to wait before retrying (sent with 429 and with 503 "
        "`overloaded`).",
        "schema": {"type": "integer"},
    }
}

_DESCRIPTIONS = {
    401: "`unauthorized`: no or unknown API key (answered before the body is read).",
    403: "`forbidden`: the key's role does not allow this endpoint.",
    404: "`not_found`: unknown campaign, model or version.",
    409: "`conflict` / `registry_conflict`: the change cannot be made.",
    413: "`payload_too_large` / `batch_too_large`: body above UPSHOT_MAX_BODY_BYTES "
    "(refused before it is read) or batch above UPSHOT_MAX_BATCH.",
    415: "`unsupported_media_type`: a body that is not JSON.",
    422: "`invalid_input` (or `invalid_policy`): the request or the campaign file cannot be "
    "used; the message names the field and the fix.",
    429: "`too_many_heavy_reads`: UPSHOT_MAX_HEAVY_READS reads over the decision log are "
    "running; retry after `Retry-After` seconds.",
    503: "`overloaded`: UPSHOT_MAX_IN_FLIGHT requests are in progress, retry after "
    "`Retry-After` seconds; or `model_unavailable` / `decision_log_unavailable`.",
}


def error_responses(*statuses: int) -> dict[int | str, dict[str, Any]]:
    """The ``responses`` of an operation that may answer ``statuses`` (and 503)."""
    out: dict[int | str, dict[str, Any]] = {}
    for status in sorted({*statuses, 503}):
        entry: dict[str, Any] = {"model": ErrorBody, "description": _DESCRIPTIONS[status]}
        if status in (429, 503):
            entry["headers"] = _RETRY_AFTER
        out[status] = entry
    return out


def with_example(
    responses: dict[int | str, dict[str, Any]], example: Any
) -> dict[int | str, dict[str, Any]]:
    """``responses`` plus an example of the 200 answer."""
    return {**responses, 200: {"content": {"application/json": {"example": example}}}}


def request_examples(**examples: Any) -> dict[str, Any]:
    """``openapi_extra`` that shows request-body examples (the first fills "Try it out")."""
    return {
        "requestBody": {
            "content": {
                "application/json": {
                    "examples": {
                        name: {"summary": name.replace("_", " "), "value": value}
                        for name, value in examples.items()
                    }
                }
            }
        }
    }
