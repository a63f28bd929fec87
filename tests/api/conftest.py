"""Fixtures of the API tests: one small trained model per session, fresh state per test.

The model is a T-learner with linear base models on 3,000 simulated Larkspur customers
(fictional demo design) with 3 bootstrap replicates: small enough to train in seconds,
real enough that every number the service returns comes from a fitted model.
"""

from __future__ import annotations

import shutil
from collections.abc import AsyncIterator, Callable
from pathlib import Path
from typing import Any

import httpx
import pytest
from api_support import CAMPAIGN_TOML, started, train_small

from service.config import Settings, load_settings
from service.decisions import DecisionLog


@pytest.fixture(scope="session")
def trained_models(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """A registry with one promoted larkspur model (trained once per session)."""
    root = tmp_path_factory.mktemp("registry")
    train_small(root)
    return root


@pytest.fixture
def models_dir(trained_models: Path, tmp_path: Path) -> Path:
    """A private copy of the registry, so a test may promote or tamper with it."""
    target = tmp_path / "models"
    shutil.copytree(trained_models, target)
    return target


@pytest.fixture
def campaigns_file(tmp_path: Path) -> Path:
    path = tmp_path / "campaigns.toml"
    path.write_text(CAMPAIGN_TOML, encoding="utf-8")
    return path


@pytest.fixture
def make_settings(
    models_dir: Path, campaigns_file: Path, tmp_path: Path
) -> Callable[..., Settings]:
    def make(**overrides: Any) -> Settings:
        values: dict[str, Any] = {
            "models_dir": models_dir,
            "campaigns_file": campaigns_file,
            "decision_log": str(tmp_path / "decisions.sqlite3"),
            **overrides,
        }
        return load_settings(**values)

    return make


@pytest.fixture
def settings(make_settings: Callable[..., Settings]) -> Settings:
    return make_settings()


@pytest.fixture
def anyio_backend() -> str:
    return "asyncio"


@pytest.fixture
async def log(tmp_path: Path) -> AsyncIterator[DecisionLog]:
    """The decision log the app writes to (opened by the test, so it can read it)."""
    decision_log = DecisionLog.open(tmp_path / "decisions.sqlite3")
    yield decision_log
    decision_log.close()


@pytest.fixture
async def client(settings: Settings, log: DecisionLog) -> AsyncIterator[httpx.AsyncClient]:
    """An in-process client of a started app."""
    async with started(settings, log=log) as http:
        yield http
