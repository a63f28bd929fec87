"""Outcomes fed back by decision id: idempotent, all-or-nothing, unknown ids reported.

Outcomes live in the decision log's database (table ``outcomes``, one row per decision).
Sending the same outcome again changes nothing; sending a different one for a decision
that already has one is a conflict, and the whole request is refused with nothing
written. Ids that match no logged decision are reported back, never silently dropped.
"""

from __future__ import annotations

import math
import sqlite3
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

from service.decisions.record import utc_now
from service.decisions.schema import connect, create_schema, sqlite_path
from service.errors import ConflictError, DataError

__all__ = [
    "Outcome",
    "OutcomeConflict",
    "OutcomeReceipt",
    "OutcomeStore",
    "outcomes_from_rows",
    "parse_outcome",
]

# SQLite's default limit on bound parameters per statement is 999 in older builds.
_CHUNK = 500


@dataclass(frozen=True)
class Outcome:
    """The observed outcome of one decision: 0/1 for a response, or an amount.

    ``observed_at`` is an ISO 8601 time with a UTC offset, stored normalised to UTC, or
    None when unknown.
    """

    decision_id: str
    outcome: float
    observed_at: str | None = None

    def agrees_with(self, other: Outcome) -> bool:
        """Same value, and the same observation time where both give one."""
        same_time = None in (self.observed_at, other.observed_at) or (
            self.observed_at == other.observed_at
        )
        return self.outcome == other.outcome and same_time

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready fields."""
        return {
            "decision_id": self.decision_id,
            "outcome": self.outcome,
            "observed_at": self.observed_at,
        }


class OutcomeConflict(ConflictError):
    """Some outcomes contradict what is stored (or each other); nothing was written."""

    def __init__(self, message: str, conflicts: list[dict[str, Any]]) -> None:
        super().__init__(message)
        self.details = {"conflicts": conflicts}


@dataclass(frozen=True)
class OutcomeReceipt:
    """What a request did: newly recorded, already there (no-op), and unknown ids."""

    recorded: list[str] = field(default_factory=list)
    unchanged: list[str] = field(default_factory=list)
    unknown: list[str] = field(default_factory=list)

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready summary with the counts and the ids."""
        return {
            "recorded": len(self.recorded),
            "unchanged": len(self.unchanged),
            "unknown": len(self.unknown),
            "unknown_ids": list(self.unknown),
        }


def parse_outcome(
    decision_id: object, outcome: object, observed_at: object = None, *, where: str = "outcome"
) -> Outcome:
    """Check one outcome's fields and normalise them; raise DataError naming ``where``.

    ``outcome`` may be a number or a boolean (true = 1); ``observed_at`` an ISO 8601
    time with a UTC offset, or None.
    """
    if not isinstance(decision_id, str) or not decision_id.strip():
        raise DataError(f"{where}: decision_id {decision_id!r} must be a non-empty string.")
    if isinstance(outcome, bool):
        outcome = float(outcome)
    if hasattr(outcome, "item"):
        outcome = outcome.item()
    if not isinstance(outcome, int | float) or not math.isfinite(outcome):
        raise DataError(
            f"{where}: outcome {outcome!r} of decision {decision_id!r} must be a finite "
            "number (1/0 for a response, or an amount)."
        )
    return Outcome(decision_id.strip(), float(outcome), _utc(observed_at, where))


def _utc(moment: object, where: str) -> str | None:
    if moment is None or (isinstance(moment, float) and math.isnan(moment)):
        return None
    if isinstance(moment, datetime):
        parsed = moment
    elif isinstance(moment, str) and moment.strip():
        try:
            parsed = datetime.fromisoformat(moment.strip().replace("Z", "+00:00"))
        except ValueError:
            raise DataError(
                f"{where}: observed_at {moment!r} is not ISO 8601; write e.g. "
                "2026-03-01T09:30:00+00:00."
            ) from None
    else:
        raise DataError(f"{where}: observed_at {moment!r} must be an ISO 8601 time or null.")
    if parsed.tzinfo is None:
        raise DataError(
            f"{where}: observed_at {moment!r} has no UTC offset; add one (e.g. +00:00)."
        )
    return parsed.astimezone(UTC).isoformat(timespec="microseconds")


