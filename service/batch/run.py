"""Score an audience file: the service's decision path, part by part, chunk by chunk.

Every chunk goes through the functions the API uses (:func:`~service.scoring.decide_chunk`,
:func:`~service.scoring.rank_chunks`, :func:`~service.scoring.emit_columns`), so the
decisions, ids and propensities equal the API's for the same customers by construction.

Two passes over the input, so that bad input logs nothing and memory stays bounded:

1. every part is read and validated (``--rank``: also decided, and the global cut is
   computed from every part's ids and the policy's per-row numbers);
2. every part is decided (``--rank``: the parts decided in pass 1 are kept, in this
   process or on the workers, so the model runs once per customer), its decisions are
   committed to the decision log, and only then written to the temporary output.

The output is renamed to its final name after the last part is committed. A ranked
list is written after pass 2, from the global cut: the listed candidates in rank order,
then the excluded ones in input order with their reason.

The parts are processed by a :class:`Runner`: :class:`InProcess` here, or the Dask
runner of :mod:`service.batch.cluster`; the log and the output are always written here,
by the caller's process.
"""

from __future__ import annotations

import dataclasses
import time
from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Protocol, TypeVar, cast

import numpy as np
import numpy.typing as npt
import pyarrow as pa

from service.batch.files import OutputFile, Part, chunk_columns, count_rows, iter_chunks
from service.batch.files import plan_parts as _plan_parts
from service.batch.tables import ranked_schema, ranked_tables, score_schema, score_table
from service.decisions import DecisionColumns
from service.policy import DecisionBatch
from service.scoring import (
    BoundCampaign,
    Decided,
    InvalidFeatures,
    Ranking,
    decide_chunk,
    emit_columns,
    rank_chunks,
    resolve_values,
)

__all__ = [
    "CHUNK_ROWS",
    "PART_ROWS",
    "Audience",
    "ColumnSink",
    "InProcess",
    "Runner",
    "Summary",
    "cut_inputs",
    "decide_part",
    "emit_decided",
    "emit_part",
    "score_file",
    "validate_part",
]

T = TypeVar("T")

CHUNK_ROWS = 10_000
"""Rows decided at once: the service's chunk size."""
PART_ROWS = 100_000
"""About this many rows per part (a Dask task; Parquet row groups are not split)."""


class ColumnSink(Protocol):
    """Where decisions go before the output is written: the decision log."""

    def append_columns_sync(self, batches: Sequence[DecisionColumns]) -> None: ...


@dataclass(frozen=True)
class Audience:
    """The input file, how its rows are cut, and the id column."""

    data: Path
    id_column: str = "customer_id"
    chunk_rows: int = CHUNK_ROWS
    part_rows: int = PART_ROWS

    def parts(self) -> list[Part]:
        return _plan_parts(self.data, self.part_rows)


@dataclass(frozen=True)
class Summary:
    """What a run did."""

    rows: int
    logged: int
    listed: int | None
    out: Path
    seconds: float


@dataclass(frozen=True)
class PartDecided:
    """A part decided in pass 1 of ``--rank``, kept (in this process or on a worker) for
    pass 2; the per-row reason lists, which a ranked list does not show, are dropped."""

    first_row: int
    chunks: list[Decided]


@dataclass(frozen=True)
class PartDecisions:
    """What the global cut needs of a part: its ids and the policy's arrays."""

    ids: list[str]
    batches: list[DecisionBatch]


@dataclass(frozen=True)
class PartEmitted:
    """What pass 2 gives for a part: logged columns, and output rows or rank fields."""

    logged: list[DecisionColumns]
    table: pa.Table | None  # score mode: the output rows
    uplift: npt.NDArray[np.float64]  # rank mode: uplift of the arm the list names

    @property
    def rows(self) -> int:
        return sum(len(c) for c in self.logged)


# -- what one part does (in this process or on a Dask worker) -------------------------------


def validate_part(bound: BoundCampaign, audience: Audience, part: Part) -> int:
    """Pass 1: read and validate a part (values included); return its row count."""
    rows = 0
    for ids, _features, values, start in _chunks(bound, audience, part):
        if values is not None:
            resolve_values(bound, values, len(ids), first_row=start)
        rows += len(ids)
    return rows


