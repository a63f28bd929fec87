"""The decision store seam: what upshot asks of the database behind its decision log.

:class:`DecisionLog` is the one interface (append decisions, record and correct outcomes,
read a campaign's decisions joined with their outcomes, counts); :class:`SqliteLog`
(``service/decisions/sqlite.py``, the embedded default) and :class:`PostgresLog`
(``service/decisions/postgres.py``) implement it. Nothing outside this package speaks SQL.
:meth:`DecisionLog.open` picks the engine from the location: a file path (or
``sqlite:///path``) or a ``postgresql://`` URL.
"""

from __future__ import annotations

import asyncio
import concurrent.futures
import threading
from abc import ABC, abstractmethod
from collections.abc import Callable, Iterable, Iterator, Sequence
from contextlib import AbstractContextManager
from dataclasses import dataclass
from datetime import UTC, datetime
from os import PathLike
from types import TracebackType
from typing import Any, Protocol

from service.decisions.columns import DecisionColumns
from service.decisions.outcomes import (
    Correction,
    Outcome,
    OutcomeConflict,
    OutcomeReceipt,
    check_outcome_kind,
    dedupe_outcomes,
)
from service.decisions.record import COLUMNS, DecisionRecord, from_row, to_row, utc_now
from service.decisions.writer import GroupCommitWriter, Sink
from service.errors import DataError, NotFoundError, UpshotError

__all__ = ["JOINED", "DecisionLog", "OutcomeKinds", "StoreCounts", "window_clauses"]

OutcomeKinds = Callable[[str, str], str | None]
"""(model name, version) -> ``"binary"``, ``"continuous"`` or None when unknown."""

JOINED = (*COLUMNS, "outcome", "observed_at")
"""Columns :meth:`DecisionLog.iter_joined` can return: a decision's, and its outcome's."""

# JSON value types as SQLite's json_each and PostgreSQL's jsonb_typeof name them.
_JSON_TYPES = {
    "integer": "number", "real": "number", "number": "number", "true": "boolean",
    "false": "boolean", "boolean": "boolean", "text": "string", "string": "string",
    "null": "null",
}  # fmt: skip
# Bound parameters per statement stay under SQLite's historical limit of 999.
_CHUNK = 500
_PROBE_TIMEOUT_S = 5.0


class Tx(Protocol):
    """One open transaction (or read snapshot) of a store, with ``?`` placeholders."""

    def rows(self, sql: str, params: Sequence[Any] = ()) -> list[tuple[Any, ...]]: ...

    def run(self, sql: str, params: Sequence[Any] = ()) -> int: ...

    def many(self, sql: str, params: Sequence[Sequence[Any]]) -> None: ...


@dataclass(frozen=True)
class StoreCounts:
    """Rows in the store (for metrics and checks)."""

    decisions: int
    outcomes: int
    corrections: int


