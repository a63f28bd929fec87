"""Fixtures of the loop tests: one trained model, a campaign file, a log with two days
(built once per session; tests only read it)."""

from __future__ import annotations

from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path

import pytest
from loop_world import (
    Day,
    bind,
    run_day_in_process,
    train_first_model,
    write_campaigns,
)
from threadpoolctl import threadpool_limits

from service.decisions import DecisionLog


@pytest.fixture(autouse=True, scope="session")
def _one_thread() -> Iterator[None]:
    # Small fits are many times slower with competing OpenMP/BLAS threads on 2 cores.
    with threadpool_limits(limits=1):
        yield


@dataclass(frozen=True)
class World:
    root: Path
    models_dir: Path
    campaigns_file: Path
    log_path: Path
    first_version: str
    days: list[Day]
    boundaries: list[str]  # created_at of the first decision of each day


@pytest.fixture(scope="session")
def world(tmp_path_factory: pytest.TempPathFactory) -> Iterator[World]:
    root = tmp_path_factory.mktemp("loop")
    models_dir = root / "models"
    version = train_first_model(models_dir)
    campaigns_file = write_campaigns(root / "campaigns.toml")
    log_path = root / "decisions.sqlite3"
    catalog = bind(models_dir, campaigns_file)
    days, boundaries = [], []
    with DecisionLog.open(log_path) as log:
        store = log
        for day in (1, 2):
            days.append(run_day_in_process(catalog, log, store, day, 3000))
            boundaries.append(log.get(days[-1].decision_ids[0]).created_at)  # type: ignore[union-attr]
    yield World(root, models_dir, campaigns_file, log_path, version, days, boundaries)


@pytest.fixture
def anyio_backend() -> str:
    return "asyncio"
