"""Commit the decisions of concurrent requests to the log together.

Every decision must be durable before it is returned, and each commit of the log costs
a transaction and an fsync whatever its size. The log's writer already groups appends
that queue up while it commits; the :class:`Committer` also groups the requests that
reach their commit in the same turn of the event loop into one append, so a busy
service makes fewer, larger transactions. No request waits for a timer: the group is
handed to the log on the next turn of the loop. Single decisions come as records,
batches and ranked lists as :class:`~service.decisions.DecisionColumns` (one per chunk).
"""

from __future__ import annotations

import asyncio
from collections.abc import Awaitable, Callable
from concurrent.futures import Future
from typing import Any, Generic, TypeVar

from service.decisions import DecisionColumns, DecisionLog, DecisionRecord
from service.decisions.record import engine_row
from service.errors import DataError, DecisionLogError, UpshotError
from service.scoring.collector import paused

__all__ = ["Committer"]

# Above this many decisions the log's row checks run in a worker thread, so that a large
# batch does not hold up the event loop (and single-customer requests) meanwhile.
_THREAD_RECORDS = 2000

T = TypeVar("T")


class _Group(Generic[T]):
    """Items handed in during one turn of the event loop, handed to the log together
    at the end of that turn (smaller groups handed in sooner measured no faster)."""

    def __init__(self, submit: Callable[[list[T]], Future[int] | None]) -> None:
        self._submit = submit
        self._pending: list[tuple[list[T], asyncio.Future[None]]] = []
        self._tasks: set[asyncio.Task[None]] = set()

    async def add(self, items: list[T]) -> None:
        loop = asyncio.get_running_loop()
        waiter: asyncio.Future[None] = loop.create_future()
        if not self._pending:
            loop.call_soon(self._flush)
        self._pending.append((items, waiter))
        await waiter

    def _flush(self) -> None:
        group, self._pending = self._pending, []
        if group:
            self._hand_in(group)

    def _hand_in(self, group: list[tuple[list[T], asyncio.Future[None]]]) -> None:
        try:
            future = self._submit([item for items, _ in group for item in items])
        except DataError as err:
            if len(group) == 1:
                _settle(group[0][1], err)
                return
            # Some request's decisions are invalid: hand in each request on its own, so
            # only that request fails.
            for one in group:
                self._hand_in([one])
            return
        except UpshotError as err:
            for _, waiter in group:
                _settle(waiter, DecisionLogError(str(err)))
            return
        task = asyncio.ensure_future(self._settle_when_done(future, group))
        self._tasks.add(task)  # keep a reference until it is done
        task.add_done_callback(self._tasks.discard)

    @staticmethod
    async def _settle_when_done(
        future: Future[int] | None, group: list[tuple[list[T], asyncio.Future[None]]]
    ) -> None:
        error: BaseException | None = None
        try:
            if future is not None:
                done: asyncio.Future[int] = asyncio.wrap_future(future)
                await _guard(done)
        except UpshotError as err:
            error = err
        for _, waiter in group:
            _settle(waiter, error)


class Committer:
    """Durable commits of decisions, grouped across concurrent requests."""

    def __init__(self, log: DecisionLog) -> None:
        self.log = log
        self._records: _Group[tuple[Any, ...]] = _Group(log.submit_rows)
        self._columns: _Group[DecisionColumns] = _Group(log.submit_columns)

    async def commit(self, records: list[DecisionRecord]) -> None:
        """Return once ``records`` are committed.

        Raises
        ------
        DataError
            A record is invalid (nothing of this call was logged).
        DecisionLogError
            The log could not commit (nothing of this call was logged).
        """
        if not records:
            return
        if len(records) > _THREAD_RECORDS:
            await _guard(asyncio.to_thread(paused, lambda: self.log.append_sync(records)))
            return
        # Checked here, so an invalid record fails its own request before any grouping.
        await self._records.add([engine_row(record) for record in records])

    async def commit_columns(self, columns: DecisionColumns) -> None:
        """Return once the decisions of ``columns`` are committed (all or nothing).

        Raises as :meth:`commit` does.
        """
        if not len(columns):
            return
        if len(columns) > _THREAD_RECORDS:
            append = self.log.append_columns_sync
            await _guard(asyncio.to_thread(paused, lambda: append([columns])))
            return
        await self._columns.add([columns])


async def _guard(append: Awaitable[object]) -> None:
    """Await an append, turning a database failure into :class:`DecisionLogError`."""
    try:
        await append
    except (DataError, DecisionLogError):
        raise
    except UpshotError as err:
        raise DecisionLogError(str(err)) from err


def _settle(waiter: asyncio.Future[None], error: BaseException | None) -> None:
    if waiter.done():  # the request was cancelled (client went away)
        return
    if error is None:
        waiter.set_result(None)
    else:
        waiter.set_exception(error)