def emit_part(bound: BoundCampaign, audience: Audience, part: Part) -> PartEmitted:
    """Pass 2 of scoring: decide a part; give its log columns and its output rows."""
    return _emit(_decided(bound, audience, part), part.first_row, None)


def decide_part(bound: BoundCampaign, audience: Audience, part: Part) -> PartDecided:
    """Pass 1 of ``--rank``: decide a part and keep it."""
    chunks = [
        dataclasses.replace(d, batch=dataclasses.replace(d.batch, reasons=[]), input_reasons=[])
        for d in _decided(bound, audience, part)
    ]
    return PartDecided(part.first_row, chunks)


def cut_inputs(held: PartDecided) -> PartDecisions:
    """What the global cut needs of a decided part."""
    return PartDecisions([i for d in held.chunks for i in d.ids], [d.batch for d in held.chunks])


def emit_decided(held: PartDecided, ranking: Ranking) -> PartEmitted:
    """Pass 2 of ``--rank``: a kept part's log columns under the global cut."""
    return _emit(iter(held.chunks), held.first_row, ranking)


def _emit(chunks: Iterator[Decided], first_row: int, ranking: Ranking | None) -> PartEmitted:
    logged: list[DecisionColumns] = []
    tables: list[pa.Table] = []
    uplift: list[npt.NDArray[np.float64]] = []
    offset = first_row
    for decided in chunks:
        columns = emit_columns(decided, ranking, offset)
        logged.append(columns)
        if ranking is None:
            tables.append(score_table(decided, columns))
        else:
            arm = ranking.result.arm[offset : offset + len(decided)]
            rows = np.arange(len(decided))
            uplift.append(decided.estimates.tau[rows, np.maximum(arm - 1, 0)])
        offset += len(decided)
    table = pa.concat_tables(tables) if tables else None
    return PartEmitted(logged, table, np.concatenate(uplift) if uplift else np.empty(0))


def _chunks(
    bound: BoundCampaign, audience: Audience, part: Part
) -> Iterator[tuple[list[str], Any, list[Any] | None, int]]:
    """Validated ids, feature table and raw values of each chunk, and its first row."""
    start = part.first_row
    for table in iter_chunks(part, audience.chunk_rows, id_column=audience.id_column):
        ids, columns, values = chunk_columns(table, audience.id_column, start)
        try:
            features = bound.schema.table_from_columns(columns, len(ids))
        except InvalidFeatures as err:
            raise _shifted(err, start, audience.data) from None
        yield ids, features, values, start
        start += len(ids)


def _decided(bound: BoundCampaign, audience: Audience, part: Part) -> Iterator[Decided]:
    for ids, features, values, start in _chunks(bound, audience, part):
        yield decide_chunk(bound, ids, features, values, first_row=start)


# -- the run ---------------------------------------------------------------------------------


class Runner(Protocol):
    """Runs per-part work here or on a cluster; results come back in part order."""

    def map(self, fn: Callable[..., T], parts: Sequence[Part], *args: Any) -> Iterator[T]:
        """``fn(bound, audience, part, *args)`` for each part."""
        ...

    def keep(
        self, fn: Callable[..., Any], parts: Sequence[Part], advance: Callable[[int], None]
    ) -> list[Any]:
        """``fn(bound, audience, part)`` for each part, kept where it ran; handles.
        ``advance(rows)`` is called as each part is done."""
        ...

    def over(self, fn: Callable[..., T], handles: Sequence[Any], *args: Any) -> Iterator[T]:
        """``fn(kept, *args)`` for each kept result."""
        ...


