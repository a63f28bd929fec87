"""Versioned schema of the decision store, one migration per version, for both engines.

Version 1 is the schema of the first upshot release (SQLite only); every later version
is a step that keeps all rows. A store applies the steps it lacks when it is opened (or
with ``upshot log migrate``), each in one transaction with its version number, so an
interrupted upgrade leaves the previous version intact. SQLite keeps the version in
``PRAGMA user_version``; PostgreSQL in the table ``upshot_schema``.
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["MIGRATIONS", "SCHEMA_VERSION", "Migration"]


@dataclass(frozen=True)
class Migration:
    """One schema step: its version, what it does, and its SQL for each engine."""

    version: int
    description: str
    sqlite: str
    postgres: str


# Both engines store times as ISO 8601 text in UTC with microseconds (which sorts in time
# order) and JSON as text, so a row reads back identically from either.
_DECISIONS = """
CREATE TABLE IF NOT EXISTS decisions (
    decision_id     TEXT PRIMARY KEY,
    created_at      TEXT NOT NULL,
    campaign        TEXT NOT NULL,
    customer_id     TEXT NOT NULL,
    model_name      TEXT NOT NULL,
    model_version   TEXT NOT NULL,
    policy_hash     TEXT NOT NULL,
    features        TEXT NOT NULL,
    value           {real} NOT NULL,
    arms            TEXT NOT NULL,
    tau             TEXT NOT NULL,
    low             TEXT NOT NULL,
    high            TEXT NOT NULL,
    mu0             {real} NOT NULL,
    action          TEXT NOT NULL,
    expected_value  {real} NOT NULL,
    explored        {flag} NOT NULL CHECK (explored IN (0, 1)),
    holdout         {flag} NOT NULL CHECK (holdout IN (0, 1)),
    do_not_contact  {flag} NOT NULL CHECK (do_not_contact IN (0, 1)),
    propensity      {real} NOT NULL CHECK (propensity > 0 AND propensity <= 1),
    action_probs    TEXT NOT NULL,
    mode            TEXT NOT NULL CHECK (mode IN ('score', 'rank'))
);
CREATE INDEX IF NOT EXISTS decisions_campaign_time ON decisions (campaign, created_at);
CREATE TABLE IF NOT EXISTS outcomes (
    decision_id  TEXT PRIMARY KEY REFERENCES decisions (decision_id),
    outcome      {real} NOT NULL,
    observed_at  TEXT,
    received_at  TEXT NOT NULL
);
"""

_CORRECTIONS = """
CREATE TABLE outcome_corrections (
    correction_id         {serial},
    decision_id           TEXT NOT NULL REFERENCES outcomes (decision_id),
    previous_outcome      {real} NOT NULL,
    previous_observed_at  TEXT,
    outcome               {real} NOT NULL,
    observed_at           TEXT,
    actor                 TEXT NOT NULL CHECK (actor <> ''),
    reason                TEXT NOT NULL CHECK (reason <> ''),
    corrected_at          TEXT NOT NULL
);
CREATE INDEX outcome_corrections_decision ON outcome_corrections (decision_id);
"""

_SQLITE = {"real": "REAL", "flag": "INTEGER", "serial": "INTEGER PRIMARY KEY AUTOINCREMENT"}
_POSTGRES = {"real": "DOUBLE PRECISION", "flag": "SMALLINT", "serial": "BIGSERIAL PRIMARY KEY"}

MIGRATIONS = (
    Migration(
        1,
        "decisions and outcomes",
        _DECISIONS.format(**_SQLITE),
        _DECISIONS.format(**_POSTGRES),
    ),
    Migration(
        2,
        "outcome corrections with who, when and why",
        _CORRECTIONS.format(**_SQLITE),
        _CORRECTIONS.format(**_POSTGRES),
    ),
)

SCHEMA_VERSION = MIGRATIONS[-1].version
