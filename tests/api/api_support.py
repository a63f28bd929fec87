"""Helpers shared by the API tests (constants, a tiny trained model, in-process app)."""

from __future__ import annotations

from pathlib import Path
from typing import Any

import httpx
import pandas as pd

from service.api import create_app
from service.config import Settings
from service.registry import ModelRegistry
from service.simulation import simulate
from service.training import train_model

MODEL = "larkspur"
CAMPAIGN = "renewal"
OPTED_OUT = "LTC-OPTED-OUT"

CAMPAIGN_TOML = f"""
[campaigns.{CAMPAIGN}]
model = "{MODEL}"
value = 40.0
exploration = 0.05
holdout = 0.10
capacity = 50
confidence = 0.90
salt = "api-tests"
suppression = ["{OPTED_OUT}"]

[campaigns.{CAMPAIGN}.arms]
email = {{ cost = 0.40 }}
call = {{ cost = 3.50 }}
"""


def train_small(models_dir: Path, *, random_state: int = 0) -> str:
    """Train and promote a small larkspur model; return its version."""
    sim = simulate(MODEL, n=3000, random_state=random_state)
    result = train_model(
        sim.to_frame(),
        treatment=sim.treatment_name,
        outcome=sim.outcome_name,
        features=list(sim.X.columns),
        learner="t",
        base="linear",
        n_bootstrap=3,
        n_splits=2,
        name=MODEL,
        models_dir=models_dir,
        random_state=random_state,
    )
    ModelRegistry(models_dir).promote(MODEL, result.version, actor="tests", reason="fixture")
    return result.version


class started:  # noqa: N801 - used like a function: `async with started(settings) as http`
    """Run an app's lifespan and give an httpx client talking to it in-process."""

    def __init__(self, settings: Settings, **kwargs: Any) -> None:
        self.app = create_app(settings, **kwargs)
        self._lifespan = self.app.router.lifespan_context(self.app)
        self._client = httpx.AsyncClient(
            transport=httpx.ASGITransport(app=self.app), base_url="http://upshot.test"
        )

    async def __aenter__(self) -> httpx.AsyncClient:
        await self._lifespan.__aenter__()
        return self._client

    async def __aexit__(self, *exc: object) -> None:
        await self._client.aclose()
        await self._lifespan.__aexit__(*exc)


def customers(n: int, *, seed: int = 5, prefix: str = "LTC-T") -> tuple[list[str], pd.DataFrame]:
    """Fresh simulated customers (ids and raw features) unseen in training."""
    sim = simulate(MODEL, n=n, random_state=seed)
    return [f"{prefix}{i:06d}" for i in range(n)], sim.X


def features_of(frame: pd.DataFrame, i: int) -> dict[str, Any]:
    """Row ``i`` as JSON-ready features (None for missing)."""
    row = frame.iloc[i]
    return {k: (None if pd.isna(v) else v.item() if hasattr(v, "item") else v)
            for k, v in row.items()}  # fmt: skip


def columns_of(ids: list[str], frame: pd.DataFrame) -> dict[str, list[Any]]:
    """Ids and features in column form."""
    columns: dict[str, list[Any]] = {"id": list(ids)}
    for name in frame.columns:
        col = frame[name]
        columns[str(name)] = col.astype(object).where(col.notna(), None).tolist()
    return columns
