"""Logged decisions of one campaign, joined with their outcomes, as aligned arrays.

The store streams the rows in chunks; only compact arrays are kept (about 100 bytes per
decision for the numbers lift and replay need). Per-decision text (ids, model, features
as their JSON text) is kept only when asked for with ``detail=True``, and features are
parsed only when used.
"""

from __future__ import annotations

from collections.abc import Iterator, Sequence
from dataclasses import dataclass, replace
from datetime import datetime
from pathlib import Path
from typing import Any

import numpy as np
import numpy.typing as npt
import orjson
import pandas as pd

from service.decisions import DecisionLog
from service.decisions import utc_text as _store_utc_text
from service.errors import DataError, NotFoundError

__all__ = ["LoggedDecisions", "iter_logged", "open_log", "read_logged", "utc_text"]

FloatArray = npt.NDArray[np.float64]
_NO_CONTACT = "none"
_NUMERIC = (
    "created_at", "arms", "action", "action_probs", "holdout", "explored", "value", "tau",
    "mu0", "outcome",
)  # fmt: skip
_DETAIL = (
    "decision_id", "customer_id", "model_name", "model_version", "policy_hash", "features",
    "observed_at",
)  # fmt: skip
_CHUNK = 5000

LogSource = DecisionLog | str | Path


@dataclass(frozen=True, eq=False)
class Detail:
    """Per-decision text of a window: ids, creation time, model, policy and features
    (their JSON text as logged)."""

    decision_id: list[str]
    customer_id: list[str]
    created_at: list[str]
    model: list[str]
    policy_hash: list[str]
    features: list[str]
    observed_at: list[str | None]

    def take(self, index: npt.NDArray[np.intp]) -> Detail:
        """The entries at ``index``."""
        return Detail(**{k: [v[i] for i in index] for k, v in vars(self).items()})


@dataclass(frozen=True, eq=False)
class LoggedDecisions:
    """Decisions of one campaign over a time window, oldest first, with their outcomes.

    ``labels`` is ``["none", *arms]``; ``action`` indexes it; ``action_probs`` has one
    column per label; ``outcome`` is NaN where no outcome has been received yet;
    ``tau`` (n, K) and ``mu0`` are the logging model's estimates at decision time.
    ``detail`` holds the per-decision text when read with ``detail=True``.
    """

    campaign: str
    since: str | None
    until: str | None
    labels: list[str]
    outcome: FloatArray
    action: npt.NDArray[np.intp]
    action_probs: FloatArray
    holdout: npt.NDArray[np.bool_]
    explored: npt.NDArray[np.bool_]
    value: FloatArray
    tau: FloatArray
    mu0: FloatArray
    first_at: str | None
    last_at: str | None
    detail: Detail | None = None

    def __len__(self) -> int:
        return len(self.outcome)

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
        mask = np.asarray(rows)
        index = (np.flatnonzero(mask) if mask.dtype == bool else mask).astype(np.intp)
        detail = self.detail.take(index) if self.detail is not None else None
        first = last = None
        if detail is not None and len(index):
            first, last = detail.created_at[0], detail.created_at[-1]
        elif len(index) == len(self):
            first, last = self.first_at, self.last_at
        return replace(
            self,
            outcome=self.outcome[index],
            action=self.action[index],
            action_probs=self.action_probs[index],
            holdout=self.holdout[index],
            explored=self.explored[index],
            value=self.value[index],
            tau=self.tau[index],
            mu0=self.mu0[index],
            first_at=first,
            last_at=last,
            detail=detail,
        )

    def with_outcomes(self) -> LoggedDecisions:
        """Only the decisions whose outcome has been received."""
        return self.subset(self.has_outcome)

    def _detail(self) -> Detail:
        if self.detail is None:
            raise DataError(
                "These decisions were read without their per-decision detail; read them "
                "with read_logged(..., detail=True)."
            )
        return self.detail

    @property
    def decision_ids(self) -> list[str]:
        """Decision id of each decision."""
        return list(self._detail().decision_id)

    def feature_rows(self, names: Sequence[str] | None = None) -> list[dict[str, Any]]:
        """Features as scored, one mapping per decision (restricted to ``names`` if given)."""
        parsed = (orjson.loads(text) for text in self._detail().features)
        if names is None:
            return list(parsed)
        return [{k: row.get(k) for k in names} for row in parsed]

    def features(self) -> pd.DataFrame:
        """Features as scored, one column per feature logged (missing values as None)."""
        return pd.DataFrame.from_records(self.feature_rows())

    def customer_ids(self) -> list[str]:
        """Customer id of each decision."""
        return list(self._detail().customer_id)

    def models(self) -> list[str]:
        """``name:version`` of the model behind each decision."""
        return list(self._detail().model)

    def first_last(self) -> tuple[str | None, str | None]:
        """Time of the first and of the last decision."""
        return self.first_at, self.last_at


def utc_text(moment: datetime | str | None, what: str) -> str | None:
    """An ISO 8601 time with offset (or None) as stored in the log: UTC, microseconds."""
    try:
        return _store_utc_text(moment)
    except DataError:
        raise DataError(
            f"{what} {moment!r} is not ISO 8601; write e.g. 2026-03-01 or "
            "2026-03-01T09:30:00+00:00."
        ) from None


def open_log(log: LogSource) -> tuple[DecisionLog, bool]:
    """The log behind ``log`` (opened if a location, which must exist) and whether the
    caller opened it (and so closes it)."""
    if isinstance(log, DecisionLog):
        return log, False
    return DecisionLog.open(log, create=False), True


