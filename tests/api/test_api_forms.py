"""The serving form is reported by /v1/models and /readyz, and chosen by the setting."""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path

import pytest
from api_support import CAMPAIGN, MODEL, started

from service.config import Settings
from service.registry import ModelRegistry
from service.registry.forms import pick_form
from service.simulation import simulate
from service.training import train_model

pytestmark = [pytest.mark.anyio, pytest.mark.slow]


def _train_with_compact_form(models_dir: Path) -> str:
    # 750 held-out rows decide the compact form's 99% do-not-contact check, one row being
    # 0.13 points: with the 60 x 63 spread models seed 2 fell one row short (98.93%), so
    # the fixture uses a seed whose form is kept; the refusal path has its own tests.
    sim = simulate(MODEL, n=3000, random_state=3)
    result = train_model(
        sim.to_frame(),
        treatment=sim.treatment_name,
        outcome=sim.outcome_name,
        features=list(sim.X.columns),
        learner="t",
        base="linear",
        n_bootstrap=20,
        n_splits=2,
        tune=False,  # the fixed linear base this form check was calibrated on (seeded)
        name=MODEL,
        models_dir=models_dir,
    )
    assert result.serving_form == "compact", result.manifest["serving"]["forms"]["compact"]
    ModelRegistry(models_dir).promote(MODEL, result.version, actor="tests", reason="forms")
    return result.version


@pytest.mark.parametrize("form", ["compact", "full"])
async def test_models_and_readiness_name_the_serving_form(
    make_settings: Callable[..., Settings], models_dir: Path, form: str
) -> None:
    version = _train_with_compact_form(models_dir)
    async with started(make_settings(form=form)) as http:
        ready = (await http.get("/readyz")).json()
        models = (await http.get("/v1/models")).json()["models"]
        scored = await http.post(
            "/v1/score",
            json={
                "campaign": CAMPAIGN,
                "customer": {"id": "LTC-F1", "features": {"plan": "classic"}},
            },
        )
    assert ready["campaigns"] == {CAMPAIGN: f"{MODEL}@{version}"}
    assert ready["forms"] == {CAMPAIGN: form}
    assert models[0]["serving_forms"] == {CAMPAIGN: form}
    assert scored.status_code == 200, scored.text
    assert scored.json()["model"]["version"] == version


async def test_the_default_form_follows_the_manifest(
    make_settings: Callable[..., Settings], models_dir: Path
) -> None:
    manifest = ModelRegistry(models_dir).verify(MODEL)
    async with started(make_settings()) as http:
        ready = (await http.get("/readyz")).json()
    assert ready["forms"] == {CAMPAIGN: pick_form(manifest)[0]}
