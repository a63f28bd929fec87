"""A small registry with two trained versions, built once and copied per test."""

from __future__ import annotations

import shutil
from collections.abc import Iterator
from pathlib import Path

import pandas as pd
import pytest
from threadpoolctl import threadpool_limits

from service.simulation import simulate
from service.training import TrainingResult, train_model


@pytest.fixture(autouse=True, scope="session")
def _one_thread() -> Iterator[None]:
    # Small fits are several times slower with competing BLAS/OpenMP threads on 2 cores.
    with threadpool_limits(limits=1):
        yield


@pytest.fixture(scope="session")
def campaign() -> pd.DataFrame:
    """Demo campaign (invented Larkspur Tea Club data), small enough for quick fits."""
    return simulate("larkspur", 800, random_state=1).to_frame()


def _train(frame: pd.DataFrame, models_dir: Path, seed: int) -> TrainingResult:
    return train_model(
        frame,
        treatment="treatment",
        outcome="renewed",
        name="tea",
        models_dir=models_dir,
        learner="t",
        base="linear",
        n_bootstrap=2,
        n_splits=3,
        random_state=seed,
    )


@pytest.fixture(scope="session")
def _template(
    tmp_path_factory: pytest.TempPathFactory, campaign: pd.DataFrame
) -> tuple[Path, list[TrainingResult]]:
    root = tmp_path_factory.mktemp("registry-template") / "models"
    return root, [_train(campaign, root, seed) for seed in (0, 1)]


@pytest.fixture
def trained(
    tmp_path: Path, _template: tuple[Path, list[TrainingResult]]
) -> tuple[Path, list[TrainingResult]]:
    """A fresh copy of the registry (versions v0001, v0002 of "tea") and the results."""
    root, results = _template
    copy = tmp_path / "models"
    shutil.copytree(root, copy)
    return copy, results