class DecisionLog(ABC):
    """Every decision upshot returns, committed before the caller sees it.

    One writer thread per open log batches concurrent appends into one transaction
    (group commit). Appends are idempotent on ``decision_id`` (the first record is kept,
    also across processes) and all or nothing per call, and return only after their
    transaction has committed. Open with :meth:`open`; close with :meth:`close` or a
    ``with``.
    """

    engine: str = ""

    def __init__(self, where: str, *, group_limit: int) -> None:
        if group_limit < 1:
            raise DataError(f"group_limit={group_limit!r} must be at least 1.")
        self.where = where
        self._group_limit = group_limit
        self._writer: GroupCommitWriter | None = None
        self._writer_lock = threading.Lock()
        self._closed = False

    @staticmethod
    def open(
        location: str | PathLike[str], *, group_limit: int = 1000, create: bool = True
    ) -> DecisionLog:
        """Open the log at a file path, ``sqlite:///<path>`` or ``postgresql://...``.

        Pending schema migrations are applied (see ``upshot log migrate``).
        ``group_limit`` caps the append calls per transaction; 1 gives one transaction
        per call, which is only useful to measure what grouping saves. With
        ``create=False`` a SQLite file that does not exist is a :class:`NotFoundError`.
        """
        from service.decisions.location import parse_location

        where = parse_location(location)
        if where.engine == "postgresql":
            from service.decisions.postgres import PostgresLog

            return PostgresLog(where.target, group_limit=group_limit, **where.options)
        from service.decisions.sqlite import SqliteLog

        return SqliteLog(where.target, group_limit=group_limit, create=create)

    # -- writing decisions ------------------------------------------------------------

    @property
    def commits(self) -> int:
        """Transactions committed so far that wrote decisions."""
        return self._writer.commits if self._writer is not None else 0

    @property
    def records_written(self) -> int:
        """Records inserted so far by this process (duplicates by id not counted)."""
        return self._writer.records_written if self._writer is not None else 0

    async def append(self, records: Sequence[DecisionRecord]) -> None:
        """Log records; return only once they are committed (durable).

        Invalid records raise :class:`DataError` before anything is queued; a batch the
        database rejects is rolled back as a whole. Concurrent callers share a commit.
        """
        future = self._submit([to_row(record) for record in records])
        if future is not None:
            await asyncio.wrap_future(future)

    def submit_rows(
        self, rows: Sequence[tuple[Any, ...]]
    ) -> concurrent.futures.Future[int] | None:
        """Queue rows already checked by ``to_row`` or ``engine_row`` for the next group
        commit; the future resolves once they are committed (None: nothing to log)."""
        return self._submit(list(rows))

    def submit_columns(
        self, batches: Sequence[DecisionColumns]
    ) -> concurrent.futures.Future[int] | None:
        """:meth:`submit_rows` for decisions in column form; raise :class:`DataError`
        (nothing queued) when a batch is invalid."""
        return self._submit(_column_rows(batches))

    def append_sync(self, records: Sequence[DecisionRecord]) -> None:
        """:meth:`append` for synchronous code (CLI, tests); blocks until committed."""
        future = self._submit([to_row(record) for record in records])
        if future is not None:
            future.result()

    async def append_columns(self, batches: Sequence[DecisionColumns]) -> None:
        """:meth:`append` for decisions in column form (the batch path); all or nothing."""
        future = self.submit_columns(batches)
        if future is not None:
            await asyncio.wrap_future(future)

    def append_columns_sync(self, batches: Sequence[DecisionColumns]) -> None:
        """:meth:`append_columns` for synchronous code; blocks until committed."""
        future = self.submit_columns(batches)
        if future is not None:
            future.result()

    def writable(self) -> bool:
        """True when the writer runs and can take the database's write lock now."""
        if self._closed:
            return False
        try:
            self._writer_thread().submit(None).result(timeout=_PROBE_TIMEOUT_S)
        except Exception:
            return False
        return True

    def _submit(self, rows: list[tuple[Any, ...]]) -> concurrent.futures.Future[int] | None:
        return self._writer_thread().submit(rows) if rows else None

    def _writer_thread(self) -> GroupCommitWriter:
        # Started on first use, so a log opened only to read costs no thread.
        with self._writer_lock:
            if self._closed:
                raise UpshotError(f"Decision log {self.where!r} is closed; reopen it.")
            if self._writer is None:
                self._writer = GroupCommitWriter(
                    self.where, self._open_sink, group_limit=self._group_limit
                )
                self._writer.start()
            return self._writer

    # -- reading decisions ------------------------------------------------------------

    def get(self, decision_id: str) -> DecisionRecord | None:
        """The record with this id, or None."""
        with self._read() as tx:
            found = tx.rows(f"{_select(COLUMNS)} WHERE decision_id = ?", (decision_id,))
        return from_row(found[0]) if found else None

    def iter_decisions(
        self,
        campaign: str,
        since: datetime | str | None = None,
        until: datetime | str | None = None,
    ) -> Iterator[DecisionRecord]:
        """Records of a campaign with ``since <= created_at < until``, oldest first."""
        for chunk in self.iter_joined(campaign, COLUMNS, since=since, until=until):
            yield from (from_row(row) for row in chunk)

    def iter_joined(
        self,
        campaign: str,
        columns: Sequence[str],
        *,
        since: datetime | str | None = None,
        until: datetime | str | None = None,
        last: int | None = None,
        with_outcome: bool = False,
        chunk: int = 5000,
    ) -> Iterator[list[tuple[Any, ...]]]:
        """Chunks of rows (``columns`` of :data:`JOINED`) of a campaign's decisions with
        ``since <= created_at < until``, oldest first, each with its outcome (NULL when
        none). ``last`` keeps the most recent ``last`` of the window; ``with_outcome``
        only the decisions that have one. Streams: memory is bounded by ``chunk``."""
        unknown = [c for c in columns if c not in JOINED]
        if unknown:
            raise DataError(f"Unknown column(s) {unknown}; choose from {list(JOINED)}.")
        picked = ", ".join(
            f"o.{c}" if c in ("outcome", "observed_at") else f"d.{c}" for c in columns
        )
        clauses, params = window_clauses(campaign, utc_text(since), utc_text(until))
        if with_outcome:
            clauses.append("o.decision_id IS NOT NULL")
        where = " AND ".join(clauses)
        join = "FROM decisions d LEFT JOIN outcomes o ON o.decision_id = d.decision_id"
        if last is None:
            sql = f"SELECT {picked} {join} WHERE {where} ORDER BY d.created_at, d.decision_id"
        else:
            # The newest `last` by the (campaign, created_at) index, then oldest first.
            inner = (
                f"SELECT d.decision_id AS id {join} WHERE {where} "
                f"ORDER BY d.created_at DESC, d.decision_id DESC LIMIT {int(last)}"
            )
            sql = (
                f"SELECT {picked} {join} WHERE d.decision_id IN ({inner}) "
                "ORDER BY d.created_at, d.decision_id"
            )
        return self._stream(sql, params, chunk)

    def feature_types(
        self,
        campaign: str,
        *,
        since: datetime | str | None = None,
        until: datetime | str | None = None,
        with_outcome: bool = False,
    ) -> dict[str, set[str]]:
        """Every feature name logged in the window, with the JSON types its values take
        (``number``, ``boolean``, ``string``, ``null``, ``other``); computed in the database."""
        start, end = utc_text(since), utc_text(until)
        types: dict[str, set[str]] = {}
        for name, kind in self._feature_types(campaign, start, end, with_outcome):
            types.setdefault(name, set()).add(_JSON_TYPES.get(kind, "other"))
        return dict(sorted(types.items()))

    def feature_names(
        self,
        campaign: str,
        *,
        since: datetime | str | None = None,
        until: datetime | str | None = None,
        with_outcome: bool = False,
    ) -> list[str]:
        """Every feature name logged in the window, sorted (computed in the database)."""
        return list(
            self.feature_types(campaign, since=since, until=until, with_outcome=with_outcome)
        )

    def window_counts(
        self,
        campaign: str,
        *,
        since: datetime | str | None = None,
        until: datetime | str | None = None,
    ) -> tuple[int, int]:
        """Decisions of a campaign in the window, and how many have an outcome."""
        clauses, params = window_clauses(campaign, utc_text(since), utc_text(until))
        with self._read() as tx:
            total, done = tx.rows(
                "SELECT COUNT(*), COUNT(o.decision_id) FROM decisions d "
                "LEFT JOIN outcomes o ON o.decision_id = d.decision_id "
                f"WHERE {' AND '.join(clauses)}",
                params,
            )[0]
        return int(total), int(done)

    def counts(self) -> StoreCounts:
        """How many decisions, outcomes and corrections the store holds."""
        with self._read() as tx:
            (n_d,), (n_o,), (n_c,) = (
                tx.rows(f"SELECT COUNT(*) FROM {table}")[0]
                for table in ("decisions", "outcomes", "outcome_corrections")
            )
        return StoreCounts(int(n_d), int(n_o), int(n_c))

    # -- outcomes ---------------------------------------------------------------------

    def record_outcomes(
        self, outcomes: Sequence[Outcome], kinds: OutcomeKinds | None = None
    ) -> OutcomeReceipt:
        """Store outcomes in one transaction: all of them, or (on any problem) none.

        ``kinds`` gives the outcome type of the model behind each decision; a binary
        model's decisions accept only 0 and 1.

        Raises
        ------
        OutcomeConflict
            An outcome differs from the one stored for its decision, or the request
            gives two different outcomes for one decision. Nothing is written.
        DataError
            An outcome is impossible for its decision's outcome type. Nothing is written.
        """
        fresh, unchanged = dedupe_outcomes(outcomes)
        ids = list(fresh)
        with self._write() as tx:
            stored = _stored(tx, ids)
            conflicts = [
                {"decision_id": i, "stored": stored[i].to_dict(), "sent": fresh[i].to_dict()}
                for i in ids
                if i in stored and not fresh[i].agrees_with(stored[i])
            ]
            if conflicts:
                raise OutcomeConflict(
                    f"{len(conflicts)} outcome(s) differ from the ones already recorded "
                    f"(first: decision {conflicts[0]['decision_id']!r}); an outcome, once "
                    "recorded, is only changed by an explicit correction (`upshot outcomes "
                    "correct` or POST /v1/admin/outcomes/{decision_id}/correction), so "
                    "nothing of this request was stored.",
                    conflicts,
                )
            models = _models(tx, [i for i in ids if i not in stored])
            new = [fresh[i] for i in ids if i in models]
            for o in new:
                check_outcome_kind(o, _kind(kinds, models[o.decision_id]))
            received = utc_now()
            tx.many(
                "INSERT INTO outcomes (decision_id, outcome, observed_at, received_at) "
                "VALUES (?, ?, ?, ?)",
                [(o.decision_id, o.outcome, o.observed_at, received) for o in new],
            )
        return OutcomeReceipt(
            recorded=[o.decision_id for o in new],
            unchanged=unchanged + [i for i in ids if i in stored],
            unknown=[i for i in ids if i not in stored and i not in models],
        )

    def outcome(self, decision_id: str) -> Outcome | None:
        """The stored (current) outcome of a decision, or None."""
        with self._read() as tx:
            return _stored(tx, [decision_id]).get(decision_id)

    def correct_outcome(
        self,
        correction: Outcome,
        *,
        actor: str,
        reason: str,
        kinds: OutcomeKinds | None = None,
    ) -> Correction:
        """Replace a recorded outcome, keeping the old value with who, when and why.

        Raises :class:`NotFoundError` when the decision has no outcome yet (record it
        instead) and :class:`DataError` when the value is impossible for its type or
        ``actor``/``reason`` is empty.
        """
        for name, text in (("actor", actor), ("reason", reason)):
            if not isinstance(text, str) or not text.strip():
                raise DataError(f"A correction needs a non-empty {name}; say who and why.")
        d_id = correction.decision_id
        with self._write() as tx:
            before = _stored(tx, [d_id]).get(d_id)
            if before is None:
                raise NotFoundError(
                    f"Decision {d_id!r} has no recorded outcome to correct; record it "
                    "with POST /v1/outcomes or `upshot outcomes import`."
                )
            check_outcome_kind(correction, _kind(kinds, _models(tx, [d_id])[d_id]))
            done = Correction(
                decision_id=d_id,
                previous=before,
                outcome=correction,
                actor=actor.strip(),
                reason=reason.strip(),
                corrected_at=utc_now(),
            )
            tx.run(
                "INSERT INTO outcome_corrections (decision_id, previous_outcome, "
                "previous_observed_at, outcome, observed_at, actor, reason, corrected_at) "
                "VALUES (?, ?, ?, ?, ?, ?, ?, ?)",
                (d_id, before.outcome, before.observed_at, correction.outcome,
                 correction.observed_at, done.actor, done.reason, done.corrected_at),
            )  # fmt: skip
            tx.run(
                "UPDATE outcomes SET outcome = ?, observed_at = ?, received_at = ? "
                "WHERE decision_id = ?",
                (correction.outcome, correction.observed_at, done.corrected_at, d_id),
            )
        return done

    def corrections(self, decision_id: str) -> list[Correction]:
        """Every correction of a decision's outcome, oldest first."""
        with self._read() as tx:
            rows = tx.rows(
                "SELECT previous_outcome, previous_observed_at, outcome, observed_at, actor, "
                "reason, corrected_at FROM outcome_corrections WHERE decision_id = ? "
                "ORDER BY correction_id",
                (decision_id,),
            )
        return [
            Correction(
                decision_id=decision_id,
                previous=Outcome(decision_id, float(p), p_at),
                outcome=Outcome(decision_id, float(y), y_at),
                actor=actor,
                reason=reason,
                corrected_at=at,
            )
            for p, p_at, y, y_at, actor, reason, at in rows
        ]

    # -- lifecycle --------------------------------------------------------------------

    def close(self) -> None:
        """Commit what is queued, stop the writer and close every connection."""
        with self._writer_lock:
            if self._closed:
                return
            self._closed = True
            writer = self._writer
        if writer is not None:
            writer.stop()
        self._close_connections()

    def __enter__(self) -> DecisionLog:
        return self

    def __exit__(
        self,
        exc_type: type[BaseException] | None,
        exc: BaseException | None,
        tb: TracebackType | None,
    ) -> None:
        self.close()

    def _check_open(self) -> None:
        if self._closed:
            raise UpshotError(f"Decision log {self.where!r} is closed; reopen it to read.")

    # -- what an engine provides ------------------------------------------------------

    @abstractmethod
    def schema_version(self) -> int:
        """The schema version the database is at."""

    @abstractmethod
    def _open_sink(self) -> Sink:
        """A new write connection for the writer thread."""

    @abstractmethod
    def _read(self) -> AbstractContextManager[Tx]:
        """A read-only snapshot."""

    @abstractmethod
    def _write(self) -> AbstractContextManager[Tx]:
        """A transaction holding the write lock; commits on success, rolls back on error."""

    @abstractmethod
    def _stream(
        self, sql: str, params: Sequence[Any], chunk: int
    ) -> Iterator[list[tuple[Any, ...]]]:
        """Rows of a query in chunks, without holding them all."""

    @abstractmethod
    def _feature_types(
        self, campaign: str, since: str | None, until: str | None, with_outcome: bool
    ) -> Iterable[tuple[str, str]]:
        """Distinct (feature name, JSON type as the engine names it) of a window."""

    @abstractmethod
    def _close_connections(self) -> None:
        """Close readers and pools."""


