"""The decision log: every decision returned, committed first, with its exact propensity.

SQLite in WAL mode with ``synchronous=FULL``; one writer thread groups concurrent
appends into one transaction. The ``outcomes`` table (same database) is created empty
for the outcome feedback loop.
"""

from __future__ import annotations

from service.decisions.log import DecisionLog
from service.decisions.record import MODES, DecisionRecord, decision_id, utc_now
from service.decisions.schema import SCHEMA_VERSION, sqlite_path

__all__ = [
    "MODES",
    "SCHEMA_VERSION",
    "DecisionLog",
    "DecisionRecord",
    "decision_id",
    "sqlite_path",
    "utc_now",
]
