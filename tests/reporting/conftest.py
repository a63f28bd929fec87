"""Out-of-fold predictions for report tests: demo data scored by its true uplift."""

from __future__ import annotations

from collections.abc import Iterator
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from threadpoolctl import threadpool_limits

from service.registry import OutOfFold
from service.simulation import simulate
from service.training import TrainingResult, train_model


@pytest.fixture(autouse=True, scope="session")
def _one_thread() -> Iterator[None]:
    with threadpool_limits(limits=1):
        yield


@pytest.fixture(scope="session")
def true_oof() -> OutOfFold:
    """Invented Larkspur Tea Club data ranked by the true effect (a perfect-knowledge score)."""
    c = simulate("larkspur", 3000, random_state=3)
    fold = np.arange(len(c.y)) % 5
    return OutOfFold(c.tau, c.y, c.treatment, fold, None, list(c.arms), c.control)


@pytest.fixture(scope="session")
def trained(tmp_path_factory: pytest.TempPathFactory) -> TrainingResult:
    frame = simulate("larkspur", 800, random_state=4).to_frame()
    options: dict[str, Any] = {"learner": "t", "base": "linear", "n_bootstrap": 2, "n_splits": 3}
    root: Path = tmp_path_factory.mktemp("report") / "models"
    return train_model(
        frame,
        treatment="treatment",
        outcome="renewed",
        name="tea",
        models_dir=root,
        value=4.0,
        cost={"email": 0.05, "call": 1.0},
        **options,
    )
