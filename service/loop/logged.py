"""Logged decisions of one campaign, joined with their outcomes, as aligned arrays."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

import numpy as np
import numpy.typing as npt
import pandas as pd

from service.decisions.record import COLUMNS, DecisionRecord, from_row
from service.decisions.schema import connect, create_schema, sqlite_path
from service.errors import DataError, NotFoundError

__all__ = ["LoggedDecisions", "read_logged", "utc_text"]

FloatArray = npt.NDArray[np.float64]
_FETCH = 1000
_NO_CONTACT = "none"


@dataclass(frozen=True, eq=False)
class LoggedDecisions:
    """Decisions of one campaign over a time window, oldest first, with their outcomes.

    ``labels`` is ``["none", *arms]``; ``action`` indexes it; ``action_probs`` has one
    column per label; ``outcome`` is NaN where no outcome has been received yet;
    ``tau`` (n, K) and ``mu0`` are the logging model's estimates at decision time.
    """

    campaign: str
    since: str | None
    until: str | None
    records: list[DecisionRecord]
    labels: list[str]
    outcome: FloatArray
    observed_at: list[str | None]
    action: npt.NDArray[np.intp]
    action_probs: FloatArray
    holdout: npt.NDArray[np.bool_]
    explored: npt.NDArray[np.bool_]
    value: FloatArray
    tau: FloatArray
    mu0: FloatArray

    def __len__(self) -> int:
        return len(self.records)

    @property
    def arms(self) -> list[str]:
        """Arm labels (actions 1..K)."""
        return self.labels[1:]

    @property
    def has_outcome(self) -> npt.NDArray[np.bool_]:
        """True where an outcome has been received."""
        flags: npt.NDArray[np.bool_] = ~np.isnan(self.outcome)
        return flags

    def subset(self, rows: npt.NDArray[np.bool_] | npt.NDArray[np.intp]) -> LoggedDecisions:
        """The same log restricted to ``rows`` (a mask or indices)."""
        index = np.flatnonzero(rows) if np.asarray(rows).dtype == bool else np.asarray(rows)
        return LoggedDecisions(
            campaign=self.campaign,
            since=self.since,
            until=self.until,
            records=[self.records[i] for i in index],
            labels=list(self.labels),
            outcome=self.outcome[index],
            observed_at=[self.observed_at[i] for i in index],
            action=self.action[index],
            action_probs=self.action_probs[index],
            holdout=self.holdout[index],
            explored=self.explored[index],
            value=self.value[index],
            tau=self.tau[index],
            mu0=self.mu0[index],
        )

    def with_outcomes(self) -> LoggedDecisions:
        """Only the decisions whose outcome has been received."""
        return self.subset(self.has_outcome)

    def feature_rows(self, names: Sequence[str] | None = None) -> list[dict[str, Any]]:
        """Features as scored, one mapping per decision (restricted to ``names`` if given)."""
        if names is None:
            return [dict(r.features) for r in self.records]
        return [{k: r.features.get(k) for k in names} for r in self.records]

    def features(self) -> pd.DataFrame:
        """Features as scored, one column per feature logged (missing values as None)."""
        return pd.DataFrame.from_records(self.feature_rows())

    def customer_ids(self) -> list[str]:
        """Customer id of each decision."""
        return [r.customer_id for r in self.records]

    def first_last(self) -> tuple[str | None, str | None]:
        """Time of the first and of the last decision."""
        if not self.records:
            return None, None
        return self.records[0].created_at, self.records[-1].created_at


def utc_text(moment: datetime | str | None, what: str) -> str | None:
    """An ISO 8601 time with offset (or None) as stored in the log: UTC, microseconds."""
    if moment is None:
        return None
    if isinstance(moment, str):
        try:
            moment = datetime.fromisoformat(moment.strip().replace("Z", "+00:00"))
        except ValueError:
            raise DataError(
                f"{what} {moment!r} is not ISO 8601; write e.g. 2026-03-01 or "
                "2026-03-01T09:30:00+00:00."
            ) from None
    if moment.tzinfo is None:
        moment = moment.replace(tzinfo=UTC)
    return moment.astimezone(UTC).isoformat(timespec="microseconds")


def read_logged(
    log: str | Path,
    campaign: str,
    *,
    since: datetime | str | None = None,
    until: datetime | str | None = None,
    last: int | None = None,
) -> LoggedDecisions:
    """Read a campaign's decisions with ``since <= created_at < until`` and their outcomes.

    ``last`` keeps only the most recent ``last`` decisions of the window (read from the
    end of the index, so a long log costs no more than the window). Times without an
    offset are taken as UTC. Raises :class:`NotFoundError` when the
    window holds no decision of the campaign, and :class:`DataError` when the campaign's
    arms changed inside the window (analyse each period on its own).
    """
    path = sqlite_path(log)
    if not path.exists():
        raise NotFoundError(
            f"Decision log {str(path)!r} does not exist; point --log (or UPSHOT_DECISION_LOG) "
            "at the service's log."
        )
    create_schema(path)
    start, end = utc_text(since, "since"), utc_text(until, "until")
    if last is not None and last < 1:
        raise DataError(f"last={last!r} must be a positive number of decisions.")
    rows = _query(path, campaign, start, end, last)
    if not rows:
        window = f" between {start or 'the beginning'} and {end or 'now'}"
        raise NotFoundError(
            f"The log has no decisions of campaign {campaign!r}{window}; check the campaign "
            "id and the window."
        )
    return _arrays(campaign, start, end, rows)


def _query(
    path: Path, campaign: str, since: str | None, until: str | None, last: int | None
) -> list[tuple[DecisionRecord, float | None, str | None]]:
    columns = ", ".join(f"d.{c}" for c in COLUMNS)
    clauses, params = ["d.campaign = ?"], [campaign]
    for bound, op in ((since, ">="), (until, "<")):
        if bound is not None:
            clauses.append(f"d.created_at {op} ?")
            params.append(bound)
    order = "DESC" if last is not None else "ASC"
    query = (
        f"SELECT {columns}, o.outcome, o.observed_at FROM decisions d "
        "LEFT JOIN outcomes o ON o.decision_id = d.decision_id "
        f"WHERE {' AND '.join(clauses)} "
        f"ORDER BY d.created_at {order}, d.decision_id {order}"
    )
    if last is not None:
        query += f" LIMIT {int(last)}"
    conn = connect(path, readonly=True)
    try:
        cursor = conn.execute(query, params)
        out: list[tuple[DecisionRecord, float | None, str | None]] = []
        while batch := cursor.fetchmany(_FETCH):
            out.extend((from_row(row[:-2]), row[-2], row[-1]) for row in batch)
        return out[::-1] if last is not None else out
    finally:
        conn.close()


def _arrays(
    campaign: str,
    since: str | None,
    until: str | None,
    rows: list[tuple[DecisionRecord, float | None, str | None]],
) -> LoggedDecisions:
    records = [r for r, _, _ in rows]
    arms = list(records[0].arms)
    changed = next((r for r in records if list(r.arms) != arms), None)
    if changed is not None:
        raise DataError(
            f"Campaign {campaign!r} changed its arms inside the window (from {arms} to "
            f"{changed.arms} at {changed.created_at}); analyse each period on its own with "
            "--since / --until."
        )
    labels = [_NO_CONTACT, *arms]
    index = {label: j for j, label in enumerate(labels)}
    return LoggedDecisions(
        campaign=campaign,
        since=since,
        until=until,
        records=records,
        labels=labels,
        outcome=np.array([np.nan if y is None else y for _, y, _ in rows], dtype=np.float64),
        observed_at=[t for _, _, t in rows],
        action=np.array([index[r.action] for r in records], dtype=np.intp),
        action_probs=np.array([[r.action_probs[k] for k in labels] for r in records]),
        holdout=np.array([r.holdout for r in records], dtype=bool),
        explored=np.array([r.explored for r in records], dtype=bool),
        value=np.array([r.value for r in records], dtype=np.float64),
        tau=np.array([r.tau for r in records], dtype=np.float64).reshape(len(records), len(arms)),
        mu0=np.array([r.mu0 for r in records], dtype=np.float64),
    )
