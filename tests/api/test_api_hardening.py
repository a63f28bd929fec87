"""Regression tests of the hardening probe: one per reproducer (numbers past the float
range, the declared contract, auth before the body, bounded heavy reads, shedding, safe
reloads, JSON error text)."""

from __future__ import annotations

import asyncio
from collections.abc import Callable
from pathlib import Path
from typing import Any

import httpx
import pytest
from api_support import CAMPAIGN, CAMPAIGN_TOML, MODEL, customers, features_of, started

from service.api.auth import hash_key, new_key
from service.api.examples import RANKED_LIST
from service.api.limits import RequestLimits
from service.api.metrics import Metrics
from service.api.schemas import Decision, RankedList
from service.config import Settings
from service.decisions import DecisionLog

pytestmark = pytest.mark.anyio

SCORER, ANALYST, ADMIN = new_key(), new_key(), new_key()
KEYS = f"crm:scorer:{hash_key(SCORER)},ana:analyst:{hash_key(ANALYST)},ops:admin:{hash_key(ADMIN)}"
HUGE = int("1" + "0" * 309)  # a whole number past the largest 64-bit float (~1.8e308)
J = {"Content-Type": "application/json"}


def _auth(key: str) -> dict[str, str]:
    return {"Authorization": f"Bearer {key}"}


def _features() -> dict[str, Any]:
    _, frame = customers(1)
    return features_of(frame, 0)


def _problem(response: httpx.Response) -> str:
    assert response.status_code == 422, response.text
    error = response.json()["error"]
    assert error["code"] == "invalid_input"
    return str(error["message"])


# -- 1. numbers past the float range, capacity past 64 bits --------------------------------


async def test_whole_numbers_past_the_float_range_are_a_422_on_every_scoring_form(
    client: httpx.AsyncClient,
) -> None:
    features = {**_features(), "tenure_months": HUGE}
    one = {"campaign": CAMPAIGN, "customer": {"id": "LTC-H1", "features": features}}
    message = _problem(await client.post("/v1/score", json=one))
    assert "tenure_months" in message and "310 digits" in message
    rows = {"campaign": CAMPAIGN, "customers": [{"id": "LTC-H1", "features": features}]}
    assert "tenure_months" in _problem(await client.post("/v1/score/batch", json=rows))
    assert "tenure_months" in _problem(await client.post("/v1/rank", json=rows))
    columns = {"campaign": CAMPAIGN, "columns": {"id": ["LTC-H1", "LTC-H2"],
                                                 "tenure_months": [3, HUGE]}}  # fmt: skip
    response = await client.post("/v1/score/batch", json=columns)
    assert "customer 1, feature 'tenure_months'" in _problem(response)
    values = {"campaign": CAMPAIGN, "columns": {"id": ["LTC-H1"], "value": [HUGE]}}
    assert "'value'" in _problem(await client.post("/v1/score/batch", json=values))
    # A category sent as a huge whole number is refused too (it cannot become text).
    plan = {**_features(), "plan": 10**3000}
    body = {"campaign": CAMPAIGN, "customer": {"id": "LTC-H3", "features": plan}}
    response = await client.post("/v1/score", json=body)
    assert response.status_code == 422 and "plan" in response.text


async def test_a_capacity_past_64_bits_is_a_422_naming_capacity(client: httpx.AsyncClient) -> None:
    body = {"campaign": CAMPAIGN, "capacity": 2**64, "customers": [{"id": "D5"}]}
    response = await client.post("/v1/rank", json=body)
    assert "capacity" in _problem(response)


async def test_an_unexpected_error_is_a_500_in_the_one_shape_without_reraising(
    settings: Settings, log: DecisionLog
) -> None:
    async with started(settings, log=log) as http:
        app = http._transport.app  # type: ignore[attr-defined]

        @app.get("/boom")
        async def boom() -> None:
            raise RuntimeError("a bug")

        # httpx's ASGI transport re-raises what escapes the app: nothing does.
        response = await http.get("/boom")
        assert response.status_code == 500
        assert response.json()["error"]["code"] == "internal_error"
        assert (await http.get("/healthz")).status_code == 200


# -- 2. the contract ---------------------------------------------------------------------


