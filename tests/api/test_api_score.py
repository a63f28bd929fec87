"""POST /v1/score: one decision, committed to the log, deterministic on retry."""

from __future__ import annotations

import math
from typing import Any

import httpx
import pytest
from api_support import CAMPAIGN, MODEL, OPTED_OUT, customers, features_of
from scipy.stats import norm

from service.decisions import DecisionLog
from service.registry import ModelRegistry
from service.registry.forms import load_compact, pick_form

pytestmark = pytest.mark.anyio

FIELDS = {
    "decision_id", "customer_id", "campaign", "model", "policy_hash", "action", "arm",
    "uplift", "uplift_low", "uplift_high", "confidence", "outcome_without_contact",
    "outcome_with_arm", "expected_value", "do_not_contact", "explored", "holdout",
    "propensity", "reasons", "arms",
}  # fmt: skip


def _body(customer_id: str, features: dict[str, object], **extra: object) -> dict[str, object]:
    return {"campaign": CAMPAIGN, "customer": {"id": customer_id, "features": features, **extra}}


async def _score(client: httpx.AsyncClient, body: dict[str, object]) -> dict[str, Any]:
    response = await client.post("/v1/score", json=body)
    assert response.status_code == 200, response.text
    decision: dict[str, Any] = response.json()
    return decision


async def test_score_returns_a_full_decision_that_is_in_the_log(
    client: httpx.AsyncClient, log: DecisionLog
) -> None:
    ids, frame = customers(1)
    response = await client.post("/v1/score", json=_body(ids[0], features_of(frame, 0)))
    assert response.status_code == 200, response.text
    decision = response.json()
    assert set(decision) == FIELDS
    assert decision["model"]["name"] == MODEL
    record = log.get(decision["decision_id"])
    assert record is not None, "an acknowledged decision must already be in the log"
    assert record.action == decision["action"]
    assert record.propensity == pytest.approx(decision["propensity"])
    assert record.mode == "score"
    assert sum(record.action_probs.values()) == pytest.approx(1.0)
    assert record.action_probs[decision["action"]] == pytest.approx(decision["propensity"])


async def test_a_retry_returns_the_same_decision_and_logs_it_once(
    client: httpx.AsyncClient, log: DecisionLog
) -> None:
    ids, frame = customers(1, seed=6)
    body = _body(ids[0], features_of(frame, 0))
    first = (await client.post("/v1/score", json=body)).json()
    written = log.records_written
    second = (await client.post("/v1/score", json=body)).json()
    assert second == first
    assert log.records_written == written, "a retry must not add a second record"


async def test_expected_values_follow_value_times_uplift_minus_cost(
    client: httpx.AsyncClient,
) -> None:
    # Hand-computed rule of the brief: EV_a = value * tau_a - cost_a (costs of the test
    # campaign: email 0.40, call 3.50); a per-customer value overrides the campaign's 40.
    ids, frame = customers(3, seed=7)
    for i, value in enumerate((None, 10.0, 250.0)):
        extra = {} if value is None else {"value": value}
        decision = (await client.post("/v1/score", json=_body(ids[i], features_of(frame, i),
                                                             **extra))).json()  # fmt: skip
        worth = 40.0 if value is None else value
        costs = {"email": 0.40, "call": 3.50}
        for arm in decision["arms"]:
            assert arm["expected_value"] == pytest.approx(
                worth * arm["uplift"] - costs[arm["arm"]]
            )
            assert arm["outcome"] == pytest.approx(
                decision["outcome_without_contact"] + arm["uplift"]
            )
        if decision["action"] == "none":
            assert decision["expected_value"] == 0.0
        else:
            chosen = next(a for a in decision["arms"] if a["arm"] == decision["action"])
            assert decision["expected_value"] == pytest.approx(chosen["expected_value"])


async def test_uplift_and_bounds_equal_the_scikit_learn_model(
    client: httpx.AsyncClient, models_dir: object
) -> None:
    # Reference outside the service: the bundle's fitted scikit-learn models through
    # BootstrapUplift.predict_interval, at the two-sided level 2c - 1 whose upper end is
    # the one-sided bound at the campaign's c = 0.90 (scipy's normal quantile 1.2816).
    # When the version has a compact serving form, the service serves it: the same point
    # estimates, and the bounds of the form's own file (checked against scikit-learn's
    # spread models in tests/uplift/test_compact.py).
    ids, frame = customers(5, seed=8)
    bundle = ModelRegistry(models_dir).load(MODEL)  # type: ignore[arg-type]
    tau, mu0, low, high = bundle.model.predict_interval(frame, confidence=0.80)
    if pick_form(bundle.manifest)[0] == "compact":
        compact = load_compact(bundle.path, bundle.manifest)
        _, _, low, high = compact.predict_interval(frame, confidence=0.80)
    arms = list(bundle.model.arms_)
    for i in range(5):
        decision = (
            await client.post("/v1/score", json=_body(ids[i], features_of(frame, i)))
        ).json()
        assert decision["outcome_without_contact"] == pytest.approx(mu0[i], abs=1e-9)
        for arm in decision["arms"]:
            j = arms.index(arm["arm"])
            assert arm["uplift"] == pytest.approx(tau[i, j], abs=1e-9)
            assert arm["uplift_high"] == pytest.approx(high[i, j], abs=1e-9)
            assert arm["uplift_low"] == pytest.approx(low[i, j], abs=1e-9)
            half = arm["uplift_high"] - arm["uplift"]
            assert arm["uplift"] - arm["uplift_low"] == pytest.approx(half, abs=1e-12)
    assert norm.ppf(0.5 + 0.80 / 2) == pytest.approx(norm.ppf(0.90))