def read_logged(
    log: LogSource,
    campaign: str,
    *,
    since: datetime | str | None = None,
    until: datetime | str | None = None,
    last: int | None = None,
    detail: bool = True,
    with_outcome: bool = False,
) -> LoggedDecisions:
    """Read a campaign's decisions with ``since <= created_at < until`` and their outcomes.

    ``last`` keeps only the most recent ``last`` decisions of the window (read from the
    end of the index, so a long log costs no more than the window). Times without an
    offset are taken as UTC. ``detail=False`` keeps only the numbers (what lift needs);
    ``with_outcome`` only decisions that have an outcome. Raises :class:`NotFoundError`
    when the window holds no decision of the campaign, and :class:`DataError` when the
    campaign's arms changed inside the window (analyse each period on its own).
    """
    parts = list(
        iter_logged(
            log, campaign, since=since, until=until, last=last, detail=detail,
            with_outcome=with_outcome, chunk=_CHUNK,
        )
    )  # fmt: skip
    if not parts:
        start, end = utc_text(since, "since"), utc_text(until, "until")
        window = f" between {start or 'the beginning'} and {end or 'now'}"
        raise NotFoundError(
            f"The log has no decisions of campaign {campaign!r}{window}; check the campaign "
            "id and the window."
        )
    return _concat(parts)


def iter_logged(
    log: LogSource,
    campaign: str,
    *,
    since: datetime | str | None = None,
    until: datetime | str | None = None,
    last: int | None = None,
    detail: bool = True,
    with_outcome: bool = False,
    chunk: int = _CHUNK,
) -> Iterator[LoggedDecisions]:
    """:func:`read_logged` in pieces of at most ``chunk`` decisions, oldest first, for
    readers that stream (export, replay): memory is bounded by ``chunk``."""
    start, end = utc_text(since, "since"), utc_text(until, "until")
    if last is not None and last < 1:
        raise DataError(f"last={last!r} must be a positive number of decisions.")
    store, owned = open_log(log)
    columns = _NUMERIC + (_DETAIL if detail else ())
    arms_text: str | None = None
    try:
        rows = store.iter_joined(
            campaign, columns, since=start, until=end, last=last, with_outcome=with_outcome,
            chunk=chunk,
        )  # fmt: skip
        for part in rows:
            arms_text = _check_arms(campaign, part, arms_text)
            yield _arrays(campaign, start, end, part, detail)
    finally:
        if owned:
            store.close()


def _check_arms(campaign: str, rows: list[tuple[Any, ...]], first: str | None) -> str:
    first = rows[0][1] if first is None else first
    changed = next((row for row in rows if row[1] != first), None)
    if changed is not None:
        raise DataError(
            f"Campaign {campaign!r} changed its arms inside the window (from "
            f"{orjson.loads(first)} to {orjson.loads(changed[1])} at {changed[0]}); analyse "
            "each period on its own with --since / --until."
        )
    return first


def _arrays(
    campaign: str, since: str | None, until: str | None, rows: list[tuple[Any, ...]], detail: bool
) -> LoggedDecisions:
    arms = orjson.loads(rows[0][1])
    labels = [_NO_CONTACT, *arms]
    index = {label: j for j, label in enumerate(labels)}
    n, k = len(rows), len(arms)
    probs = np.empty((n, k + 1))
    tau = np.empty((n, k))
    for i, row in enumerate(rows):
        p = orjson.loads(row[3])
        probs[i] = [p[label] for label in labels]
        tau[i] = orjson.loads(row[7])
    columns = list(zip(*rows, strict=True))
    info = None
    if detail:
        # Model labels repeat; one string per distinct model, not one per decision.
        names: dict[tuple[str, str], str] = {}
        model = [
            names.setdefault((a, b), f"{a}:{b}")
            for a, b in zip(columns[12], columns[13], strict=True)
        ]
        info = Detail(
            decision_id=list(columns[10]),
            customer_id=list(columns[11]),
            created_at=list(columns[0]),
            model=model,
            policy_hash=list(columns[14]),
            features=list(columns[15]),
            observed_at=list(columns[16]),
        )
    return LoggedDecisions(
        campaign=campaign,
        since=since,
        until=until,
        labels=labels,
        outcome=np.array([np.nan if y is None else y for y in columns[9]], dtype=np.float64),
        action=np.array([index[a] for a in columns[2]], dtype=np.intp),
        action_probs=probs,
        holdout=np.array(columns[4], dtype=bool),
        explored=np.array(columns[5], dtype=bool),
        value=np.array(columns[6], dtype=np.float64),
        tau=tau,
        mu0=np.array(columns[8], dtype=np.float64),
        first_at=rows[0][0],
        last_at=rows[-1][0],
        detail=info,
    )


def _concat(parts: list[LoggedDecisions]) -> LoggedDecisions:
    if len(parts) == 1:
        return parts[0]
    head = parts[0]
    detail = None
    if head.detail is not None:
        detail = Detail(
            **{
                key: [v for p in parts for v in getattr(p.detail, key)]
                for key in vars(head.detail)
            }
        )
    arrays = {
        name: np.concatenate([getattr(p, name) for p in parts])
        for name in ("outcome", "action", "action_probs", "holdout", "explored", "value", "tau",
                     "mu0")
    }  # fmt: skip
    return replace(head, last_at=parts[-1].last_at, detail=detail, **arrays)  # type: ignore[arg-type]