async def test_openapi_declares_every_body_and_status(client: httpx.AsyncClient) -> None:
    doc = (await client.get("/openapi.json")).json()
    for path, operations in doc["paths"].items():
        for method, op in operations.items():
            where = f"{method.upper()} {path}"
            ok = op["responses"]["200"]["content"]
            if path == "/metrics":
                assert ok == {"text/plain": {"schema": {"type": "string"}}}
                continue
            assert ok["application/json"]["schema"] != {"type": "string"}, where
            if path.startswith("/v1/"):
                assert {"401", "403", "503"} <= set(op["responses"]), where
                assert "Retry-After" in op["responses"]["503"]["headers"], where
            for status, response in op["responses"].items():
                if status != "200":
                    schema = response["content"]["application/json"]["schema"]
                    assert schema == {"$ref": "#/components/schemas/ErrorBody"}, where
    score = doc["paths"]["/v1/score"]["post"]["requestBody"]["content"]["application/json"]
    assert score["examples"]["demo"]["value"]["campaign"] == "larkspur-renewal"
    # The response examples are answers of the demo model: they fit the declared models.
    answer = doc["paths"]["/v1/score"]["post"]["responses"]["200"]["content"]
    assert Decision.model_validate(answer["application/json"]["example"]).campaign
    RankedList.model_validate(RANKED_LIST)


# -- 4. auth before the body ---------------------------------------------------------------


@pytest.mark.parametrize(
    ("path", "key"),
    [
        ("/v1/outcomes", None),
        ("/v1/admin/models/larkspur/promote", None),
        ("/v1/admin/campaigns/reload", SCORER),
        ("/v1/score", None),
        ("/v1/rank", "ups_wrong"),
    ],
)
async def test_auth_is_checked_before_the_body_is_read(
    make_settings: Callable[..., Settings], log: DecisionLog, path: str, key: str | None
) -> None:
    settings = make_settings(api_keys=KEYS)
    reads = 0

    async def receive() -> dict[str, Any]:
        nonlocal reads
        reads += 1
        return {"type": "http.request", "body": b'{"outcomes": []}', "more_body": False}

    sent: list[dict[str, Any]] = []

    async def send(message: dict[str, Any]) -> None:
        sent.append(message)

    headers = [(b"content-type", b"application/json"), (b"content-length", b"60000000")]
    if key is not None:
        headers.append((b"authorization", f"Bearer {key}".encode()))
    async with started(settings, log=log) as http:
        app = http._transport.app  # type: ignore[attr-defined]
        scope = {"type": "http", "method": "POST", "path": path, "raw_path": path.encode(),
                 "query_string": b"", "headers": headers, "http_version": "1.1",
                 "scheme": "http", "server": ("upshot.test", 80), "client": ("t", 1),
                 "root_path": "", "app": app}  # fmt: skip
        await app(scope, receive, send)
    assert sent[0]["status"] == (403 if key == SCORER else 401)
    assert reads == 0


# -- 5. heavy reads: role, default window, concurrency cap ---------------------------------


async def test_lift_needs_an_analyst_key_has_a_default_window_and_a_concurrency_cap(
    make_settings: Callable[..., Settings], log: DecisionLog
) -> None:
    settings = make_settings(api_keys=KEYS, max_heavy_reads=1)
    url = f"/v1/campaigns/{CAMPAIGN}/lift"
    async with started(settings, log=log) as http:
        assert (await http.get(url, headers=_auth(SCORER))).status_code == 403
        body = {"campaign": CAMPAIGN, "customer": {"id": "LTC-L1", "features": _features()}}
        assert (await http.post("/v1/score", json=body, headers=_auth(SCORER))).is_success
        # One decision and no outcome: the window (default: the last 30 days) holds it.
        answer = await http.get(url, headers=_auth(ANALYST))
        assert answer.status_code == 422 and "outcome" in answer.text
        old = await http.get(url, params={"until": "2020-01-01"}, headers=_auth(ANALYST))
        assert old.status_code == 404 and "2019-12-02" in old.text  # 30 days before
        bad = await http.get(url, params={"until": "9999-12-31T23:00-05:00"},
                             headers=_auth(ANALYST))  # fmt: skip
        assert bad.status_code == 422 and "until" in bad.text
        state = http._transport.app.state.service  # type: ignore[attr-defined]
        with state.heavy_reads.slot():  # another read is running
            busy = await http.get(url, headers=_auth(ADMIN))
        assert busy.status_code == 429
        assert busy.headers["retry-after"] == "5"
        assert busy.json()["error"]["code"] == "too_many_heavy_reads"
        metrics = (await http.get("/metrics")).text
        assert 'upshot_http_shed_total{reason="heavy_read"} 1.0' in metrics


# -- 6. shedding ---------------------------------------------------------------------------


