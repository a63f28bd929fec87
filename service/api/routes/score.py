"""Decisions for one customer or a batch of customers."""

from __future__ import annotations

import numpy as np
import numpy.typing as npt
from fastapi import APIRouter

from service.api.candidates import candidates, check_batch_size
from service.api.deps import ScorerKey, StateDep
from service.api.metrics import Metrics
from service.api.responses import OrjsonResponse
from service.api.routing import ScoringRoute
from service.api.schemas import (
    BatchDecisions,
    BatchScoreRequest,
    Decision,
    DecisionColumns,
    ErrorBody,
    ScoreRequest,
)
from service.decisions import DecisionColumns as LoggedColumns
from service.decisions import DecisionRecord
from service.scoring import (
    BoundCampaign,
    FeatureTable,
    column_body,
    column_part,
    decide_one,
    decision_rows,
    resolve_values,
    run_work,
)
from service.scoring import (
    score_batch as score_chunks,
)

router = APIRouter(prefix="/v1/score", tags=["scoring"], route_class=ScoringRoute)

ERRORS: dict[int | str, dict[str, object]] = {
    status: {"model": ErrorBody} for status in (401, 403, 404, 413, 422, 503)
}


@router.post("", response_model=Decision, responses=ERRORS)
async def score(body: ScoreRequest, state: StateDep, _: ScorerKey) -> OrjsonResponse:
    """Decide whether and how to contact one customer; the decision is logged first."""
    bound = state.catalog.get(body.campaign)
    customer = body.customer
    one = decide_one(bound, customer.id, customer.features, customer.value)
    await state.committer.commit(one.records)
    count_decisions(state.metrics, bound.campaign.id, one.records)
    return OrjsonResponse(one.body)


@router.post("/batch", response_model=BatchDecisions | DecisionColumns, responses=ERRORS)
async def score_batch(body: BatchScoreRequest, state: StateDep, _: ScorerKey) -> OrjsonResponse:
    """Decide for many customers; column-form requests get column-form answers."""
    n = check_batch_size(body, state.settings.max_batch)
    bound = state.catalog.get(body.campaign)
    ids, table, values = await validated(body, bound, n)
    metrics = state.metrics

    def counted(logged: LoggedColumns) -> None:
        count_columns(metrics, logged)

    if body.columns is not None:
        parts = await score_chunks(state.committer, bound, ids, table, values, column_part,
                                   on_commit=counted)  # fmt: skip
        return OrjsonResponse(column_body(bound, parts))
    chunks = await score_chunks(state.committer, bound, ids, table, values, decision_rows,
                                on_commit=counted)  # fmt: skip
    rows = [row for chunk in chunks for row in chunk]
    return OrjsonResponse(
        {
            "campaign": bound.campaign.id,
            "model": bound.model_ref,
            "count": len(rows),
            "decisions": rows,
        }  # fmt: skip
    )


Validated = tuple[list[str], FeatureTable, npt.NDArray[np.float64]]


async def validated(body: BatchScoreRequest, bound: BoundCampaign, n: int) -> Validated:
    """Ids, validated features and values of the whole batch (nothing is logged yet)."""

    def work() -> Validated:
        ids, table, given = candidates(body, bound.schema)
        return ids, table, resolve_values(bound, given, len(ids))

    return await run_work(work, n)


def count_decisions(metrics: Metrics, campaign: str, records: list[DecisionRecord]) -> None:
    """Count committed decisions by action, with the explored and held-out shares."""
    if records:
        metrics.record_decisions(
            campaign,
            records[0].mode,
            [r.action for r in records],
            explored=sum(r.explored for r in records),
            held_out=sum(r.holdout for r in records),
        )


def count_columns(metrics: Metrics, logged: LoggedColumns) -> None:
    """:func:`count_decisions` for a chunk logged in column form."""
    if len(logged):
        labels = logged.labels
        metrics.record_decisions(
            logged.campaign,
            logged.mode,
            [labels[a] for a in logged.action.tolist()],
            explored=int(logged.explored.sum()),
            held_out=int(logged.holdout.sum()),
        )
