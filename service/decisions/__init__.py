"""The decision log: every decision returned, committed first, with its exact propensity.

SQLite in WAL mode with ``synchronous=FULL``; one writer thread groups concurrent
appends into one transaction. The ``outcomes`` table (same database) holds the observed
outcome of each decision (:class:`OutcomeStore`: idempotent, all-or-nothing on conflict).
"""

from __future__ import annotations

from service.decisions.columns import DecisionColumns
from service.decisions.log import DecisionLog
from service.decisions.outcomes import (
    Outcome,
    OutcomeConflict,
    OutcomeReceipt,
    OutcomeStore,
    outcomes_from_rows,
    parse_outcome,
)
from service.decisions.record import MODES, DecisionRecord, decision_id, utc_now
from service.decisions.schema import SCHEMA_VERSION, sqlite_path

__all__ = [
    "MODES",
    "SCHEMA_VERSION",
    "DecisionColumns",
    "DecisionLog",
    "DecisionRecord",
    "Outcome",
    "OutcomeConflict",
    "OutcomeReceipt",
    "OutcomeStore",
    "decision_id",
    "outcomes_from_rows",
    "parse_outcome",
    "sqlite_path",
    "utc_now",
]
