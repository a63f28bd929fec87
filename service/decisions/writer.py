"""The log's single writer thread: group commit of concurrent appends, for any engine."""

from __future__ import annotations

import logging
import queue
import threading
from collections.abc import Callable
from concurrent.futures import Future
from dataclasses import dataclass, field
from typing import Any, Protocol

from service.errors import UpshotError

__all__ = ["GroupCommitWriter", "Rejected", "Sink"]

logger = logging.getLogger(__name__)

Row = tuple[Any, ...]


class Rejected(Exception):
    """The database refused one append call's rows; its savepoint was rolled back."""


class Sink(Protocol):
    """One write connection of an engine, driven by the writer thread only."""

    def begin(self) -> None:
        """Start a transaction that holds the write lock (reconnecting if needed)."""

    def insert(self, rows: list[Row]) -> int:
        """Insert rows inside a savepoint, skipping ids already logged; the count
        inserted. Raise :class:`Rejected` (savepoint rolled back) if the rows break a
        constraint; any other error means the transaction is lost."""

    def commit(self) -> None:
        """Commit; return only when the transaction is durable."""

    def rollback(self) -> None:
        """Roll back the open transaction, if any, never raising."""

    def close(self) -> None:
        """Close the connection."""


@dataclass(eq=False)
class _Job:
    rows: list[Row] | None  # None: a probe that only takes the write lock
    future: Future[int] = field(default_factory=Future)


class GroupCommitWriter(threading.Thread):
    """Owns the only write connection; commits whatever has queued up in one transaction.

    While one COMMIT (and its fsync) runs, new appends queue; the next transaction takes
    all of them, up to ``group_limit`` append calls. Each call runs inside its own
    savepoint, so one failing call is rolled back alone, and its future is resolved only
    after the transaction holding it has committed.

    References
    ----------
    DeWitt, Katz, Olken, Shapiro, Stonebraker & Wood (1984), "Implementation techniques
    for main memory database systems", SIGMOD '84 (group commit; citation from memory).
    """

    def __init__(self, where: str, open_sink: Callable[[], Sink], *, group_limit: int) -> None:
        super().__init__(name=f"decision-log-writer:{where}", daemon=True)
        self.where = where
        self.group_limit = group_limit
        self.commits = 0
        self.records_written = 0
        self._open_sink = open_sink
        self._queue: queue.SimpleQueue[_Job | None] = queue.SimpleQueue()
        self._lock = threading.Lock()
        self._stopping = False
        self._failure: BaseException | None = None

    def submit(self, rows: list[Row] | None) -> Future[int]:
        """Queue rows (or a probe, ``None``); the future gives the count inserted."""
        with self._lock:
            if self._stopping or self._failure is not None or not self.is_alive():
                raise UpshotError(
                    f"Decision log {self.where!r} is closed or its writer failed "
                    f"({self._failure!r}); reopen the log."
                )
            job = _Job(rows)
            self._queue.put(job)
        return job.future

    def stop(self) -> None:
        """Commit what is queued, then end the thread."""
        with self._lock:
            if self._stopping:
                return
            self._stopping = True
            self._queue.put(None)
        if self.is_alive():
            self.join()

    def run(self) -> None:
        try:
            sink = self._open_sink()
        except Exception as err:
            self._give_up(err)
            return
        try:
            while True:
                group, stop = self._next_group()
                if group:
                    self._commit(sink, group)
                if stop:
                    return
        except BaseException as err:  # never leave a caller waiting on a dead thread
            logger.exception("decision log writer stopped")
            self._give_up(err)
            raise
        finally:
            sink.close()

    def _next_group(self) -> tuple[list[_Job], bool]:
        first = self._queue.get()
        if first is None:
            return [], True
        group = [first]
        while len(group) < self.group_limit:
            try:
                job = self._queue.get_nowait()
            except queue.Empty:
                break
            if job is None:
                return group, True
            group.append(job)
        return group, False

    def _commit(self, sink: Sink, group: list[_Job]) -> None:
        live = [job for job in group if job.future.set_running_or_notify_cancel()]
        if not live:
            return
        outcome: dict[_Job, int | BaseException] = {}
        try:
            sink.begin()
            for job in live:
                outcome[job] = self._apply(sink, job)
            sink.commit()
        except Exception as err:
            logger.error("decision log commit failed: %s", err)
            sink.rollback()
            error = UpshotError(
                f"Decision log {self.where!r} could not commit ({err}); nothing of this "
                "request was logged. Check the database (disk space, permissions, "
                "connection), then retry."
            )
            for job in live:
                job.future.set_exception(error)
            return
        if any(job.rows for job in live):
            self.commits += 1
        for job, result in outcome.items():
            if isinstance(result, BaseException):
                job.future.set_exception(result)
            else:
                self.records_written += result
                job.future.set_result(result)

    @staticmethod
    def _apply(sink: Sink, job: _Job) -> int | BaseException:
        if not job.rows:
            return 0
        try:
            return sink.insert(job.rows)
        except Rejected as err:
            return UpshotError(
                f"Decision log rejected a batch of {len(job.rows)} records ({err}); none of "
                "them was logged. Fix the records and retry."
            )

    def _give_up(self, err: BaseException) -> None:
        with self._lock:
            self._failure = err
        error = UpshotError(f"Decision log {self.where!r} writer failed ({err}).")
        while True:
            try:
                job = self._queue.get_nowait()
            except queue.Empty:
                return
            if job is not None and job.future.set_running_or_notify_cancel():
                job.future.set_exception(error)
