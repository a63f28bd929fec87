"""Committer: concurrent requests share one log transaction; a bad one fails alone."""

from __future__ import annotations

import asyncio
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

from service.decisions import DecisionColumns, DecisionLog, DecisionRecord, utc_now
from service.errors import DataError
from service.scoring import Committer

pytestmark = pytest.mark.anyio
CREATED = "2026-03-01T09:00:00.000000+00:00"


@pytest.fixture
def anyio_backend() -> str:
    return "asyncio"


def _record(i: int, *, propensity: float = 0.9) -> DecisionRecord:
    return DecisionRecord(
        decision_id=f"{i:032x}", created_at=utc_now(), campaign="c", customer_id=f"C{i}",
        model_name="m", model_version="v0001", policy_hash="h", features={"x": float(i)},
        value=1.0, arms=["email"], tau=[0.1], low=[0.0], high=[0.2], mu0=0.3,
        action="email", expected_value=0.1, explored=False, holdout=False,
        do_not_contact=False, propensity=propensity,
        action_probs={"none": 0.1, "email": 0.9}, mode="score",
    )  # fmt: skip


async def test_requests_of_one_loop_turn_share_one_commit(tmp_path: Path) -> None:
    with DecisionLog.open(tmp_path / "log.sqlite3") as log:
        committer = Committer(log)
        await asyncio.gather(*(committer.commit([_record(i)]) for i in range(12)))
        assert log.records_written == 12
        assert log.commits == 1
        for i in range(12):
            assert log.get(f"{i:032x}") is not None


async def test_an_invalid_request_fails_alone(tmp_path: Path) -> None:
    with DecisionLog.open(tmp_path / "log.sqlite3") as log:
        committer = Committer(log)
        bad = _record(3, propensity=0.5)  # propensity must equal action_probs[action]
        results = await asyncio.gather(
            *(committer.commit([bad if i == 3 else _record(i)]) for i in range(5)),
            return_exceptions=True,
        )
        assert isinstance(results[3], DataError)
        assert [r for i, r in enumerate(results) if i != 3] == [None] * 4
        assert log.get(f"{3:032x}") is None
        assert log.records_written == 4


async def test_large_batches_commit_off_the_event_loop(tmp_path: Path) -> None:
    with DecisionLog.open(tmp_path / "log.sqlite3") as log:
        await Committer(log).commit([_record(i) for i in range(2500)])
        assert log.records_written == 2500


def _columns(first: int, n: int, *, propensity: float = 0.9) -> DecisionColumns:
    return DecisionColumns.from_records(
        [replace(_record(i, propensity=propensity), created_at=CREATED)
         for i in range(first, first + n)]
    )  # fmt: skip


async def test_column_batches_of_one_loop_turn_share_one_commit(tmp_path: Path) -> None:
    with DecisionLog.open(tmp_path / "log.sqlite3") as log:
        committer = Committer(log)
        await asyncio.gather(*(committer.commit_columns(_columns(10 * i, 10)) for i in range(4)))
        assert log.records_written == 40
        assert log.commits == 1


async def test_an_invalid_column_batch_fails_alone(tmp_path: Path) -> None:
    with DecisionLog.open(tmp_path / "log.sqlite3") as log:
        committer = Committer(log)
        good = [_columns(0, 5), _columns(5, 5)]
        bad = replace(_columns(10, 5), action_probs=np.full((5, 2), 0.9))
        results = await asyncio.gather(
            committer.commit_columns(good[0]), committer.commit_columns(bad),
            committer.commit_columns(good[1]), return_exceptions=True,
        )  # fmt: skip
        assert results[0] is None and results[2] is None
        assert isinstance(results[1], DataError)
        assert log.records_written == 10
        assert log.get(f"{10:032x}") is None
        await committer.commit_columns(_columns(100, 2500))  # off the event loop
        assert log.records_written == 2510
