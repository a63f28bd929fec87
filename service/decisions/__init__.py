"""The decision store: every decision returned, committed first, with its exact propensity.

:class:`DecisionLog` is the one interface to it (``store.py``), opened from a SQLite file
path (the embedded default: WAL, ``synchronous=FULL``) or a ``postgresql://`` URL; one
writer thread per open log groups concurrent appends into one transaction. The same
store holds the observed outcome of each decision (idempotent, all-or-nothing on
conflict, corrected only explicitly with who, when and why). Schema steps are versioned
(``migrations.py``) and applied on open or by ``upshot log migrate``.
"""

from __future__ import annotations

from service.decisions.columns import DecisionColumns
from service.decisions.location import Location, parse_location
from service.decisions.migrations import SCHEMA_VERSION
from service.decisions.outcomes import (
    MAX_AMOUNT,
    Correction,
    Outcome,
    OutcomeConflict,
    OutcomeReceipt,
    outcomes_from_rows,
    parse_outcome,
)
from service.decisions.record import MODES, DecisionRecord, decision_id, utc_now
from service.decisions.store import JOINED, DecisionLog, OutcomeKinds, StoreCounts, utc_text

__all__ = [
    "JOINED",
    "MAX_AMOUNT",
    "MODES",
    "SCHEMA_VERSION",
    "Correction",
    "DecisionColumns",
    "DecisionLog",
    "DecisionRecord",
    "Location",
    "Outcome",
    "OutcomeConflict",
    "OutcomeKinds",
    "OutcomeReceipt",
    "StoreCounts",
    "decision_id",
    "outcomes_from_rows",
    "parse_location",
    "parse_outcome",
    "utc_now",
    "utc_text",
]
