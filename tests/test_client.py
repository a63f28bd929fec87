"""service.client: typed results, the error shape as ApiError, retries, the bearer key.

These tests fake the network with httpx.MockTransport; tests/api/test_api_uvicorn.py
drives the same client against a real server.
"""

from __future__ import annotations

import json
from typing import Any

import httpx
import pytest

from service.client import ApiError, UpshotClient

DECISION: dict[str, Any] = {
    "decision_id": "0" * 32, "customer_id": "LTC-1", "campaign": "c",
    "model": {"name": "m", "version": "v0001"}, "policy_hash": "h", "action": "email",
    "arm": "email", "uplift": 0.1, "uplift_low": 0.0, "uplift_high": 0.2, "confidence": 0.9,
    "outcome_without_contact": 0.3, "outcome_with_arm": 0.4, "expected_value": 3.6,
    "do_not_contact": False, "explored": False, "holdout": False, "propensity": 0.87,
    "reasons": ["best_ev"],
    "arms": [{"arm": "email", "cost": 0.4, "uplift": 0.1, "uplift_low": 0.0,
              "uplift_high": 0.2, "outcome": 0.4, "expected_value": 3.6,
              "do_not_contact": False}],
}  # fmt: skip


def _client(handler: Any, **kwargs: Any) -> UpshotClient:
    return UpshotClient("http://upshot.test", transport=httpx.MockTransport(handler), **kwargs)


def test_score_sends_the_request_body_and_key_and_parses_the_decision() -> None:
    seen: list[httpx.Request] = []

    def handler(request: httpx.Request) -> httpx.Response:
        seen.append(request)
        return httpx.Response(200, json=DECISION)

    with _client(handler, api_key="ups_secret") as upshot:
        decision = upshot.score("c", "LTC-1", {"tenure_months": 3}, value=12.5)
    assert decision.action == "email" and decision.arms[0].expected_value == 3.6
    (request,) = seen
    assert request.url.path == "/v1/score"
    assert request.headers["authorization"] == "Bearer ups_secret"
    assert json.loads(request.content) == {
        "campaign": "c",
        "customer": {"id": "LTC-1", "features": {"tenure_months": 3}, "value": 12.5},
    }


def test_errors_become_api_errors_with_code_and_details() -> None:
    body = {"error": {"code": "invalid_input", "message": "feature 'x': nope.",
                      "details": {"problems": [{"feature": "x"}]}}}  # fmt: skip
    with _client(lambda r: httpx.Response(422, json=body)) as upshot:
        with pytest.raises(ApiError, match="422 invalid_input") as caught:
            upshot.score("c", "LTC-1", {"x": 1})
    assert caught.value.details == {"problems": [{"feature": "x"}]}
    with _client(lambda r: httpx.Response(500, text="boom")) as upshot:
        with pytest.raises(ApiError) as plain:
            upshot.campaigns()
    assert plain.value.code == "http_error" and plain.value.status == 500


def test_unavailable_answers_are_retried_and_client_errors_are_not() -> None:
    calls = {"n": 0}

    def flaky(request: httpx.Request) -> httpx.Response:
        calls["n"] += 1
        if calls["n"] < 3:
            return httpx.Response(503, json={"error": {"code": "not_ready", "message": "x",
                                                       "details": None}})  # fmt: skip
        return httpx.Response(200, json=DECISION)

    with _client(flaky, retries=2) as upshot:
        assert upshot.score("c", "LTC-1", {}).decision_id == "0" * 32
    assert calls["n"] == 3

    refused = {"n": 0}

    def bad_request(request: httpx.Request) -> httpx.Response:
        refused["n"] += 1
        return httpx.Response(422, json={"error": {"code": "invalid_input", "message": "x",
                                                   "details": None}})  # fmt: skip

    with _client(bad_request, retries=2) as upshot, pytest.raises(ApiError):
        upshot.score("c", "LTC-1", {})
    assert refused["n"] == 1


def test_connection_errors_are_retried_then_raised() -> None:
    calls = {"n": 0}

    def down(request: httpx.Request) -> httpx.Response:
        calls["n"] += 1
        raise httpx.ConnectError("refused", request=request)

    with _client(down, retries=1) as upshot, pytest.raises(httpx.ConnectError):
        upshot.models()
    assert calls["n"] == 2


def test_rank_and_columns_send_their_forms() -> None:
    seen: list[dict[str, Any]] = []
    ranked = {"campaign": "c", "model": {"name": "m", "version": "v"}, "policy_hash": "h",
              "capacity": 1, "budget": None, "contacts": [], "excluded": [],
              "totals": {"candidates": 0, "contacts": 0, "held_out": 0, "excluded": 0,
                         "expected_value": 0.0, "cost": 0.0}}  # fmt: skip

    def handler(request: httpx.Request) -> httpx.Response:
        seen.append(json.loads(request.content))
        return httpx.Response(200, json=ranked)

    with _client(handler) as upshot:
        result = upshot.rank("c", columns={"id": ["a"], "plan": ["classic"]}, capacity=1)
    assert result.capacity == 1
    assert seen[0]["columns"] == {"id": ["a"], "plan": ["classic"]}
    assert seen[0]["capacity"] == 1 and "customers" not in seen[0]