async def test_requests_beyond_the_in_flight_limit_are_shed_at_once() -> None:
    release = asyncio.Event()
    metrics = Metrics()

    async def slow_app(scope: Any, receive: Any, send: Any) -> None:
        await release.wait()
        await send({"type": "http.response.start", "status": 200, "headers": []})
        await send({"type": "http.response.body", "body": b"{}"})

    limits = RequestLimits(slow_app, max_in_flight=2, max_body_bytes=1024, metrics=metrics)
    http = httpx.AsyncClient(transport=httpx.ASGITransport(app=limits), base_url="http://t")
    async with http:
        held = [asyncio.create_task(http.get("/v1/models")) for _ in range(2)]
        while limits.in_flight < 2:
            await asyncio.sleep(0)
        shed = await http.get("/v1/models")
        assert shed.status_code == 503
        assert shed.headers["retry-after"] == "1"
        assert shed.json()["error"]["code"] == "overloaded"
        assert "UPSHOT_MAX_IN_FLIGHT" in shed.json()["error"]["message"]
        probe = asyncio.create_task(http.get("/healthz"))  # probes are never shed
        while limits.in_flight < 3:
            await asyncio.sleep(0)
        release.set()
        assert [r.status_code for r in await asyncio.gather(*held, probe)] == [200, 200, 200]
        assert limits.in_flight == 0
        assert (await http.get("/v1/models")).status_code == 200  # recovered
    text = metrics.render().decode()
    assert 'upshot_http_shed_total{reason="in_flight"} 1.0' in text
    assert "upshot_http_in_flight 0.0" in text


async def test_a_declared_body_above_the_limit_is_refused_unread() -> None:
    async def app(scope: Any, receive: Any, send: Any) -> None:
        raise AssertionError("the app must not run")

    limits = RequestLimits(app, max_in_flight=2, max_body_bytes=1024, metrics=Metrics())
    http = httpx.AsyncClient(transport=httpx.ASGITransport(app=limits), base_url="http://t")
    async with http:
        response = await http.post("/v1/score", content=b"x" * 2000, headers=J)
    assert response.status_code == 413
    assert response.json()["error"]["code"] == "payload_too_large"


# -- 7. reloads ----------------------------------------------------------------------------


async def test_a_reload_naming_a_missing_model_is_refused_and_the_old_policy_serves(
    client: httpx.AsyncClient, campaigns_file: Path
) -> None:
    campaigns_file.write_text(CAMPAIGN_TOML.replace(f'model = "{MODEL}"', 'model = "nosuch"'))
    response = await client.post("/v1/admin/campaigns/reload")
    assert response.status_code == 422
    error = response.json()["error"]
    assert error["code"] == "invalid_policy" and "nosuch" in error["message"]
    assert "previous campaigns keep serving" in error["message"]
    assert error["details"]["problems"]
    body = {"campaign": CAMPAIGN, "customer": {"id": "LTC-R1", "features": _features()}}
    assert (await client.post("/v1/score", json=body)).status_code == 200
    assert (await client.get("/readyz")).status_code == 200


async def test_reload_and_readyz_agree_about_a_tampered_champion(
    client: httpx.AsyncClient, models_dir: Path
) -> None:
    model_file = models_dir / MODEL / "v0001" / "model.joblib"
    model_file.write_bytes(model_file.read_bytes() + b"tampered")
    reload = await client.post("/v1/admin/campaigns/reload")
    ready = await client.get("/readyz")
    assert (reload.status_code, ready.status_code) == (422, 503)
    assert "verification" in reload.json()["error"]["message"]


# -- 8. JSON error text --------------------------------------------------------------------


@pytest.mark.parametrize("path", ["/v1/score", "/v1/outcomes"])
@pytest.mark.parametrize(
    ("raw", "says"),
    [
        (b'\xef\xbb\xbf{"campaign": "x"}', "byte-order mark"),
        (b'{"campaign": "\xff\xfe"}', "not valid UTF-8"),
        (b"[" * 100_000, "nests"),
        (b'{"campaign": "x",', "syntax"),
    ],
)
async def test_a_body_that_is_not_json_gets_a_message_saying_why(
    client: httpx.AsyncClient, path: str, raw: bytes, says: str
) -> None:
    message = _problem(await client.post(path, content=raw, headers=J))
    assert says in message
    assert "NaN" not in message


async def test_nan_and_huge_literals_are_named_where_the_parser_refuses_them(
    client: httpx.AsyncClient,
) -> None:
    raw = b'{"outcomes": [{"decision_id": "d", "outcome": NaN}]}'
    message = _problem(await client.post("/v1/outcomes", content=raw, headers=J))
    assert "NaN (at character" in message and "null" in message
    raw = b'{"outcomes": [{"decision_id": "d", "outcome": 1e999}]}'
    assert "64-bit float" in _problem(await client.post("/v1/outcomes", content=raw, headers=J))
