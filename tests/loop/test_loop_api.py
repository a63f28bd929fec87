"""The learning-loop endpoints in-process: POST /v1/outcomes and GET .../lift."""

from __future__ import annotations

from collections.abc import AsyncIterator
from typing import Any

import anyio
import numpy as np
import pytest
from loop_world import (
    ACTIONS,
    CAMPAIGN,
    draw_outcomes,
    make_app,
    score_columns,
    started,
    write_campaigns,
)

from service.decisions import DecisionLog
from service.simulation import simulate

pytestmark = pytest.mark.anyio


@pytest.fixture
async def api(world, tmp_path) -> AsyncIterator[tuple[Any, dict, np.ndarray, Any]]:
    """A started app whose log holds one scored day (1,500 customers), and its truth."""
    app = make_app(world.models_dir, write_campaigns(tmp_path / "c.toml"), tmp_path / "d.db")
    sim = simulate("larkspur", 1500, random_state=31)
    async with started(app) as client:
        cols = await score_columns(client, sim, 31)
        action = np.array([ACTIONS[a] for a in cols["action"]])
        yield client, cols, draw_outcomes(sim, action, seed=32), sim


def _payload(cols: dict, y: np.ndarray, rows: range | list[int]) -> dict:
    return {
        "outcomes": [
            {"decision_id": cols["decision_id"][i], "outcome": float(y[i]),
             "observed_at": "2026-03-08T12:00:00Z"}
            for i in rows
        ]
    }  # fmt: skip


async def test_outcomes_are_idempotent_conflicts_refused_unknown_reported(api) -> None:
    client, cols, y, _ = api
    n = len(y)
    first = await client.post("/v1/outcomes", json=_payload(cols, y, range(n)))
    assert first.status_code == 200, first.text
    assert first.json() == {"recorded": n, "unchanged": 0, "unknown": 0, "unknown_ids": []}
    again = await client.post("/v1/outcomes", json=_payload(cols, y, range(n)))
    assert again.json()["unchanged"] == n and again.json()["recorded"] == 0
    lift_before = (await client.get(f"/v1/campaigns/{CAMPAIGN}/lift")).json()
    flipped = y.copy()
    flipped[5] = 1 - flipped[5]
    conflict = await client.post("/v1/outcomes", json=_payload(cols, flipped, [5]))
    assert conflict.status_code == 409
    error = conflict.json()["error"]
    assert error["code"] == "conflict"
    assert error["details"]["conflicts"][0]["decision_id"] == cols["decision_id"][5]
    assert (
        await client.get(f"/v1/campaigns/{CAMPAIGN}/lift")
    ).json() == lift_before  # nothing changed
    mixed = _payload(cols, y, [0])
    mixed["outcomes"].append({"decision_id": "never-issued", "outcome": 1})
    reply = await client.post("/v1/outcomes", json=mixed)
    assert reply.status_code == 200
    assert reply.json() == {
        "recorded": 0, "unchanged": 1, "unknown": 1, "unknown_ids": ["never-issued"],
    }  # fmt: skip


async def test_outcome_bodies_are_checked_field_by_field(api) -> None:
    client = api[0]
    bad = await client.post(
        "/v1/outcomes", json={"outcomes": [{"decision_id": "x", "outcome": "yes"}]}
    )
    assert bad.status_code == 422 and bad.json()["error"]["code"] == "invalid_input"
    naive = await client.post(
        "/v1/outcomes",
        json={"outcomes": [{"decision_id": "x", "outcome": 1, "observed_at": "2026-03-08"}]},
    )
    assert naive.status_code == 422 and "UTC offset" in naive.json()["error"]["message"]
    empty = await client.post("/v1/outcomes", json={"outcomes": []})
    assert empty.status_code == 422


async def test_lift_endpoint_covers_the_truth(api) -> None:
    client, cols, y, sim = api
    await client.post("/v1/outcomes", json=_payload(cols, y, range(len(y))))
    body = (await client.get(f"/v1/campaigns/{CAMPAIGN}/lift")).json()
    # Truth: mean true uplift of the chosen arm ("arm" names it, also for a holdout)
    # over the customers the policy chose to contact.
    chosen = np.array([ACTIONS[a] for a in cols["arm"]])
    targeted = (np.array(cols["action"]) != "none") | np.array(cols["holdout"])
    tau = sim.expected_outcomes() - sim.mu0[:, None]
    truth = tau[np.arange(len(chosen)), chosen][targeted].mean()
    lift = body["targeted"]["lift"]
    assert lift["low"] <= truth <= lift["high"]
    assert body["with_outcome"] == body["decisions"] == len(y)
    assert body["targeted"]["held_out"] == int(np.sum(cols["holdout"]))


