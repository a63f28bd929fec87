"""Fixtures of the replica tests: a shared registry (two versions), campaign file and log."""

from __future__ import annotations

import shutil
from collections.abc import Iterator
from pathlib import Path

import pytest
from replica_support import CAMPAIGN_TOML, promote, train_version


@pytest.fixture(scope="session")
def trained_registry(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """v0001 (champion) and v0002 (not promoted) of a small model, trained once."""
    root = tmp_path_factory.mktemp("replica-registry")
    first = train_version(root, random_state=0)
    train_version(root, random_state=1)
    promote(root, first)
    return root


@pytest.fixture
def models_dir(trained_registry: Path, tmp_path: Path) -> Path:
    target = tmp_path / "models"
    shutil.copytree(trained_registry, target)
    return target


@pytest.fixture
def campaigns_file(tmp_path: Path) -> Path:
    path = tmp_path / "campaigns.toml"
    path.write_text(CAMPAIGN_TOML, encoding="utf-8")
    return path


@pytest.fixture(params=["sqlite", "postgres"])
def log_url(request: pytest.FixtureRequest, tmp_path: Path) -> Iterator[str]:
    """The shared decision log: a SQLite file, or a fresh PostgreSQL database."""
    if request.param == "sqlite":
        yield str(tmp_path / "decisions.sqlite3")
    else:
        url: str = request.getfixturevalue("postgres_empty_url")
        yield url


@pytest.fixture
def sqlite_log_url(tmp_path: Path) -> str:
    """A SQLite log, for tests whose subject does not depend on the log's engine."""
    return str(tmp_path / "decisions.sqlite3")
