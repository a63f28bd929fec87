"""Batches and ranked lists for the service: chunk by chunk, each chunk logged in columns.

The whole request is validated first (features, values, duplicate candidates), so bad
input logs nothing. Then each chunk of :data:`~service.scoring.engine.CHUNK_ROWS`
customers is decided, committed to the log as one
:class:`~service.decisions.DecisionColumns` and reduced to what the response needs, so
memory stays bounded whatever the batch size. Nothing is returned before every chunk
is committed. Should the log fail part-way, the chunks already committed stay logged;
the caller gets the error, and a retry of the same request gets the same decision ids,
so every decision ends up logged exactly once.
"""

from __future__ import annotations

import asyncio
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import TypeVar

import numpy as np
import numpy.typing as npt

from service.decisions import DecisionColumns
from service.scoring import engine
from service.scoring.catalog import BoundCampaign
from service.scoring.committer import Committer
from service.scoring.engine import (
    Decided,
    Ranking,
    decide_chunk,
    emit_columns,
    rank_chunks,
    refuse_duplicates,
)
from service.scoring.features import FeatureTable

__all__ = ["RankedChunks", "rank_batch", "score_batch"]

T = TypeVar("T")
# Below this many customers, moving the work to a thread costs more than it frees.
_THREAD_ROWS = 2000


async def score_batch(
    committer: Committer,
    bound: BoundCampaign,
    ids: Sequence[str],
    table: FeatureTable,
    values: npt.NDArray[np.float64],
    view: Callable[[Decided, DecisionColumns], T],
    *,
    chunk_rows: int | None = None,
    on_commit: Callable[[DecisionColumns], None] | None = None,
) -> list[T]:
    """Decide, log and view every chunk (mode ``score``); one ``view`` result per chunk.

    ``chunk_rows`` defaults to :data:`~service.scoring.engine.CHUNK_ROWS`.
    """
    out: list[T] = []
    for start, stop in _spans(len(ids), chunk_rows):

        def work(start: int = start, stop: int = stop) -> tuple[Decided, DecisionColumns]:
            decided = decide_chunk(bound, ids[start:stop], table.slice(start, stop),
                                   values[start:stop])  # fmt: skip
            return decided, emit_columns(decided)

        decided, logged = await _run(work, stop - start)
        await committer.commit_columns(logged)
        if on_commit is not None:
            on_commit(logged)
        out.append(view(decided, logged))
    return out


@dataclass(frozen=True, eq=False)
class RankedChunks:
    """A logged ranked list: the global cut, each candidate's decision id, and the uplift
    of the arm the list names for it."""

    ranking: Ranking
    decision_ids: list[str]
    uplift: npt.NDArray[np.float64]


async def rank_batch(
    committer: Committer,
    bound: BoundCampaign,
    ids: Sequence[str],
    table: FeatureTable,
    values: npt.NDArray[np.float64],
    *,
    capacity: int | None,
    budget: float | None,
    chunk_rows: int | None = None,
    on_commit: Callable[[DecisionColumns], None] | None = None,
) -> RankedChunks:
    """Decide every chunk, cut the list globally, then log every chunk (mode ``rank``)."""
    refuse_duplicates(ids)
    spans = _spans(len(ids), chunk_rows)

    def decide_all() -> tuple[list[Decided], Ranking]:
        chunks = [decide_chunk(bound, ids[a:b], table.slice(a, b), values[a:b]) for a, b in spans]
        ranking = rank_chunks(bound, ids, [c.batch for c in chunks],
                              capacity=capacity, budget=budget)  # fmt: skip
        return chunks, ranking

    chunks, ranking = await _run(decide_all, len(ids))
    decision_ids: list[str] = []
    uplift = np.empty(len(ids))
    for chunk, (start, stop) in zip(chunks, spans, strict=True):

        def work(chunk: Decided = chunk, start: int = start) -> DecisionColumns:
            return emit_columns(chunk, ranking, start)

        logged = await _run(work, len(chunk))
        await committer.commit_columns(logged)
        if on_commit is not None:
            on_commit(logged)
        decision_ids.extend(logged.decision_id)
        arm = ranking.result.arm[start:stop]
        uplift[start:stop] = chunk.estimates.tau[np.arange(len(chunk)), np.maximum(arm - 1, 0)]
    return RankedChunks(ranking, decision_ids, uplift)


def _spans(n: int, size: int | None) -> list[tuple[int, int]]:
    """Chunk bounds; one empty chunk for an empty batch."""
    size = size or engine.CHUNK_ROWS
    return [(start, min(start + size, n)) for start in range(0, n, size)] or [(0, 0)]


async def _run(work: Callable[[], T], rows: int) -> T:
    return await asyncio.to_thread(work) if rows > _THREAD_ROWS else work()