async def test_lift_errors_name_the_fix(api) -> None:
    client = api[0]
    missing = await client.get("/v1/campaigns/nope/lift")
    assert missing.status_code == 404 and "campaign file" in missing.json()["error"]["message"]
    bad = await client.get(f"/v1/campaigns/{CAMPAIGN}/lift", params={"since": "yesterday"})
    assert bad.status_code == 422 and "ISO 8601" in bad.json()["error"]["message"]
    future = await client.get(f"/v1/campaigns/{CAMPAIGN}/lift", params={"since": "2100-01-01"})
    assert future.status_code == 404


async def test_metrics_carry_drift_gauges(api) -> None:
    client = api[0]
    # The first scrape starts the background computation; later scrapes carry it.
    for _ in range(100):
        text = (await client.get("/metrics")).text
        if 'upshot_drift_psi{campaign="renewal",kind="feature",name="tenure_months"}' in text:
            break
        await anyio.sleep(0.1)
    else:
        raise AssertionError("no drift gauge on /metrics after 10 s")
    assert 'kind="score",name="email"' in text


@pytest.mark.parametrize("value", [2, -5, 0.5, 1e308, "1"])
async def test_impossible_outcomes_are_refused_with_the_decision_named(api, value) -> None:
    client, cols, y, _ = api
    body = _payload(cols, y, [0, 1])
    body["outcomes"][1]["outcome"] = value
    reply = await client.post("/v1/outcomes", json=body)
    assert reply.status_code == 422, reply.text
    message = reply.json()["error"]["message"]
    if not isinstance(value, str):  # a string is refused by the body's schema
        assert cols["decision_id"][1] in message and f"{value:g}" in message
    # Nothing of the request was stored: the valid first outcome is still new.
    again = await client.post("/v1/outcomes", json=_payload(cols, y, [0]))
    assert again.json()["recorded"] == 1


async def test_an_admin_corrects_an_outcome_with_a_reason(api) -> None:
    client, cols, y, _ = api
    d_id = cols["decision_id"][3]
    await client.post("/v1/outcomes", json=_payload(cols, y, [3]))
    url = f"/v1/admin/outcomes/{d_id}/correction"
    fixed = await client.post(url, json={"outcome": 1 - y[3], "reason": "wrong account"})
    assert fixed.status_code == 200, fixed.text
    body = fixed.json()
    assert (body["previous"]["outcome"], body["outcome"]["outcome"]) == (y[3], 1 - y[3])
    assert body["reason"] == "wrong account" and body["actor"].startswith("api:")
    # The corrected value is now the recorded one: sending it again is a no-op.
    resent = {"outcomes": [{"decision_id": d_id, "outcome": float(1 - y[3])}]}
    assert (await client.post("/v1/outcomes", json=resent)).json()["unchanged"] == 1
    impossible = await client.post(url, json={"outcome": 7, "reason": "typo"})
    assert impossible.status_code == 422 and d_id in impossible.json()["error"]["message"]
    no_reason = await client.post(url, json={"outcome": 1})
    assert no_reason.status_code == 422
    other = cols["decision_id"][4]
    missing = await client.post(
        f"/v1/admin/outcomes/{other}/correction", json={"outcome": 1, "reason": "late"}
    )
    assert (
        missing.status_code == 404 and "no recorded outcome" in missing.json()["error"]["message"]
    )


async def test_the_service_runs_on_postgres(world, tmp_path, postgres_empty_url) -> None:
    app = make_app(world.models_dir, write_campaigns(tmp_path / "c.toml"), postgres_empty_url)
    sim = simulate("larkspur", 600, random_state=41)
    async with started(app) as client:
        assert (await client.get("/readyz")).status_code == 200
        cols = await score_columns(client, sim, 41)
        # A retried batch is the same decisions, logged once.
        assert (await score_columns(client, sim, 41))["decision_id"] == cols["decision_id"]
        action = np.array([ACTIONS[a] for a in cols["action"]])
        y = draw_outcomes(sim, action, seed=42)
        bad = _payload(cols, y, [0, 1])
        bad["outcomes"][1]["outcome"] = 2
        assert (await client.post("/v1/outcomes", json=bad)).status_code == 422
        done = await client.post("/v1/outcomes", json=_payload(cols, y, range(len(y))))
        assert done.json()["recorded"] == len(y)
        body = (await client.get(f"/v1/campaigns/{CAMPAIGN}/lift")).json()
        assert body["decisions"] == body["with_outcome"] == len(y)
    with DecisionLog.open(postgres_empty_url) as log:
        assert log.counts().decisions == len(y)
