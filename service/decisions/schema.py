"""The decision log's SQLite schema and connection settings."""

from __future__ import annotations

import sqlite3
from pathlib import Path

from service.decisions.record import COLUMNS
from service.errors import ConfigError

__all__ = ["SCHEMA_VERSION", "connect", "create_schema", "sqlite_path"]

SCHEMA_VERSION = 1

_DDL = """
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

# Idempotent on the id only: unlike INSERT OR IGNORE, which would also silently skip a
# row that breaks a CHECK or NOT NULL constraint, this still fails such a row.
INSERT = (
    f"INSERT INTO decisions ({', '.join(COLUMNS)}) "
    f"VALUES ({', '.join('?' for _ in COLUMNS)}) ON CONFLICT (decision_id) DO NOTHING"
)
SELECT = f"SELECT {', '.join(COLUMNS)} FROM decisions"

# Replicas sharing one file wait this long for another writer's lock before failing.
_BUSY_TIMEOUT_MS = 10_000


def sqlite_path(url_or_path: str | Path) -> Path:
    """The file behind ``sqlite:///<path>`` or a plain path; refuse in-memory databases."""
    text = str(url_or_path)
    if text.startswith("sqlite:"):
        if not text.startswith("sqlite:///"):
            raise ConfigError(
                f"Decision log URL {text!r} is not of the form sqlite:///<path>; "
                "use sqlite:///relative.db or sqlite:////absolute/path.db."
            )
        text = text[len("sqlite:///") :]
    elif "://" in text:
        raise ConfigError(
            f"Decision log URL {text!r} uses an unsupported database; only SQLite "
            "(sqlite:///<path> or a file path) is supported."
        )
    if text in ("", ":memory:") or text.startswith("file::memory:"):
        raise ConfigError(
            f"Decision log {str(url_or_path)!r} is in memory, so acknowledged decisions "
            "would be lost on exit; give a file path."
        )
    return Path(text)


def connect(path: Path, *, readonly: bool = False) -> sqlite3.Connection:
    """A connection in autocommit mode with the log's durability settings.

    WAL lets readers run beside the single writer; ``synchronous=FULL`` makes every
    COMMIT fsync the write-ahead log, so a committed decision survives a crash of the
    process and of the machine.
    """
    conn = sqlite3.connect(path, isolation_level=None, check_same_thread=False)
    conn.execute(f"PRAGMA busy_timeout = {_BUSY_TIMEOUT_MS}")
    conn.execute("PRAGMA synchronous = FULL")
    if readonly:
        conn.execute("PRAGMA query_only = 1")
    return conn


def create_schema(path: Path) -> None:
    """Create the file, switch it to WAL and create the tables if they are missing."""
    path.parent.mkdir(parents=True, exist_ok=True)
    conn = connect(path)
    try:
        mode = conn.execute("PRAGMA journal_mode = WAL").fetchone()[0]
        if str(mode).lower() != "wal":
            raise ConfigError(
                f"Decision log {str(path)!r} cannot use WAL journaling (got {mode!r}); "
                "put it on a local file system."
            )
        version = conn.execute("PRAGMA user_version").fetchone()[0]
        if version > SCHEMA_VERSION:
            raise ConfigError(
                f"Decision log {str(path)!r} has schema version {version}, newer than this "
                f"upshot ({SCHEMA_VERSION}); upgrade upshot."
            )
        conn.executescript(_DDL)
        conn.execute(f"PRAGMA user_version = {SCHEMA_VERSION}")
    finally:
        conn.close()
