"""Demo data files for the command-line tests (invented Larkspur Tea Club data)."""

from __future__ import annotations

from collections.abc import Iterator
from pathlib import Path

import pandas as pd
import pytest
from threadpoolctl import threadpool_limits

from service.simulation import simulate


@pytest.fixture(autouse=True, scope="session")
def _one_thread() -> Iterator[None]:
    # Small fits are several times slower with competing BLAS/OpenMP threads on 2 cores.
    with threadpool_limits(limits=1):
        yield


@pytest.fixture(scope="session")
def demo_frame() -> pd.DataFrame:
    return simulate("larkspur", 800, random_state=2).to_frame()


@pytest.fixture
def demo_csv(tmp_path: Path, demo_frame: pd.DataFrame) -> Path:
    path = tmp_path / "larkspur.csv"
    demo_frame.to_csv(path, index=False)
    return path