class OutcomeStore:
    """Reads and writes the ``outcomes`` table of a decision log database."""

    def __init__(self, path: Path) -> None:
        self.path = path

    @classmethod
    def open(cls, url_or_path: str | Path) -> OutcomeStore:
        """The store of the log at ``sqlite:///<path>`` or a file path (created if needed)."""
        path = sqlite_path(url_or_path)
        create_schema(path)
        return cls(path)

    def record(self, outcomes: Sequence[Outcome]) -> OutcomeReceipt:
        """Store outcomes in one transaction: all of them, or (on a conflict) none.

        Raises
        ------
        OutcomeConflict
            An outcome differs from the one stored for its decision, or the request
            gives two different outcomes for one decision. Nothing is written.
        """
        fresh, unchanged = _dedupe(outcomes)
        conn = connect(self.path)
        try:
            conn.execute("BEGIN IMMEDIATE")
            try:
                receipt = self._apply(conn, fresh, unchanged)
            except BaseException:
                conn.execute("ROLLBACK")
                raise
            conn.execute("COMMIT")
        finally:
            conn.close()
        return receipt

    def get(self, decision_id: str) -> Outcome | None:
        """The stored outcome of a decision, or None."""
        conn = connect(self.path, readonly=True)
        try:
            found = _stored(conn, [decision_id])
        finally:
            conn.close()
        return found.get(decision_id)

    def count(self) -> int:
        """Outcomes stored."""
        conn = connect(self.path, readonly=True)
        try:
            return int(conn.execute("SELECT COUNT(*) FROM outcomes").fetchone()[0])
        finally:
            conn.close()

    @staticmethod
    def _apply(
        conn: sqlite3.Connection, fresh: dict[str, Outcome], unchanged: list[str]
    ) -> OutcomeReceipt:
        ids = list(fresh)
        stored = _stored(conn, ids)
        conflicts = [
            {"decision_id": i, "stored": stored[i].to_dict(), "sent": fresh[i].to_dict()}
            for i in ids
            if i in stored and not fresh[i].agrees_with(stored[i])
        ]
        if conflicts:
            raise OutcomeConflict(
                f"{len(conflicts)} outcome(s) differ from the ones already recorded (first: "
                f"decision {conflicts[0]['decision_id']!r}); an outcome, once recorded, is "
                "not overwritten, so nothing of this request was stored. Resend without "
                "them, or correct the data you send.",
                conflicts,
            )
        known = _existing_decisions(conn, [i for i in ids if i not in stored])
        new = [fresh[i] for i in ids if i in known]
        received = utc_now()
        conn.executemany(
            "INSERT INTO outcomes (decision_id, outcome, observed_at, received_at) "
            "VALUES (?, ?, ?, ?)",
            [(o.decision_id, o.outcome, o.observed_at, received) for o in new],
        )
        return OutcomeReceipt(
            recorded=[o.decision_id for o in new],
            unchanged=unchanged + [i for i in ids if i in stored],
            unknown=[i for i in ids if i not in stored and i not in known],
        )


def _dedupe(outcomes: Iterable[Outcome]) -> tuple[dict[str, Outcome], list[str]]:
    """One outcome per id; a repeat that agrees is a no-op, one that differs a conflict."""
    fresh: dict[str, Outcome] = {}
    repeats: list[str] = []
    for o in outcomes:
        first = fresh.get(o.decision_id)
        if first is None:
            fresh[o.decision_id] = o
        elif first.agrees_with(o):
            repeats.append(o.decision_id)
        else:
            raise OutcomeConflict(
                f"Decision {o.decision_id!r} has two different outcomes in this request "
                f"({first.outcome:g} and {o.outcome:g}); send one. Nothing was stored.",
                [{"decision_id": o.decision_id, "stored": None, "sent": o.to_dict()}],
            )
    return fresh, repeats


def _chunks(ids: Sequence[str]) -> Iterable[Sequence[str]]:
    for start in range(0, len(ids), _CHUNK):
        yield ids[start : start + _CHUNK]


def _stored(conn: sqlite3.Connection, ids: Sequence[str]) -> dict[str, Outcome]:
    found: dict[str, Outcome] = {}
    for chunk in _chunks(ids):
        marks = ", ".join("?" for _ in chunk)
        query = (
            "SELECT decision_id, outcome, observed_at FROM outcomes "
            f"WHERE decision_id IN ({marks})"
        )
        rows = conn.execute(query, list(chunk))
        found.update({row[0]: Outcome(row[0], float(row[1]), row[2]) for row in rows})
    return found


def _existing_decisions(conn: sqlite3.Connection, ids: Sequence[str]) -> set[str]:
    found: set[str] = set()
    for chunk in _chunks(ids):
        marks = ", ".join("?" for _ in chunk)
        rows = conn.execute(
            f"SELECT decision_id FROM decisions WHERE decision_id IN ({marks})", list(chunk)
        )
        found.update(row[0] for row in rows)
    return found


def outcomes_from_rows(rows: Iterable[Mapping[str, Any]], *, where: str) -> list[Outcome]:
    """Parse mappings with ``decision_id``, ``outcome`` and optional ``observed_at``."""
    out = []
    for n, row in enumerate(rows, start=1):
        out.append(
            parse_outcome(
                row.get("decision_id"),
                row.get("outcome"),
                row.get("observed_at"),
                where=f"{where} row {n}",
            )
        )
    return out
