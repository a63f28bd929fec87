"""Fixtures of the off-policy tests."""

from __future__ import annotations

import pytest
from offpolicy_sim import LoggedRun, logged_run


@pytest.fixture(scope="module")
def run() -> LoggedRun:
    """One simulated log (seed 0)."""
    return logged_run(0)
