"""Ranked contact lists cut at capacity and/or budget."""

from __future__ import annotations

from fastapi import APIRouter

from service.api.candidates import check_batch_size
from service.api.deps import ScorerKey, StateDep
from service.api.responses import OrjsonResponse
from service.api.routes.score import ERRORS, count_columns, validated
from service.api.routing import ScoringRoute
from service.api.schemas import RankedList, RankRequest
from service.decisions import DecisionColumns
from service.scoring import rank_batch, ranked_list

router = APIRouter(prefix="/v1/rank", tags=["scoring"], route_class=ScoringRoute)


@router.post("", response_model=RankedList, responses=ERRORS)
async def rank(body: RankRequest, state: StateDep, _: ScorerKey) -> OrjsonResponse:
    """Order the candidates by expected value and cut the list; every decision is logged."""
    n = check_batch_size(body, state.settings.max_batch)
    bound = state.catalog.get(body.campaign)
    ids, table, values = await validated(body, bound, n)
    metrics = state.metrics

    def counted(logged: DecisionColumns) -> None:
        count_columns(metrics, logged)

    done = await rank_batch(
        state.committer, bound, ids, table, values,
        capacity=body.capacity, budget=body.budget, on_commit=counted,
    )  # fmt: skip
    return OrjsonResponse(ranked_list(bound, done.ranking, ids, done.decision_ids, done.uplift))