def _column_rows(batches: Sequence[DecisionColumns]) -> list[tuple[Any, ...]]:
    checked = [batch.checked_rows for batch in batches]  # every batch checked first
    return [row for rows in checked for row in rows]


def _select(columns: Sequence[str]) -> str:
    return f"SELECT {', '.join(columns)} FROM decisions"


def _chunks(ids: Sequence[str]) -> Iterator[Sequence[str]]:
    for start in range(0, len(ids), _CHUNK):
        yield ids[start : start + _CHUNK]


def _stored(tx: Tx, ids: Sequence[str]) -> dict[str, Outcome]:
    found: dict[str, Outcome] = {}
    for part in _chunks(ids):
        marks = ", ".join("?" for _ in part)
        rows = tx.rows(
            "SELECT decision_id, outcome, observed_at FROM outcomes "
            f"WHERE decision_id IN ({marks})",
            list(part),
        )
        found.update({row[0]: Outcome(row[0], float(row[1]), row[2]) for row in rows})
    return found


def _models(tx: Tx, ids: Sequence[str]) -> dict[str, tuple[str, str]]:
    found: dict[str, tuple[str, str]] = {}
    for part in _chunks(ids):
        marks = ", ".join("?" for _ in part)
        rows = tx.rows(
            "SELECT decision_id, model_name, model_version FROM decisions "
            f"WHERE decision_id IN ({marks})",
            list(part),
        )
        found.update({row[0]: (row[1], row[2]) for row in rows})
    return found


