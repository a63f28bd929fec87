"""One error shape for every failure, the OpenAPI document, and the metrics."""

from __future__ import annotations

import httpx
import pytest
from api_support import CAMPAIGN

pytestmark = pytest.mark.anyio


def _shape(response: httpx.Response) -> dict[str, object]:
    body = response.json()
    assert set(body) == {"error"}
    assert set(body["error"]) == {"code", "message", "details"}
    assert body["error"]["message"].strip()
    error: dict[str, object] = body["error"]
    return error


async def test_every_failure_has_the_one_error_shape(client: httpx.AsyncClient) -> None:
    cases = [
        (await client.get("/nowhere"), 404, "not_found"),
        (await client.get("/v1/score"), 405, "method_not_allowed"),
        (await client.post("/v1/score", json={"campaign": CAMPAIGN}), 422, "invalid_input"),
        (await client.post("/v1/score", json=[1, 2]), 422, "invalid_input"),
        (await client.post("/v1/score", content=b"{oops", headers={"content-type":
                                                                   "application/json"}), 422,
         "invalid_input"),
        (await client.post("/v1/score", content=b"a=1", headers={"content-type":
                                                                 "application/x-www-form-urlencoded"}),
         415, "unsupported_media_type"),
        (await client.post("/v1/models"), 405, "method_not_allowed"),
        (await client.post("/v1/admin/models/larkspur/promote", json={"version": "v9999",
                                                                       "reason": "x"}),
         404, "not_found"),
    ]  # fmt: skip
    for response, status, code in cases:
        assert response.status_code == status, (response.request.url, response.text)
        assert _shape(response)["code"] == code


async def test_validation_errors_name_the_field(client: httpx.AsyncClient) -> None:
    response = await client.post("/v1/score", json={"campaign": CAMPAIGN, "customer": {}})
    error = _shape(response)
    assert "customer.id" in str(error["message"])
    problems = error["details"]["problems"]  # type: ignore[index]
    assert {"field": "customer.id", "problem": "Field required"} in problems


async def test_openapi_lists_every_endpoint(client: httpx.AsyncClient) -> None:
    document = (await client.get("/openapi.json")).json()
    paths = set(document["paths"])
    assert {
        "/v1/score", "/v1/score/batch", "/v1/rank", "/v1/models", "/v1/campaigns", "/healthz",
        "/readyz", "/metrics", "/v1/admin/models/{name}/promote", "/v1/admin/campaigns/reload",
    } <= paths  # fmt: skip
    score = document["paths"]["/v1/score"]["post"]
    assert score["requestBody"]["content"]["application/json"]["schema"]["$ref"].endswith(
        "ScoreRequest"
    )
    assert "Decision" in document["components"]["schemas"]
    assert (await client.get("/docs")).status_code == 200


async def test_metrics_count_requests_decisions_and_errors(client: httpx.AsyncClient) -> None:
    body = {"campaign": CAMPAIGN, "customer": {"id": "LTC-MET", "features": {}}}
    assert (await client.post("/v1/score", json=body)).status_code == 200
    await client.post("/v1/score", json={"campaign": CAMPAIGN})
    text = (await client.get("/metrics")).text
    assert 'upshot_http_requests_total{method="POST",route="/v1/score",status="200"} 1.0' in text
    assert 'upshot_http_errors_total{code="invalid_input"} 1.0' in text
    assert "upshot_http_request_duration_seconds_bucket" in text
    assert "upshot_decisions_total{action=" in text and f'campaign="{CAMPAIGN}"' in text
    assert f'upshot_exploration_share{{campaign="{CAMPAIGN}"}}' in text
    assert 'upshot_model_info{campaign="renewal",model="larkspur",version="v0001"} 1.0' in text


async def test_campaigns_carry_the_responsible_use_notice(client: httpx.AsyncClient) -> None:
    listing = (await client.get("/v1/campaigns")).json()
    assert "opt-outs" in listing["notice"] and "election law" in listing["notice"]
    (campaign,) = listing["campaigns"]
    assert campaign["name"] == CAMPAIGN and campaign["ready"] is True
    assert campaign["arms"] == {"email": 0.40, "call": 3.50}
    assert campaign["suppressed"] == 1
    assert "salt" not in campaign
    models = (await client.get("/v1/models")).json()["models"]
    assert models[0]["name"] == "larkspur" and models[0]["champion"] == "v0001"
    assert models[0]["serving"] == {CAMPAIGN: "v0001"}
    assert {f["name"] for f in models[0]["features"]} >= {"tenure_months", "plan"}
