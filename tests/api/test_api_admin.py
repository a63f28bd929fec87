"""Admin: promote a version, reload campaigns; readiness with missing or tampered models."""

from __future__ import annotations

import json
from collections.abc import Callable
from pathlib import Path

import httpx
import pytest
from api_support import CAMPAIGN, CAMPAIGN_TOML, MODEL, started, train_small

from service.config import Settings
from service.decisions import DecisionLog
from service.registry import ModelRegistry

pytestmark = pytest.mark.anyio

BODY = {"campaign": CAMPAIGN, "customer": {"id": "LTC-ADM", "features": {"tenure_months": 9}}}


@pytest.mark.slow
async def test_promote_switches_the_model_without_a_restart(
    client: httpx.AsyncClient, models_dir: Path
) -> None:
    first = (await client.post("/v1/score", json=BODY)).json()
    assert first["model"]["version"] == "v0001"
    version = train_small(models_dir, random_state=1)  # also promotes; undo to test the API
    ModelRegistry(models_dir).rollback(MODEL, actor="tests", reason="set up the API test")
    promoted = await client.post(
        f"/v1/admin/models/{MODEL}/promote", json={"version": version, "reason": "better Qini"}
    )
    assert promoted.status_code == 200, promoted.text
    assert promoted.json() == {
        "name": MODEL, "champion": version, "previous": "v0001", "campaigns": [CAMPAIGN]
    }  # fmt: skip
    second = (await client.post("/v1/score", json=BODY)).json()
    assert second["model"]["version"] == version
    assert second["decision_id"] != first["decision_id"]
    history = ModelRegistry(models_dir).history(MODEL)[-1]
    assert history["actor"] == "api:anonymous-loopback" and history["reason"] == "better Qini"


async def test_reload_applies_a_valid_file_and_keeps_serving_on_a_broken_one(
    client: httpx.AsyncClient, campaigns_file: Path
) -> None:
    campaigns_file.write_text(CAMPAIGN_TOML.replace("value = 40.0", "value = 55.0"))
    reloaded = await client.post("/v1/admin/campaigns/reload")
    assert reloaded.status_code == 200
    assert reloaded.json()["campaigns"][0]["value"] == 55.0
    campaigns_file.write_text(CAMPAIGN_TOML.replace("exploration = 0.05", "exploration = 2"))
    broken = await client.post("/v1/admin/campaigns/reload")
    assert broken.status_code == 422
    error = broken.json()["error"]
    assert error["code"] == "invalid_policy"
    assert CAMPAIGN in error["message"] and "exploration" in error["message"]
    still = (await client.get("/v1/campaigns")).json()["campaigns"][0]
    assert still["value"] == 55.0
    assert (await client.post("/v1/score", json=BODY)).status_code == 200


async def test_readyz_reports_a_model_tampered_with_after_start(
    client: httpx.AsyncClient, models_dir: Path
) -> None:
    assert (await client.get("/readyz")).json()["ready"] is True
    model_file = models_dir / MODEL / "v0001" / "model.joblib"
    model_file.write_bytes(model_file.read_bytes() + b"tampered")
    response = await client.get("/readyz")
    assert response.status_code == 503
    error = response.json()["error"]
    assert error["code"] == "not_ready"
    assert "v0001" in error["message"] and "verification" in error["message"]


async def test_an_unverifiable_model_is_never_loaded(
    make_settings: Callable[..., Settings], models_dir: Path, log: DecisionLog
) -> None:
    manifest = models_dir / MODEL / "v0001" / "manifest.json"
    content = json.loads(manifest.read_text())
    content["created_at"] = "2001-01-01T00:00:00+00:00"  # an edit the self-digest catches
    manifest.write_text(json.dumps(content))
    async with started(make_settings(), log=log) as http:
        ready = await http.get("/readyz")
        assert ready.status_code == 503
        assert CAMPAIGN in ready.json()["error"]["message"]
        scored = await http.post("/v1/score", json=BODY)
        assert scored.status_code == 503
        assert scored.json()["error"]["code"] == "model_unavailable"
        listing = (await http.get("/v1/campaigns")).json()["campaigns"][0]
        assert listing["ready"] is False and listing["problem"]
    assert log.records_written == 0


async def test_a_missing_model_makes_readyz_fail(
    make_settings: Callable[..., Settings], tmp_path: Path, log: DecisionLog
) -> None:
    empty = tmp_path / "empty-registry"
    async with started(make_settings(models_dir=empty), log=log) as http:
        ready = await http.get("/readyz")
        assert ready.status_code == 503
        assert "no champion" in ready.json()["error"]["message"]