def _kind(kinds: OutcomeKinds | None, model: tuple[str, str]) -> str | None:
    return kinds(*model) if kinds is not None else None


def utc_text(moment: datetime | str | None) -> str | None:
    """A time as stored in the log (ISO 8601, UTC, microseconds); a time without an
    offset is taken as UTC."""
    if moment is None:
        return None
    if isinstance(moment, str):
        try:
            moment = datetime.fromisoformat(moment.strip().replace("Z", "+00:00"))
        except ValueError:
            raise DataError(
                f"Time {moment!r} is not ISO 8601; write e.g. 2026-03-01 or "
                "2026-03-01T09:30:00+00:00."
            ) from None
    if moment.tzinfo is None:
        moment = moment.replace(tzinfo=UTC)
    return moment.astimezone(UTC).isoformat(timespec="microseconds")


def window_clauses(
    campaign: str, since: str | None, until: str | None
) -> tuple[list[str], list[str]]:
    """WHERE clauses (table alias ``d``) and parameters for a campaign's decisions with
    ``since <= created_at < until`` (either bound optional, as stored UTC text)."""
    clauses, params = ["d.campaign = ?"], [campaign]
    for bound, op in ((since, ">="), (until, "<")):
        if bound is not None:
            clauses.append(f"d.created_at {op} ?")
            params.append(bound)
    return clauses, params
