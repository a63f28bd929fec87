"""The durable decision log: append (group commit), look up, iterate."""

from __future__ import annotations

import asyncio
import concurrent.futures
import sqlite3
import threading
from collections.abc import Iterator, Sequence
from datetime import UTC, datetime
from pathlib import Path
from types import TracebackType

from service.decisions.columns import DecisionColumns
from service.decisions.record import DecisionRecord, from_row, to_row
from service.decisions.schema import SELECT, connect, create_schema, sqlite_path
from service.decisions.writer import GroupCommitWriter
from service.errors import DataError, UpshotError

__all__ = ["DecisionLog"]

# How long writable() waits for the writer to take and release the write lock.
_PROBE_TIMEOUT_S = 5.0
_FETCH = 500


class DecisionLog:
    """Every decision upshot returns, committed before the caller sees it.

    One writer thread per open log batches concurrent appends into one transaction
    (group commit), in SQLite with WAL journaling and ``synchronous=FULL``. Appends are
    idempotent on ``decision_id`` (``ON CONFLICT DO NOTHING`` keeps the first record) and all
    or nothing per call. Open with :meth:`open`; close with :meth:`close` or a ``with``.
    """

    def __init__(self, path: Path, writer: GroupCommitWriter) -> None:
        self.path = path
        self._writer = writer
        self._local = threading.local()
        self._readers: list[sqlite3.Connection] = []
        self._readers_lock = threading.Lock()
        self._closed = False

    @classmethod
    def open(cls, url_or_path: str | Path, *, group_limit: int = 1000) -> DecisionLog:
        """Open (creating if needed) the log at ``sqlite:///<path>`` or a file path.

        ``group_limit`` caps the append calls per transaction; 1 gives one transaction
        (and one fsync) per call, which is only useful to measure what grouping saves.
        """
        if group_limit < 1:
            raise DataError(f"group_limit={group_limit!r} must be at least 1.")
        path = sqlite_path(url_or_path)
        create_schema(path)
        writer = GroupCommitWriter(path, group_limit=group_limit)
        writer.start()
        return cls(path, writer)

    @property
    def commits(self) -> int:
        """Transactions committed so far that wrote decisions."""
        return self._writer.commits

    @property
    def records_written(self) -> int:
        """Records inserted so far (duplicates ignored by id are not counted)."""
        return self._writer.records_written

    async def append(self, records: Sequence[DecisionRecord]) -> None:
        """Log records; return only once they are committed (durable).

        Invalid records raise :class:`DataError` before anything is queued; a batch the
        database rejects is rolled back as a whole. Concurrent callers share a commit.
        """
        future = self._submit(records)
        if future is not None:
            await asyncio.wrap_future(future)

    def append_sync(self, records: Sequence[DecisionRecord]) -> None:
        """:meth:`append` for synchronous code (CLI, tests); blocks until committed."""
        future = self._submit(records)
        if future is not None:
            future.result()

    async def append_columns(self, batches: Sequence[DecisionColumns]) -> None:
        """:meth:`append` for decisions in column form (the batch path); all or nothing."""
        future = self._submit_columns(batches)
        if future is not None:
            await asyncio.wrap_future(future)

    def append_columns_sync(self, batches: Sequence[DecisionColumns]) -> None:
        """:meth:`append_columns` for synchronous code; blocks until committed."""
        future = self._submit_columns(batches)
        if future is not None:
            future.result()

    def _submit(self, records: Sequence[DecisionRecord]) -> concurrent.futures.Future[int] | None:
        rows = [to_row(record) for record in records]
        return self._writer.submit(rows) if rows else None

    def _submit_columns(
        self, batches: Sequence[DecisionColumns]
    ) -> concurrent.futures.Future[int] | None:
        for batch in batches:
            batch.check()
        rows = [row for batch in batches for row in batch.rows()]
        return self._writer.submit(rows) if rows else None

    def get(self, decision_id: str) -> DecisionRecord | None:
        """The record with this id, or None."""
        row = self._reader().execute(f"{SELECT} WHERE decision_id = ?", (decision_id,)).fetchone()
        return from_row(row) if row is not None else None

    def iter_decisions(
        self,
        campaign: str,
        since: datetime | str | None = None,
        until: datetime | str | None = None,
    ) -> Iterator[DecisionRecord]:
        """Records of a campaign with ``since <= created_at < until``, oldest first."""
        clauses, params = ["campaign = ?"], [campaign]
        for bound, op in ((since, ">="), (until, "<")):
            if bound is not None:
                clauses.append(f"created_at {op} ?")
                params.append(_utc_text(bound))
        query = f"{SELECT} WHERE {' AND '.join(clauses)} ORDER BY created_at, decision_id"
        conn = connect(self.path, readonly=True)
        try:
            cursor = conn.execute(query, params)
            while rows := cursor.fetchmany(_FETCH):
                yield from (from_row(row) for row in rows)
        finally:
            conn.close()

    def writable(self) -> bool:
        """True when the writer runs and can take the database's write lock now."""
        if self._closed:
            return False
        try:
            self._writer.submit(None).result(timeout=_PROBE_TIMEOUT_S)
        except Exception:
            return False
        return True

    def close(self) -> None:
        """Commit what is queued, stop the writer and close every connection."""
        if self._closed:
            return
        self._closed = True
        self._writer.stop()
        with self._readers_lock:
            for conn in self._readers:
                conn.close()
            self._readers.clear()

    def __enter__(self) -> DecisionLog:
        return self

    def __exit__(
        self,
        exc_type: type[BaseException] | None,
        exc: BaseException | None,
        tb: TracebackType | None,
    ) -> None:
        self.close()

    def _reader(self) -> sqlite3.Connection:
        if self._closed:
            raise UpshotError(f"Decision log {str(self.path)!r} is closed; reopen it to read.")
        conn: sqlite3.Connection | None = getattr(self._local, "conn", None)
        if conn is None:
            conn = connect(self.path, readonly=True)
            self._local.conn = conn
            with self._readers_lock:
                self._readers.append(conn)
        return conn


def _utc_text(moment: datetime | str) -> str:
    if isinstance(moment, str):
        try:
            moment = datetime.fromisoformat(moment)
        except ValueError as err:
            raise DataError(
                f"Time {moment!r} is not ISO 8601; use e.g. 2026-01-31T00:00Z."
            ) from err
    if moment.tzinfo is None:
        raise DataError(f"Time {moment.isoformat()!r} has no UTC offset; add one (e.g. +00:00).")
    return moment.astimezone(UTC).isoformat(timespec="microseconds")
