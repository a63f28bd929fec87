"""Run the parts of an audience on a Dask cluster (``upshot score --dask ADDRESS``).

The client loads and verifies the campaign's model once and broadcasts it (with the
ranked list's global cut, for pass 2 of ``--rank``) to every worker; each worker reads
its own parts of the input (so the input path must be readable from the workers, e.g. a
shared filesystem) and runs the same per-part functions as a single process
(:mod:`service.batch.run`). The client takes the results back in input order, commits
every decision to the decision log itself and writes the output: one writer for the
log, whatever the backend, and nothing a worker does is visible before the client has
logged it. At most ``2 x workers`` parts are in flight, so the client holds a bounded
number of results. A CSV input is one part (it is streamed); cut the audience into
Parquet parts or row groups for parallel work.

``dask.distributed`` is imported here only, so the service does not need it.
"""

from __future__ import annotations

import importlib
import logging
from collections import deque
from collections.abc import Callable, Iterator, Sequence
from contextlib import contextmanager
from typing import Any, TypeVar

from service.batch.files import Part
from service.batch.run import Audience, Runner
from service.errors import ConfigError
from service.scoring import BoundCampaign, Ranking

__all__ = ["DaskRunner", "dask_runner"]

T = TypeVar("T")


@contextmanager
def dask_runner(
    address: str, bound: BoundCampaign, audience: Audience, *, workers: int = 2
) -> Iterator[Runner]:
    """A runner on the Dask scheduler at ``address``, or ``"local"``: a LocalCluster of
    ``workers`` single-threaded processes, closed on exit."""
    try:
        distributed: Any = importlib.import_module("distributed")
    except ImportError as err:
        raise ConfigError(
            "--dask needs dask.distributed; install it with: pip install 'upshot[dask]'."
        ) from err
    # Worker start and stop are routine here; keep the command's output to warnings.
    logging.getLogger("distributed").setLevel(logging.WARNING)
    cluster = None
    if address == "local":
        if workers < 1:
            raise ConfigError(f"--workers {workers} must be at least 1.")
        cluster = distributed.LocalCluster(
            n_workers=workers, threads_per_worker=1, processes=True, dashboard_address=None
        )
        client = distributed.Client(cluster)
    else:
        try:
            client = distributed.Client(address, timeout="30s")
        except OSError as err:
            raise ConfigError(
                f"No Dask scheduler answers at {address!r} ({err}); start one (dask "
                "scheduler) or use --dask local."
            ) from err
    try:
        n_workers = max(1, len(client.scheduler_info()["workers"]))
        shared = client.scatter(bound, broadcast=True, hash=False)
        yield DaskRunner(client, shared, audience, window=2 * n_workers)
    finally:
        client.close()
        if cluster is not None:
            cluster.close()


class DaskRunner:
    """Parts as Dask tasks; results in part order, at most ``window`` in flight."""

    def __init__(self, client: Any, bound: Any, audience: Audience, *, window: int) -> None:
        self.client = client
        self.bound = bound
        self.audience = audience
        self.window = window

    def map(self, fn: Callable[..., T], parts: Sequence[Part], *args: Any) -> Iterator[T]:
        head = (self.bound, self.audience)
        return self._ordered(fn, [(*head, part) for part in parts], args)

    def keep(
        self, fn: Callable[..., Any], parts: Sequence[Part], advance: Callable[[int], None]
    ) -> list[Any]:
        held = []
        for part in parts:
            future = self.client.submit(fn, self.bound, self.audience, part, pure=False)
            rows = max(part.rows, 0)  # a CSV's length is unknown until it is read
            future.add_done_callback(lambda _, rows=rows: advance(rows))
            held.append(future)
        return held

    def over(self, fn: Callable[..., T], handles: Sequence[Any], *args: Any) -> Iterator[T]:
        return self._ordered(fn, [(handle,) for handle in handles], args)

    def _ordered(
        self, fn: Callable[..., T], heads: list[tuple[Any, ...]], args: tuple[Any, ...]
    ) -> Iterator[T]:
        # A ranked list's cut is large: send it to each worker once, not with each task.
        shared = [
            self.client.scatter(a, broadcast=True, hash=False) if isinstance(a, Ranking) else a
            for a in args
        ]
        pending: deque[Any] = deque()
        try:
            for head in heads:
                pending.append(self.client.submit(fn, *head, *shared, pure=False))
                if len(pending) >= self.window:
                    yield pending.popleft().result()
            while pending:
                yield pending.popleft().result()
        finally:
            for future in pending:
                future.cancel()
