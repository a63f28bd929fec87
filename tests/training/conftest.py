"""Small demo campaigns for training tests (invented Larkspur Tea Club data)."""

from __future__ import annotations

from collections.abc import Iterator

import pandas as pd
import pytest
from threadpoolctl import threadpool_limits


@pytest.fixture(autouse=True, scope="session")
def _one_thread() -> Iterator[None]:
    # Small fits are several times slower with competing BLAS/OpenMP threads on 2 cores.
    with threadpool_limits(limits=1):
        yield


@pytest.fixture(scope="session")
def campaign() -> pd.DataFrame:
    from service.simulation import simulate

    return simulate("larkspur", 800, random_state=1).to_frame()


@pytest.fixture(scope="session")
def tiny() -> pd.DataFrame:
    """Just enough rows per group for 3 folds: for tests about files, not about fit."""
    from service.simulation import simulate

    return simulate("larkspur", 300, random_state=5).to_frame()
