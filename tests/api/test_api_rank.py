"""POST /v1/rank: an ordered contact list cut at capacity and/or budget."""

from __future__ import annotations

from typing import Any

import httpx
import pytest
from api_support import CAMPAIGN, OPTED_OUT, columns_of, customers, features_of

from service.decisions import DecisionLog

pytestmark = pytest.mark.anyio


async def _rank(client: httpx.AsyncClient, **body: Any) -> dict[str, Any]:
    response = await client.post("/v1/rank", json={"campaign": CAMPAIGN, **body})
    assert response.status_code == 200, response.text
    ranked: dict[str, Any] = response.json()
    return ranked


async def test_contacts_are_best_value_first_and_cut_at_capacity(
    client: httpx.AsyncClient, log: DecisionLog
) -> None:
    ids, frame = customers(200, seed=21)
    ranked = await _rank(client, columns=columns_of(ids, frame), capacity=30)
    contacts = ranked["contacts"]
    assert len(contacts) == 30
    assert [c["rank"] for c in contacts] == list(range(1, 31))
    values = [c["expected_value"] for c in contacts]
    assert values == sorted(values, reverse=True)
    assert all(v > 0 for v in values)
    assert ranked["totals"]["candidates"] == 200
    assert len(contacts) + len(ranked["excluded"]) == 200
    beyond = [e["customer_id"] for e in ranked["excluded"] if e["reason"] == "beyond_capacity"]
    assert beyond
    # Nobody left out for capacity is worth more than the last one in: the same draws give
    # the same chosen arm in a plain batch score, whose per-arm EVs we can read.
    scored = (
        await client.post("/v1/score/batch", json={"campaign": CAMPAIGN,
                                                   "columns": columns_of(ids, frame)})
    ).json()  # fmt: skip
    position = {cid: i for i, cid in enumerate(ids)}
    for customer in beyond:
        i = position[customer]
        arm = scored["columns"]["arm"][i]
        assert scored["arms"][arm]["expected_value"][i] <= min(values) + 1e-12
    assert ranked["totals"]["contacts"] + ranked["totals"]["held_out"] == 30
    for contact in contacts:
        assert contact["contact"] is (not contact["holdout"])
    assert log.records_written == 200 + 200  # the ranked list, then the plain batch
    records = {c["decision_id"]: log.get(c["decision_id"]) for c in contacts}
    for contact in contacts:
        record = records[contact["decision_id"]]
        assert record is not None and record.mode == "rank"
        expected = "none" if contact["holdout"] else contact["arm"]
        assert record.action == expected
        assert record.propensity == pytest.approx(contact["propensity"])
        assert sum(record.action_probs.values()) == pytest.approx(1.0)


async def test_budget_cuts_by_cost(client: httpx.AsyncClient) -> None:
    ids, frame = customers(100, seed=22)
    ranked = await _rank(client, columns=columns_of(ids, frame), budget=10.0)
    spent = sum(c["cost"] for c in ranked["contacts"])
    assert spent <= 10.0 + 1e-9
    assert ranked["totals"]["cost"] <= 10.0 + 1e-9
    assert "beyond_budget" in {e["reason"] for e in ranked["excluded"]}


async def test_default_capacity_comes_from_the_campaign(client: httpx.AsyncClient) -> None:
    ids, frame = customers(120, seed=23)
    ranked = await _rank(client, columns=columns_of(ids, frame))
    assert ranked["capacity"] == 50
    assert len(ranked["contacts"]) <= 50


async def test_opted_out_candidates_are_excluded_with_their_reason(
    client: httpx.AsyncClient,
) -> None:
    ids, frame = customers(5, seed=24)
    rows = [{"id": cid, "features": features_of(frame, i)} for i, cid in enumerate(ids)]
    rows[2]["id"] = OPTED_OUT
    ranked = await _rank(client, customers=rows, capacity=5)
    excluded = {e["customer_id"]: e["reason"] for e in ranked["excluded"]}
    assert excluded[OPTED_OUT] == "opted_out"
    assert OPTED_OUT not in {c["customer_id"] for c in ranked["contacts"]}


async def test_ranked_ids_differ_from_score_ids_and_repeat_on_retry(
    client: httpx.AsyncClient,
) -> None:
    ids, frame = customers(10, seed=25)
    columns = columns_of(ids, frame)
    first = await _rank(client, columns=columns, capacity=3)
    again = await _rank(client, columns=columns, capacity=3)
    assert first == again
    other = await _rank(client, columns=columns, capacity=4)
    scored = (
        await client.post("/v1/score/batch", json={"campaign": CAMPAIGN, "columns": columns})
    ).json()["columns"]["decision_id"]
    listed = {c["customer_id"]: c["decision_id"] for c in first["contacts"]}
    changed = {c["customer_id"]: c["decision_id"] for c in other["contacts"]}
    for customer, decision in listed.items():
        assert decision not in scored
        assert changed[customer] != decision, "another list request is another decision"


async def test_duplicate_candidates_are_refused(client: httpx.AsyncClient) -> None:
    ids, frame = customers(3, seed=26)
    columns = columns_of(ids, frame)
    columns["id"][2] = columns["id"][0]
    response = await client.post("/v1/rank", json={"campaign": CAMPAIGN, "columns": columns})
    assert response.status_code == 422
    assert ids[0] in response.json()["error"]["message"]
