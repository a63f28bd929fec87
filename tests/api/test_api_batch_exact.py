"""The chunked, column-wise batch and rank paths decide exactly as the scalar reference.

Reference: :func:`service.scoring.decide_one` per customer (validation, the compiled
model's single-row path, the scalar policy :func:`service.policy.decide_one` and
:func:`service.decisions.decision_id`); for ranked lists, :func:`service.policy.decide`
and :func:`service.policy.rank` over the whole list of those scalar estimates. Chunks
are made small so that chunk borders fall inside the list.
"""

from __future__ import annotations

import hashlib
from collections.abc import Callable
from pathlib import Path
from typing import Any

import httpx
import numpy as np
import orjson
import pytest
from api_support import MODEL, OPTED_OUT, customers, features_of, started

from service.config import Settings
from service.decisions import DecisionLog, DecisionRecord, decision_id
from service.policy import decide, rank, uniform_draws
from service.scoring import BoundCampaign, decide_one
from service.scoring import engine as scoring_engine

pytestmark = pytest.mark.anyio

CAMPAIGN = "exact"
N = 2500
CHUNK = 700

_TOML = f"""
[campaigns.{CAMPAIGN}]
model = "{MODEL}"
value = 40.0
exploration = 0.3
holdout = 0.25
capacity = 300
confidence = 0.90
dnc_margin = 0.0
salt = "exactly-as-before"
suppression = ["{OPTED_OUT}", "X-0000011"]

[campaigns.{CAMPAIGN}.arms]
email = {{ cost = 0.40 }}
call = {{ cost = 3.50 }}
"""


def _candidates() -> tuple[list[str], list[dict[str, Any]], list[float | None]]:
    ids, frame = customers(N, seed=41, prefix="X-")
    ids[5] = OPTED_OUT
    rows = [features_of(frame, i) for i in range(N)]
    names = list(frame.columns)
    rng = np.random.default_rng(3)
    for i in range(N):  # missing features, unseen categories, values out of range
        for name in names:
            if rng.random() < 0.08:
                rows[i][name] = None
        if i % 97 == 0:
            rows[i]["plan"] = "unheard-of"
        if i % 89 == 0:
            rows[i]["tenure_months"] = 10_000.0
    values: list[float | None] = [
        None if i % 3 else float(rng.choice([5.0, 40.0, 120.0])) for i in range(N)
    ]
    return ids, rows, values


def _columns(ids: list[str], rows: list[dict[str, Any]], values: list[Any]) -> dict[str, Any]:
    columns: dict[str, Any] = {"id": ids, "value": values}
    for name in rows[0]:
        columns[name] = [r[name] for r in rows]
    return columns


@pytest.fixture
def exact_settings(make_settings: Callable[..., Settings], tmp_path: Path) -> Settings:
    path = tmp_path / "exact.toml"
    path.write_text(_TOML, encoding="utf-8")
    return make_settings(campaigns_file=path)


def _same_record(logged: DecisionRecord | None, expected: DecisionRecord) -> None:
    assert logged is not None
    same = ("decision_id", "customer_id", "features", "value", "action", "explored",
            "holdout", "do_not_contact", "mode", "model_version", "policy_hash")  # fmt: skip
    for field in same:
        assert getattr(logged, field) == getattr(expected, field), field
    assert logged.propensity == expected.propensity
    assert logged.action_probs == expected.action_probs
    assert logged.expected_value == pytest.approx(expected.expected_value, abs=1e-12)
    for field in ("tau", "low", "high"):
        assert getattr(logged, field) == pytest.approx(getattr(expected, field), abs=1e-12)
    assert logged.mu0 == pytest.approx(expected.mu0, abs=1e-12)


