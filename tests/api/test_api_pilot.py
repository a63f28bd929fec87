"""A pilot campaign served over the API, and its log exported into a first model."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from api_support import CAMPAIGN_TOML, columns_of, started

from service.decisions import DecisionLog, Outcome
from service.loop import export_training_table, read_logged
from service.registry import ModelRegistry
from service.simulation import simulate
from service.training import read_table, train_model

pytestmark = pytest.mark.anyio

PILOT_TOML = """
[campaigns.pilot]
salt = "pilot-api"
value = 40.0
pilot_shares = { none = 0.4, email = 0.3, call = 0.3 }
suppression = ["LTC-NO"]
[campaigns.pilot.arms]
email = { cost = 0.40 }
call = { cost = 3.50 }
"""


async def test_pilot_serves_logs_and_exports_a_first_model(
    make_settings, campaigns_file: Path, tmp_path: Path
) -> None:
    campaigns_file.write_text(CAMPAIGN_TOML + PILOT_TOML, encoding="utf-8")
    settings = make_settings()
    sim = simulate("larkspur", n=4000, random_state=31)  # invented demo customers
    ids = [f"P-{i}" for i in range(4000)]
    async with started(settings) as client:
        assert (await client.get("/readyz")).status_code == 200
        listed = (await client.get("/v1/campaigns")).json()["campaigns"]
        assert {c["name"]: c["model"] for c in listed}["pilot"] is None
        one = await client.post(
            "/v1/score",
            json={"campaign": "pilot", "customer": {"id": "LTC-NO", "features": {"x": 1}}},
        )
        assert one.status_code == 200, one.text
        assert one.json()["action"] == "none" and one.json()["propensity"] == 1.0
        assert one.json()["reasons"] == ["opted_out"]
        body = {"campaign": "pilot", "customer": {"id": "P-one", "features": {
            "tenure_months": 3, "plan": "classic", "gift": True, "spend": None}}}  # fmt: skip
        scored = await client.post("/v1/score", json=body)
        assert scored.status_code == 200, scored.text
        first = scored.json()
        again = (await client.post("/v1/score", json=body)).json()
        assert first["reasons"] == ["pilot"]
        assert first["model"] == {"name": "pilot", "version": "none"}
        shares = {"none": 0.4, "email": 0.3, "call": 0.3}
        assert first["propensity"] == shares[first["action"]]
        assert again["decision_id"] == first["decision_id"] and again["action"] == first["action"]
        bad = {"campaign": "pilot", "customer": {"id": "P-bad", "features": {"x": [1, 2]}}}
        refused = await client.post("/v1/score", json=bad)
        assert refused.status_code == 422 and "features.x" in refused.json()["error"]["message"]
        batch = await client.post(
            "/v1/score/batch", json={"campaign": "pilot", "columns": columns_of(ids, sim.X)}
        )
        assert batch.status_code == 200, batch.text
        answer = batch.json()["columns"]
    action = np.array([{"none": 0, "email": 1, "call": 2}[a] for a in answer["action"]])
    shares = np.array([0.4, 0.3, 0.3])
    np.testing.assert_allclose(answer["propensity"], shares[action])
    assert all(r == ["pilot"] for r in answer["reasons"])
    # Outcomes drawn from the simulation's known response law (invented demo design).
    expected = sim.expected_outcomes()
    y = (np.random.default_rng(3).random(4000) < expected[np.arange(4000), action]).astype(float)
    with DecisionLog.open(settings.decision_log) as store:
        store.record_outcomes(
            [Outcome(d, v) for d, v in zip(answer["decision_id"], y, strict=True)]
        )
        logged = read_logged(store, "pilot")
    assert {m.split(":")[0] for m in logged.models()} == {"pilot"}
    exported = export_training_table(logged, tmp_path / "pilot.csv")
    assert exported.rows == 4000
    table = read_table(exported.path)
    result = train_model(
        table, treatment="treatment", outcome="outcome", control="none",
        features=list(sim.X.columns), sample_weight="ipw", learner="t", base="linear",
        n_bootstrap=3, n_splits=2, name="first", models_dir=tmp_path / "models",
        random_state=0, value=40.0, cost={"email": 0.4, "call": 3.5},
    )  # fmt: skip
    bundle = ModelRegistry(tmp_path / "models").load("first", result.version)
    tau = np.asarray(bundle.model.predict_interval(sim.X)[0])
    truth = expected[:, 1:] - expected[:, [0]]
    # The first model recovers the average uplift of each arm: 0.05 is about three standard
    # errors of a difference of two rates from 1,200 and 1,600 customers (p near 0.5).
    assert np.abs(tau.mean(axis=0) - truth.mean(axis=0)).max() < 0.05


def test_pilot_lift_and_drift_say_what_a_pilot_is(
    make_settings, campaigns_file: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    from service.cli import main
    from service.decisions import DecisionLog
    from service.policy import load_campaigns
    from service.scoring import bind_campaigns, decide_chunk, emit_columns

    campaigns_file.write_text(CAMPAIGN_TOML + PILOT_TOML, encoding="utf-8")
    settings = make_settings()
    sim = simulate("larkspur", n=600, random_state=8)
    ids = [f"Q-{i}" for i in range(600)]
    bound = bind_campaigns(
        ModelRegistry(settings.models_dir), load_campaigns(campaigns_file), compile=False
    ).get("pilot")
    decided = decide_chunk(bound, ids, bound.schema.table_from_columns(
        {k: v for k, v in columns_of(ids, sim.X).items() if k != "id"}, 600), None)  # fmt: skip
    y = sim.expected_outcomes()[np.arange(600), decided.batch.action] > 0.5
    with DecisionLog.open(settings.decision_log) as log:
        columns = emit_columns(decided)
        log.append_columns_sync([columns])
        log.record_outcomes(
            [Outcome(d, float(v)) for d, v in zip(columns.decision_id, y, strict=True)]
        )
    common = ["--log", str(settings.decision_log), "--campaigns", str(campaigns_file)]
    assert main(["lift", "pilot", *common]) == 0
    assert "randomized pilot" in capsys.readouterr().out
    drift = ["drift", "--campaign", "pilot", *common, "--models-dir", str(settings.models_dir)]
    assert main(drift) == 1
    assert "randomized pilot with no model" in capsys.readouterr().err
