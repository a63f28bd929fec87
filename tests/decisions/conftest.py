"""Shared record factory and store locations (SQLite and PostgreSQL) for the store tests."""

from __future__ import annotations

from collections.abc import Callable, Iterator
from contextlib import contextmanager
from dataclasses import replace
from pathlib import Path
from typing import Any

import pytest
from postgres_db import clear_postgres

from service.decisions import DecisionRecord, decision_id

POLICY = "f" * 64


RecordFactory = Callable[..., DecisionRecord]


def _make_record(i: int, **changes: Any) -> DecisionRecord:
    """A valid score-mode record for customer i (fictional Larkspur Tea Club data)."""
    features = {"tenure_months": 12 + i % 30, "plan": "classic", "monthly_spend": 21.0}
    record = DecisionRecord(
        decision_id=decision_id(
            "larkspur-renewal", f"LTC-{i:06d}", POLICY, "larkspur/v0001", features, 40.0
        ),
        created_at=f"2026-03-01T09:{i // 60 % 60:02d}:{i % 60:02d}.000000+00:00",
        campaign="larkspur-renewal",
        customer_id=f"LTC-{i:06d}",
        model_name="larkspur",
        model_version="v0001",
        policy_hash=POLICY,
        features=features,
        value=40.0,
        arms=["email", "call"],
        tau=[0.05, 0.12],
        low=[0.01, 0.02],
        high=[0.09, 0.22],
        mu0=0.41,
        action="email",
        expected_value=1.6,
        explored=False,
        holdout=False,
        do_not_contact=False,
        propensity=0.8,
        action_probs={"none": 0.15, "email": 0.8, "call": 0.05},
        mode="score",
    )
    return replace(record, **changes)


@pytest.fixture
def make_record() -> RecordFactory:
    """Factory of valid records: ``make_record(i, **field_changes)``."""
    return _make_record


ENGINES = ["sqlite", "postgres"]


@pytest.fixture(params=ENGINES)
def location(request: pytest.FixtureRequest, tmp_path: Path) -> str:
    """An empty store: a SQLite file, or a PostgreSQL database (one per module, emptied)."""
    if request.param == "sqlite":
        return str(tmp_path / "decisions.sqlite3")
    url: str = request.getfixturevalue("postgres_module_url")
    clear_postgres(url)
    return url


@pytest.fixture
def write_lock() -> Callable[[str], Any]:
    """``with write_lock(location):`` holds the store's write lock from another connection."""
    return _write_lock


@contextmanager
def _write_lock(location: str) -> Iterator[None]:
    """Hold the store's write lock from another connection while the block runs."""
    if location.startswith("postgresql://"):
        import psycopg

        with psycopg.connect(location) as conn:
            conn.execute("LOCK TABLE decisions IN EXCLUSIVE MODE")
            yield
            conn.rollback()
        return
    import sqlite3

    conn = sqlite3.connect(location, isolation_level=None)
    try:
        conn.execute("BEGIN IMMEDIATE")
        yield
        conn.execute("ROLLBACK")
    finally:
        conn.close()