async def test_missing_features_are_scored_and_reported(client: httpx.AsyncClient) -> None:
    response = await client.post("/v1/score", json=_body("LTC-M1", {"tenure_months": 12}))
    assert response.status_code == 200
    reasons = response.json()["reasons"]
    for name in ("monthly_spend", "plan", "region", "signup_channel"):
        assert f"missing:{name}" in reasons
    assert "missing:tenure_months" not in reasons


async def test_out_of_range_and_unknown_categories_are_flagged(client: httpx.AsyncClient) -> None:
    features = {"tenure_months": 5000, "plan": "platinum", "monthly_spend": 20.0}
    response = await client.post("/v1/score", json=_body("LTC-R1", features))
    assert response.status_code == 200
    reasons = response.json()["reasons"]
    assert "out_of_range:tenure_months" in reasons
    assert "unknown_category:plan" in reasons
    assert "out_of_range:monthly_spend" not in reasons


async def test_opted_out_customers_are_never_contacted(client: httpx.AsyncClient) -> None:
    ids, frame = customers(1, seed=9)
    decision = (
        await client.post("/v1/score", json=_body(OPTED_OUT, features_of(frame, 0)))
    ).json()
    assert decision["action"] == "none"
    assert decision["propensity"] == 1.0
    assert "opted_out" in decision["reasons"]
    assert not decision["explored"]


@pytest.mark.parametrize(
    ("features", "feature", "words"),
    [
        ({"tenure_months": "NaN"}, "tenure_months", "must be a number"),
        ({"tenure_months": "12"}, "tenure_months", "must be a number"),
        ({"tenure_months": True}, "tenure_months", "must be a number"),
        ({"plan": 3.5}, "plan", "must be text"),
        ({"colour": "blue"}, "colour", "is not a feature of this model"),
    ],
)
async def test_bad_features_are_refused_per_field_and_log_nothing(
    client: httpx.AsyncClient,
    log: DecisionLog,
    features: dict[str, object],
    feature: str,
    words: str,
) -> None:
    before = log.records_written
    response = await client.post("/v1/score", json=_body("LTC-BAD", features))
    assert response.status_code == 422
    error = response.json()["error"]
    assert error["code"] == "invalid_input"
    assert feature in error["message"] and words in error["message"]
    assert error["details"]["problems"][0]["feature"] == feature
    assert log.records_written == before


@pytest.mark.parametrize("literal", [b"NaN", b"Infinity", b"-Infinity", b"1e999"])
async def test_non_finite_numbers_are_refused(
    client: httpx.AsyncClient, log: DecisionLog, literal: bytes
) -> None:
    # JSON has no NaN or infinity (RFC 8259, section 6); a body carrying them anyway
    # is refused, and so is a number too large for a double.
    body = b'{"campaign": "%s", "customer": {"id": "x", "features": {"tenure_months": %s}}}' % (
        CAMPAIGN.encode(), literal)  # fmt: skip
    response = await client.post(
        "/v1/score", content=body, headers={"content-type": "application/json"}
    )
    assert response.status_code == 422, response.text
    assert response.json()["error"]["code"] == "invalid_input"
    assert log.records_written == 0


async def test_unknown_campaign_is_404_in_the_error_shape(client: httpx.AsyncClient) -> None:
    response = await client.post(
        "/v1/score", json={"campaign": "nope", "customer": {"id": "x", "features": {}}}
    )
    assert response.status_code == 404
    assert set(response.json()) == {"error"}
    assert set(response.json()["error"]) == {"code", "message", "details"}
    assert "nope" in response.json()["error"]["message"]


async def test_value_must_be_positive(client: httpx.AsyncClient) -> None:
    response = await client.post("/v1/score", json=_body("LTC-V", {}, value=-1))
    assert response.status_code == 422
    assert "customer.value" in response.json()["error"]["message"]


def test_reference_quantile_from_memory() -> None:
    # z for a one-sided 90% bound is 1.2816 (from memory; checked against scipy).
    assert math.isclose(float(norm.ppf(0.90)), 1.2816, abs_tol=1e-4)
