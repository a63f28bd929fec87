"""The decision log: storage, idempotency, group commit, all-or-nothing appends."""

from __future__ import annotations

import asyncio
import sqlite3
from collections.abc import Callable, Iterator
from dataclasses import replace
from datetime import UTC, datetime
from pathlib import Path

import pytest

from service.decisions import DecisionLog, DecisionRecord
from service.decisions.record import to_row
from service.errors import ConfigError, DataError, UpshotError

RecordFactory = Callable[..., DecisionRecord]


@pytest.fixture
def log(tmp_path: Path) -> Iterator[DecisionLog]:
    with DecisionLog.open(tmp_path / "decisions.db") as opened:
        yield opened


def test_appended_records_can_be_read_back(log: DecisionLog, make_record: RecordFactory) -> None:
    records = [make_record(i) for i in range(5)]
    other = make_record(9, campaign="spring-upsell")
    log.append_sync([*reversed(records), other])
    assert log.get(records[2].decision_id) == records[2]
    assert log.get("no-such-id") is None
    # Oldest first, one campaign only.
    assert list(log.iter_decisions("larkspur-renewal")) == records
    since = datetime(2026, 3, 1, 9, 0, 1, tzinfo=UTC)
    window = log.iter_decisions("larkspur-renewal", since=since, until="2026-03-01T09:00:03Z")
    assert [r.customer_id for r in window] == ["LTC-000001", "LTC-000002"]
    with pytest.raises(DataError, match=r"has no UTC offset"):
        list(log.iter_decisions("larkspur-renewal", since="2026-03-01T09:00:00"))


def test_a_retried_append_is_idempotent(log: DecisionLog, make_record: RecordFactory) -> None:
    first = make_record(1)
    log.append_sync([first])
    # A retry carries the same decision id; the first record is kept, nothing is added.
    log.append_sync([first, replace(first, created_at="2026-03-02T00:00:00+00:00")])
    assert log.records_written == 1
    assert log.get(first.decision_id) == first
    assert len(list(log.iter_decisions("larkspur-renewal"))) == 1


def test_concurrent_appends_all_land_in_fewer_transactions(
    log: DecisionLog, make_record: RecordFactory
) -> None:
    n = 300

    async def main() -> None:
        await asyncio.gather(*(log.append([make_record(i)]) for i in range(n)))

    asyncio.run(main())
    assert log.records_written == n
    assert len(list(log.iter_decisions("larkspur-renewal"))) == n
    # Group commit: many callers share a transaction (typically a handful of commits).
    assert 1 <= log.commits <= n // 2


def test_group_limit_one_gives_one_transaction_per_call(
    tmp_path: Path, make_record: RecordFactory
) -> None:
    with DecisionLog.open(tmp_path / "single.db", group_limit=1) as single:

        async def main() -> None:
            await asyncio.gather(*(single.append([make_record(i)]) for i in range(40)))

        asyncio.run(main())
        assert single.commits == 40 and single.records_written == 40


def test_an_invalid_record_rejects_the_whole_append(
    log: DecisionLog, make_record: RecordFactory
) -> None:
    batch = [make_record(1), make_record(2), make_record(3, propensity=0.3)]
    with pytest.raises(DataError, match=r"field 'propensity'"):
        log.append_sync(batch)
    assert log.records_written == 0 and log.commits == 0
    assert log.get(batch[0].decision_id) is None


def test_a_batch_the_database_rejects_rolls_back_alone(
    log: DecisionLog, make_record: RecordFactory
) -> None:
    good_a = [to_row(make_record(i)) for i in range(3)]
    good_c = [to_row(make_record(i)) for i in range(10, 13)]
    bad_row = list(to_row(make_record(20)))
    bad_row[19] = 2.0  # propensity column: violates the table's CHECK constraint
    bad_b = [to_row(make_record(21)), tuple(bad_row)]
    # Hold the write lock so that the three batches queue up and share one transaction.
    blocker = sqlite3.connect(log.path, isolation_level=None)
    blocker.execute("BEGIN IMMEDIATE")
    probe = log._writer.submit(None)
    futures = [log._writer.submit(rows) for rows in (good_a, bad_b, good_c)]
    blocker.execute("ROLLBACK")
    blocker.close()
    probe.result(timeout=20)
    assert futures[0].result(timeout=20) == 3 and futures[2].result(timeout=20) == 3
    with pytest.raises(UpshotError, match=r"rejected a batch of 2 records"):
        futures[1].result(timeout=20)
    assert log.commits == 1
    assert log.get(make_record(21).decision_id) is None
    assert len(list(log.iter_decisions("larkspur-renewal"))) == 6


@pytest.mark.parametrize(
    ("target", "match"),
    [
        (":memory:", r"is in memory"),
        ("sqlite:///:memory:", r"is in memory"),
        ("postgresql://db/log", r"unsupported database"),
        ("sqlite://relative.db", r"not of the form sqlite:///<path>"),
    ],
)
def test_unsafe_or_unsupported_targets_are_refused(target: str, match: str) -> None:
    with pytest.raises(ConfigError, match=match):
        DecisionLog.open(target)


def test_database_uses_wal_and_holds_the_outcomes_table(
    tmp_path: Path, make_record: RecordFactory
) -> None:
    path = tmp_path / "sub" / "log.db"
    with DecisionLog.open(f"sqlite:///{path}") as opened:
        opened.append_sync([make_record(1)])
    conn = sqlite3.connect(path)
    try:
        assert conn.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
        columns = [row[1] for row in conn.execute("PRAGMA table_info(outcomes)")]
        assert columns == ["decision_id", "outcome", "observed_at", "received_at"]
        indexes = [row[1] for row in conn.execute("PRAGMA index_list(decisions)")]
        assert "decisions_campaign_time" in indexes
    finally:
        conn.close()


def test_writable_until_closed(tmp_path: Path, make_record: RecordFactory) -> None:
    opened = DecisionLog.open(tmp_path / "log.db")
    assert opened.writable()
    opened.close()
    assert not opened.writable()
    with pytest.raises(UpshotError, match=r"is closed"):
        opened.append_sync([make_record(1)])
    with pytest.raises(UpshotError, match=r"is closed"):
        opened.get("x")
