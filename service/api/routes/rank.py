"""Ranked contact lists cut at capacity and/or budget."""

from __future__ import annotations

import asyncio

from fastapi import APIRouter

from service.api.candidates import candidates, check_batch_size
from service.api.deps import ScorerKey, StateDep
from service.api.examples import RANK, RANKED_LIST
from service.api.openapi import request_examples, with_example
from service.api.responses import OrjsonResponse
from service.api.routes.score import ERRORS, THREAD_ROWS, count_decisions
from service.api.routing import ScoringRoute
from service.api.schemas import RankedList, RankRequest
from service.scoring import Decided, rank_many, ranked_list

router = APIRouter(prefix="/v1/rank", tags=["scoring"], route_class=ScoringRoute)


@router.post(
    "",
    response_model=RankedList,
    responses=with_example(ERRORS, RANKED_LIST),
    openapi_extra=request_examples(demo=RANK),
)
async def rank(body: RankRequest, state: StateDep, _: ScorerKey) -> OrjsonResponse:
    """Order the candidates by expected value and cut the list; every decision is logged."""
    n = check_batch_size(body, state.settings.max_batch)
    bound = state.catalog.get(body.campaign)

    def work() -> Decided:
        ids, table, values = candidates(body, bound.schema)
        return rank_many(bound, ids, table, values, capacity=body.capacity, budget=body.budget)

    decided = await asyncio.to_thread(work) if n > THREAD_ROWS else work()
    await state.committer.commit(decided.records)
    count_decisions(state.metrics, bound.campaign.id, decided.records)
    return OrjsonResponse(ranked_list(decided))
