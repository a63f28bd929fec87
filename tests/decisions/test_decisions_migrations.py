"""Versioned schema: a log written by the first release upgrades in place, nothing lost."""

from __future__ import annotations

import sqlite3
from collections.abc import Callable
from pathlib import Path

import pytest

from service.cli import main
from service.decisions import SCHEMA_VERSION, DecisionLog, DecisionRecord, Outcome
from service.decisions.record import COLUMNS, to_row
from service.errors import ConfigError

RecordFactory = Callable[..., DecisionRecord]

# The schema and statements of the first release (service/decisions/schema.py at
# SCHEMA_VERSION = 1), copied verbatim so that this test keeps writing a genuine v1 log.
_V1_DDL = """
CREATE TABLE IF NOT EXISTS decisions (
    decision_id     TEXT PRIMARY KEY,
    created_at      TEXT NOT NULL,
    campaign        TEXT NOT NULL,
    customer_id     TEXT NOT NULL,
    model_name      TEXT NOT NULL,
    model_version   TEXT NOT NULL,
    policy_hash     TEXT NOT NULL,
    features        TEXT NOT NULL,
    value           REAL NOT NULL,
    arms            TEXT NOT NULL,
    tau             TEXT NOT NULL,
    low             TEXT NOT NULL,
    high            TEXT NOT NULL,
    mu0             REAL NOT NULL,
    action          TEXT NOT NULL,
    expected_value  REAL NOT NULL,
    explored        INTEGER NOT NULL CHECK (explored IN (0, 1)),
    holdout         INTEGER NOT NULL CHECK (holdout IN (0, 1)),
    do_not_contact  INTEGER NOT NULL CHECK (do_not_contact IN (0, 1)),
    propensity      REAL NOT NULL CHECK (propensity > 0 AND propensity <= 1),
    action_probs    TEXT NOT NULL,
    mode            TEXT NOT NULL CHECK (mode IN ('score', 'rank'))
);
CREATE INDEX IF NOT EXISTS decisions_campaign_time ON decisions (campaign, created_at);
CREATE TABLE IF NOT EXISTS outcomes (
    decision_id  TEXT PRIMARY KEY REFERENCES decisions (decision_id),
    outcome      REAL NOT NULL,
    observed_at  TEXT,
    received_at  TEXT NOT NULL
);
"""
_V1_INSERT = (
    f"INSERT INTO decisions ({', '.join(COLUMNS)}) "
    f"VALUES ({', '.join('?' for _ in COLUMNS)}) ON CONFLICT (decision_id) DO NOTHING"
)


def _write_v1_log(path: Path, records: list[DecisionRecord]) -> None:
    conn = sqlite3.connect(path, isolation_level=None)
    try:
        conn.execute("PRAGMA journal_mode = WAL")
        conn.executescript(_V1_DDL)
        conn.execute("PRAGMA user_version = 1")
        conn.execute("BEGIN IMMEDIATE")
        conn.executemany(_V1_INSERT, [to_row(r) for r in records])
        conn.execute(
            "INSERT INTO outcomes (decision_id, outcome, observed_at, received_at) "
            "VALUES (?, 1.0, '2026-03-02T10:00:00.000000+00:00', "
            "'2026-03-02T11:00:00.000000+00:00')",
            (records[3].decision_id,),
        )
        conn.execute("COMMIT")
    finally:
        conn.close()


def test_a_v1_sqlite_log_upgrades_in_place_with_nothing_lost(
    tmp_path: Path, make_record: RecordFactory
) -> None:
    path = tmp_path / "decisions.sqlite3"
    records = [make_record(i) for i in range(40)]
    _write_v1_log(path, records)
    with DecisionLog.open(path) as log:
        assert log.schema_version() == SCHEMA_VERSION == 2
        assert list(log.iter_decisions("larkspur-renewal")) == records
        assert log.outcome(records[3].decision_id) == Outcome(
            records[3].decision_id, 1.0, "2026-03-02T10:00:00.000000+00:00"
        )
        # The new table works on the upgraded file.
        log.correct_outcome(Outcome(records[3].decision_id, 0.0), actor="t", reason="test")
        log.append_sync([make_record(99)])
    conn = sqlite3.connect(path)
    try:
        assert conn.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
        assert conn.execute("SELECT COUNT(*) FROM decisions").fetchone()[0] == 41
    finally:
        conn.close()


def test_a_log_newer_than_this_upshot_is_refused(tmp_path: Path) -> None:
    path = tmp_path / "future.db"
    conn = sqlite3.connect(path)
    conn.execute("PRAGMA user_version = 99")
    conn.close()
    with pytest.raises(ConfigError, match=r"schema version 99, newer than this upshot"):
        DecisionLog.open(path)


def test_postgres_migrates_once_and_reports_its_version(
    postgres_empty_url: str, make_record: RecordFactory, capsys: pytest.CaptureFixture[str]
) -> None:
    assert main(["log", "migrate", "--log", postgres_empty_url]) == 0
    assert "applied 1, 2" in capsys.readouterr().out
    assert main(["log", "migrate", "--log", postgres_empty_url]) == 0
    assert "applied none (already current)" in capsys.readouterr().out
    with DecisionLog.open(postgres_empty_url) as log:
        log.append_sync([make_record(1)])
    assert main(["log", "status", "--log", postgres_empty_url]) == 0
    out = capsys.readouterr().out
    assert "postgresql" in out and "schema version 2; 1 decisions, 0 outcomes" in out
    password = postgres_empty_url.split(":")[2].split("@")[0]
    assert password not in out


def test_sqlite_migrate_command(
    tmp_path: Path, make_record: RecordFactory, capsys: pytest.CaptureFixture[str]
) -> None:
    path = tmp_path / "old.db"
    _write_v1_log(path, [make_record(i) for i in range(4)])
    assert main(["log", "migrate", "--log", str(path)]) == 0
    assert "applied 2" in capsys.readouterr().out
