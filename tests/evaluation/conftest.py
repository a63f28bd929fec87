"""Shared fixtures: a small campaign table worked through by hand in the tests."""

from __future__ import annotations

import numpy as np
import pytest


@pytest.fixture
def worked() -> dict[str, np.ndarray]:
    """Ten rows in six tie groups, best score first.

    row  score  treated  y
    A    0.9    1        1   group 1
    B    0.9    0        0   group 1
    C    0.7    1        1   group 2
    D    0.5    0        1   group 3
    E    0.5    1        0   group 3
    F    0.5    1        1   group 3
    G    0.3    0        0   group 4
    H    0.2    1        0   group 5
    I    0.1    0        1   group 6
    J    0.1    0        0   group 6

    The rows are stored shuffled on purpose, so the tests also show that the input order
    does not matter.
    """
    score = np.array([0.9, 0.9, 0.7, 0.5, 0.5, 0.5, 0.3, 0.2, 0.1, 0.1])
    treated = np.array([1, 0, 1, 0, 1, 1, 0, 1, 0, 0])
    y = np.array([1, 0, 1, 1, 0, 1, 0, 0, 1, 0])
    order = np.array([7, 2, 9, 0, 5, 3, 8, 1, 6, 4])
    return {"y": y[order], "treatment": treated[order], "score": score[order]}
