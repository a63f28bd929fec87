"""Helpers of the file-scoring tests: a small trained model, audiences, an in-process API."""

from __future__ import annotations

from pathlib import Path
from typing import Any

import httpx
import pandas as pd

from service.api import create_app
from service.config import Settings
from service.decisions import DecisionLog
from service.registry import ModelRegistry
from service.simulation import simulate
from service.training import train_model

MODEL = "larkspur"
CAMPAIGN = "renewal"
OPTED_OUT = "LTC-F000007"

CAMPAIGN_TOML = f"""
[campaigns.{CAMPAIGN}]
model = "{MODEL}"
value = 40.0
exploration = 0.10
holdout = 0.10
capacity = 40
salt = "file-tests"
suppression = ["{OPTED_OUT}"]

[campaigns.{CAMPAIGN}.arms]
email = {{ cost = 0.40 }}
call = {{ cost = 3.50 }}
"""


def train_small(models_dir: Path) -> str:
    """Train and promote a small larkspur model (invented demo data); return its version."""
    sim = simulate(MODEL, n=2000, random_state=0)
    result = train_model(
        sim.to_frame(), treatment=sim.treatment_name, outcome=sim.outcome_name,
        features=list(sim.X.columns), learner="t", base="linear", n_bootstrap=3,
        n_splits=2, name=MODEL, models_dir=models_dir, random_state=0,
    )  # fmt: skip
    ModelRegistry(models_dir).promote(MODEL, result.version, actor="tests", reason="fixture")
    return result.version


def audience(n: int, *, seed: int = 21) -> pd.DataFrame:
    """Simulated customers (invented demo data) with ids, some features missing."""
    frame = simulate(MODEL, n=n, random_state=seed).X.copy()
    frame.insert(0, "customer_id", [f"LTC-F{i:06d}" for i in range(n)])
    frame.loc[frame.index % 17 == 3, "monthly_spend"] = None
    frame.loc[frame.index % 23 == 5, "plan"] = None
    return frame


def columns_body(frame: pd.DataFrame) -> dict[str, list[Any]]:
    """The audience in the API's column form."""
    columns: dict[str, list[Any]] = {"id": frame["customer_id"].tolist()}
    for name in frame.columns[1:]:
        col = frame[name]
        columns[str(name)] = col.astype(object).where(col.notna(), None).tolist()
    return columns


class started:  # noqa: N801 - used like a function: `async with started(settings) as http`
    """Run an app's lifespan and give an httpx client talking to it in-process."""

    def __init__(self, settings: Settings, log: DecisionLog) -> None:
        self.app = create_app(settings, log=log)
        self._lifespan = self.app.router.lifespan_context(self.app)
        self._client = httpx.AsyncClient(
            transport=httpx.ASGITransport(app=self.app), base_url="http://upshot.test",
            timeout=120,
        )  # fmt: skip

    async def __aenter__(self) -> httpx.AsyncClient:
        await self._lifespan.__aenter__()
        return self._client

    async def __aexit__(self, *exc: object) -> None:
        await self._client.aclose()
        await self._lifespan.__aexit__(*exc)
