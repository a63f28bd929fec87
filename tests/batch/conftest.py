"""Fixtures of the file-scoring tests: one small model per session, fresh files per test."""

from __future__ import annotations

from collections.abc import Iterator
from pathlib import Path

import pytest
from batch_support import CAMPAIGN, CAMPAIGN_TOML, train_small

from service.decisions import DecisionLog
from service.policy import load_campaigns
from service.registry import ModelRegistry
from service.scoring import BoundCampaign, bind_campaigns


@pytest.fixture(scope="session")
def models_dir(tmp_path_factory: pytest.TempPathFactory) -> Path:
    root = tmp_path_factory.mktemp("file-registry")
    train_small(root)
    return root


@pytest.fixture
def campaigns_file(tmp_path: Path) -> Path:
    path = tmp_path / "campaigns.toml"
    path.write_text(CAMPAIGN_TOML, encoding="utf-8")
    return path


@pytest.fixture
def bound(models_dir: Path, campaigns_file: Path) -> BoundCampaign:
    catalog = bind_campaigns(ModelRegistry(models_dir), load_campaigns(campaigns_file))
    return catalog.get(CAMPAIGN)


@pytest.fixture
def log(tmp_path: Path) -> Iterator[DecisionLog]:
    with DecisionLog.open(tmp_path / "file-decisions.sqlite3") as decision_log:
        yield decision_log


@pytest.fixture
def anyio_backend() -> str:
    return "asyncio"
