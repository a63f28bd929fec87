"""Outcomes fed back by decision id: parsing, checks and the shapes the store returns.

Outcomes live in the decision store (table ``outcomes``, one row per decision; see
:meth:`~service.decisions.DecisionLog.record_outcomes`). Sending the same outcome again
changes nothing; sending a different one for a decision that already has one is a
conflict, and the whole request is refused with nothing written; only an explicit
correction (with who and why, kept in ``outcome_corrections``) changes a recorded one.
Ids that match no logged decision are reported back, never silently dropped.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from datetime import UTC, datetime
from typing import Any

from service.errors import ConflictError, DataError

__all__ = [
    "MAX_AMOUNT",
    "OUTCOME_TYPES",
    "Correction",
    "Outcome",
    "OutcomeConflict",
    "OutcomeReceipt",
    "check_outcome_kind",
    "dedupe_outcomes",
    "outcomes_from_rows",
    "parse_outcome",
]

MAX_AMOUNT = 1e9
"""Largest outcome amount accepted (in absolute value). Our own bound, no source: far above
any one customer's spend, and small enough that sums of squares over billions of
decisions stay finite (one 1e308 used to turn every lift window holding it into an error)."""

OUTCOME_TYPES = ("binary", "continuous")


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
    if abs(outcome) > MAX_AMOUNT:
        raise DataError(
            f"{where}: outcome {outcome!r} of decision {decision_id!r} is beyond "
            f"+/-{MAX_AMOUNT:g}; send the amount in the campaign's currency units."
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


def check_outcome_kind(outcome: Outcome, kind: str | None) -> None:
    """Refuse an outcome its decision's outcome type cannot have (0/1 for ``binary``)."""
    if kind == "binary" and outcome.outcome not in (0.0, 1.0):
        raise DataError(
            f"Outcome {outcome.outcome:g} of decision {outcome.decision_id!r} is impossible: "
            "the model behind it predicts a binary outcome, so send 1 (responded) or 0 "
            "(did not). Nothing of this request was stored."
        )


@dataclass(frozen=True)
class Correction:
    """An explicit change of a recorded outcome: before, after, who, when and why."""

    decision_id: str
    previous: Outcome
    outcome: Outcome
    actor: str
    reason: str
    corrected_at: str

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready fields."""
        return {
            "decision_id": self.decision_id,
            "previous": self.previous.to_dict(),
            "outcome": self.outcome.to_dict(),
            "actor": self.actor,
            "reason": self.reason,
            "corrected_at": self.corrected_at,
        }


def dedupe_outcomes(outcomes: Iterable[Outcome]) -> tuple[dict[str, Outcome], list[str]]:
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