async def test_batch_rows_and_columns_decide_as_the_scalar_reference(
    exact_settings: Settings, log: DecisionLog, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setattr(scoring_engine, "CHUNK_ROWS", CHUNK)
    ids, rows, values = _candidates()
    async with started(exact_settings, log=log) as http:
        bound = http_bound(exact_settings, http)
        body = {"campaign": CAMPAIGN, "columns": _columns(ids, rows, values)}
        by_columns = await http.post("/v1/score/batch", json=body)
        assert by_columns.status_code == 200, by_columns.text
        customers_ = [
            {"id": i, "features": f, "value": v} for i, f, v in zip(ids, rows, values, strict=True)
        ]
        by_rows = await http.post(
            "/v1/score/batch", json={"campaign": CAMPAIGN, "customers": customers_}
        )
        assert by_rows.status_code == 200, by_rows.text
    expected = [decide_one(bound, i, f, v) for i, f, v in zip(ids, rows, values, strict=True)]
    columns = by_columns.json()["columns"]
    decisions = by_rows.json()["decisions"]
    assert columns["decision_id"] == [e.record.decision_id for e in expected]
    assert [d["decision_id"] for d in decisions] == columns["decision_id"]
    assert columns["action"] == [e.record.action for e in expected]
    assert columns["propensity"] == [e.record.propensity for e in expected]
    assert columns["reasons"] == [e.reasons for e in expected]
    assert [d["reasons"] for d in decisions] == columns["reasons"]
    for i in (0, 5, 7, N - 1):
        _same_body(decisions[i], expected[i].body)
    assert log.records_written == N, "rows repeat the columns' decisions: logged once"
    for e in expected:
        _same_record(log.get(e.record.decision_id), e.record)
    actions = set(columns["action"])
    assert {"none", "email", "call"} <= actions
    assert any(columns["explored"]) and any(columns["holdout"])


def _same_body(got: dict[str, Any], expected: dict[str, Any]) -> None:
    assert got.keys() == expected.keys()
    for key, value in expected.items():
        if key == "arms":
            assert len(got[key]) == len(value)
            for a, b in zip(got[key], value, strict=True):
                assert a == pytest.approx(b, abs=1e-12)
        elif isinstance(value, float):
            assert got[key] == pytest.approx(value, abs=1e-12), key
        else:
            assert got[key] == value, key


def http_bound(settings: Settings, http: httpx.AsyncClient) -> BoundCampaign:
    app = http._transport.app  # type: ignore[attr-defined]
    bound: BoundCampaign = app.state.service.catalog.get(CAMPAIGN)
    return bound


@pytest.mark.parametrize(("capacity", "budget"), [(300, None), (None, 180.0), (250, 150.0)])
async def test_rank_decides_as_the_reference_cut(
    exact_settings: Settings,
    log: DecisionLog,
    monkeypatch: pytest.MonkeyPatch,
    capacity: int | None,
    budget: float | None,
) -> None:
    monkeypatch.setattr(scoring_engine, "CHUNK_ROWS", CHUNK)
    ids, rows, values = _candidates()
    body: dict[str, Any] = {"campaign": CAMPAIGN, "columns": _columns(ids, rows, values)}
    body.update({"capacity": capacity, "budget": budget})
    async with started(exact_settings, log=log) as http:
        bound = http_bound(exact_settings, http)
        response = await http.post("/v1/rank", json=body)
        assert response.status_code == 200, response.text
    ranked = response.json()

    singles = [decide_one(bound, i, f, v) for i, f, v in zip(ids, rows, values, strict=True)]
    records = [s.record for s in singles]
    campaign = bound.campaign
    batch = decide(
        np.array([r.tau for r in records]), np.array([r.low for r in records]),
        np.array([r.high for r in records]), np.array([r.mu0 for r in records]),
        np.array([r.value for r in records]), campaign.costs, campaign.opted_out(ids),
        uniform_draws(campaign.salt, campaign.id, ids), exploration=campaign.exploration,
        holdout=campaign.holdout, margin=campaign.dnc_margin,
    )  # fmt: skip
    assert batch.action.tolist() == [campaign.action_labels().index(r.action) for r in records]
    cut = rank(batch, ids, capacity=capacity, budget=budget, costs=campaign.costs)
    digest = hashlib.blake2b(orjson.dumps([sorted(ids), capacity, budget]), digest_size=16)
    context = "rank:" + digest.hexdigest()
    labels = campaign.action_labels()
    expected_ids = [
        decision_id(campaign.id, i, campaign.hash, (r.model_name, r.model_version),
                    r.features, r.value, context=context)
        for i, r in zip(ids, records, strict=True)
    ]  # fmt: skip

    assert [c["customer_id"] for c in ranked["contacts"]] == cut.contact_ids
    assert [c["decision_id"] for c in ranked["contacts"]] == [
        expected_ids[i] for i in cut.order.tolist()
    ]
    assert [c["propensity"] for c in ranked["contacts"]] == cut.propensity[cut.order].tolist()
    assert [e["reason"] for e in ranked["excluded"]] == cut.excluded_reason
    assert [e["decision_id"] for e in ranked["excluded"]] == [
        expected_ids[i] for i in cut.excluded.tolist()
    ]
    assert log.records_written == N
    for i in range(N):
        logged = log.get(expected_ids[i])
        assert logged is not None and logged.mode == "rank"
        assert logged.action == labels[cut.action[i]]
        assert logged.propensity == cut.propensity[i]
        assert logged.action_probs == dict(zip(labels, cut.action_probs[i].tolist(), strict=True))
        assert logged.holdout == bool(cut.holdout[i])
        assert logged.explored == bool(batch.explored[i])
        assert logged.features == records[i].features
    reasons = {e["reason"] for e in ranked["excluded"]}
    assert "opted_out" in reasons
    assert reasons & {"beyond_capacity", "beyond_budget"}
    if budget is None:
        assert "beyond_capacity" in reasons
    if capacity is None:
        assert "beyond_budget" in reasons