@dataclass(frozen=True)
class InProcess:
    """Every part in this process, one after the other."""

    bound: BoundCampaign
    audience: Audience

    def map(self, fn: Callable[..., T], parts: Sequence[Part], *args: Any) -> Iterator[T]:
        return (fn(self.bound, self.audience, part, *args) for part in parts)

    def keep(
        self, fn: Callable[..., Any], parts: Sequence[Part], advance: Callable[[int], None]
    ) -> list[Any]:
        held = []
        for part in parts:
            held.append(fn(self.bound, self.audience, part))
            advance(sum(len(d) for d in getattr(held[-1], "chunks", ())))
        return held

    def over(self, fn: Callable[..., T], handles: Sequence[Any], *args: Any) -> Iterator[T]:
        return (fn(handle, *args) for handle in handles)


Progress = Callable[[str, int | None], Callable[[int], None]]
"""``progress(label, total)`` gives a function that advances a bar by some rows."""


def score_file(
    bound: BoundCampaign,
    audience: Audience,
    out: Path,
    log: ColumnSink,
    *,
    rank: bool = False,
    capacity: int | None = None,
    budget: float | None = None,
    runner: Runner | None = None,
    progress: Progress | None = None,
) -> Summary:
    """Decide every customer of the audience, log every decision, then write ``out``."""
    started = time.perf_counter()
    parts = audience.parts()
    run = runner or InProcess(bound, audience)
    bar = progress or _silent
    output = OutputFile(out)
    listed: int | None
    try:
        if rank:
            rows, logged, listed = _ranked(bound, audience, parts, run, log, output, bar,
                                           capacity, budget)  # fmt: skip
            output.commit(ranked_schema(bound))
        else:
            rows, logged, listed = _scored(parts, run, log, output, bar)
            output.commit(score_schema(bound))
    except BaseException:
        output.discard()
        raise
    return Summary(rows, logged, listed, out, time.perf_counter() - started)


def _scored(
    parts: list[Part], run: Runner, log: ColumnSink, output: OutputFile, bar: Progress
) -> tuple[int, int, None]:
    # Pass 1 validates everything, so that bad input logs nothing.
    advance = bar("checking", count_rows(parts))
    rows = 0
    for n in run.map(validate_part, parts):
        rows += n
        advance(n)
    advance = bar("deciding", rows)
    logged = 0
    for emitted in run.map(emit_part, parts):
        log.append_columns_sync(emitted.logged)
        assert emitted.table is not None
        output.write(emitted.table)
        logged += emitted.rows
        advance(emitted.rows)
    return rows, logged, None


def _ranked(
    bound: BoundCampaign, audience: Audience, parts: list[Part], run: Runner,
    log: ColumnSink, output: OutputFile, bar: Progress, capacity: int | None,
    budget: float | None,
) -> tuple[int, int, int]:  # fmt: skip
    advance = bar("deciding", count_rows(parts))
    held = run.keep(decide_part, parts, advance)
    ids: list[str] = []
    batches: list[DecisionBatch] = []
    for inputs in run.over(cut_inputs, held):
        ids.extend(inputs.ids)
        batches.extend(inputs.batches)
    ranking = rank_chunks(bound, ids, batches, capacity=capacity, budget=budget)
    del batches
    advance = bar("logging", len(ids))
    decision_ids: list[str] = []
    uplift: list[npt.NDArray[np.float64]] = []
    logged = 0
    for emitted in run.over(emit_decided, held, ranking):
        log.append_columns_sync(emitted.logged)
        decision_ids.extend(d for c in emitted.logged for d in c.decision_id)
        uplift.append(emitted.uplift)
        logged += emitted.rows
        advance(emitted.rows)
    del held
    for table in ranked_tables(bound, ranking, ids, decision_ids, np.concatenate(uplift),
                               audience.chunk_rows):  # fmt: skip
        output.write(table)
    return len(ids), logged, len(ranking.result.order)


def _silent(label: str, total: int | None) -> Callable[[int], None]:
    return lambda n: None


def _shifted(err: InvalidFeatures, start: int, data: Path) -> InvalidFeatures:
    """The same problems with row numbers counted from the start of the input."""
    problems = [
        {**p, "row": None if p.get("row") is None else p["row"] + start}
        for p in cast(list[dict[str, Any]], err.details["problems"])
    ]
    shifted = InvalidFeatures(problems)
    shifted.args = (f"{data}: {shifted.args[0]}",)
    return shifted
