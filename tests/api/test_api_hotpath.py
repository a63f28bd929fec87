"""POST /v1/score answers the same through the hot path as through the router.

The hot path (service/api/hotpath.py) skips route matching and FastAPI's request layers
for this one endpoint. An app built without it routes the request as any other; both
must give the same status, body and metrics for valid and invalid requests alike.
"""

from __future__ import annotations

from typing import Any

import httpx
import pytest
from api_support import CAMPAIGN, customers, features_of, started

from service.api.hotpath import HotPath
from service.config import Settings
from service.decisions import DecisionLog

pytestmark = pytest.mark.anyio


def _requests() -> list[tuple[str, bytes, dict[str, str]]]:
    ids, frame = customers(3, seed=41)
    json_type = {"Content-Type": "application/json"}
    good = [
        httpx.Request(
            "POST",
            "/",
            json={"campaign": CAMPAIGN, "customer": {"id": i, "features": features_of(frame, k)}},
        ).content
        for k, i in enumerate(ids)
    ]
    bad_feature = {**features_of(frame, 0), "tenure_months": "many"}
    return [
        *(("valid", body, json_type) for body in good),
        ("unknown campaign", b'{"campaign": "nope", "customer": {"id": "x", "features": {}}}',
         json_type),
        ("not JSON", b'{"campaign": ', json_type),
        ("NaN", b'{"campaign": NaN}', json_type),
        ("missing field", b'{"campaign": "x"}', json_type),
        ("empty body", b"", json_type),
        ("text body", b"campaign=x", {"Content-Type": "text/plain"}),
        (
            "bad feature",
            httpx.Request(
                "POST", "/",
                json={"campaign": CAMPAIGN, "customer": {"id": "B-1", "features": bad_feature}},
            ).content,
            json_type,
        ),
    ]  # fmt: skip


async def _answers(app_client: httpx.AsyncClient) -> list[tuple[str, int, Any]]:
    out = []
    for name, body, headers in _requests():
        response = await app_client.post("/v1/score", content=body, headers=headers)
        out.append((name, response.status_code, response.json()))
    return out


async def test_hot_path_and_router_give_the_same_answers(
    settings: Settings, log: DecisionLog
) -> None:
    hot = started(settings, log=log)
    async with hot as client:
        fast = await _answers(client)
        metrics = (await client.get("/metrics")).text
    routed = started(settings, log=log)
    app = routed.app  # its middleware stack is built on the first request: drop the hot path
    app.user_middleware = [m for m in app.user_middleware if m.cls is not HotPath]
    async with routed as client:
        slow = await _answers(client)
    assert [(n, s) for n, s, _ in fast] == [(n, s) for n, s, _ in slow]
    assert [s for _, s, _ in fast] == [200, 200, 200, 404, 422, 422, 422, 422, 415, 422]
    assert fast == slow  # same bodies, decision ids included (retries of one request)
    # The hot path's requests are counted under the route's template, like routed ones.
    assert 'method="POST",route="/v1/score",status="200"} 3.0' in metrics
    assert 'method="POST",route="/v1/score",status="422"} 5.0' in metrics
    for _, status, body in fast:
        if status == 200:
            assert log.get(body["decision_id"]) is not None
    assert log.counts().decisions == 3
