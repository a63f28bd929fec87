"""Outcomes fed back by decision id."""

from __future__ import annotations

import asyncio

from fastapi import APIRouter

from service.api.deps import LogDep, ScorerKey, StateDep
from service.api.errors import ApiError
from service.api.examples import OUTCOMES
from service.api.loop_schemas import OutcomeReceiptBody, OutcomesRequest
from service.api.openapi import error_responses, request_examples
from service.api.routing import OrjsonRoute
from service.decisions.outcomes import OutcomeReceipt, OutcomeStore, parse_outcome

router = APIRouter(prefix="/v1/outcomes", tags=["learning loop"], route_class=OrjsonRoute)


@router.post(
    "",
    response_model=OutcomeReceiptBody,
    responses=error_responses(401, 403, 409, 413, 422),
    openapi_extra=request_examples(demo=OUTCOMES),
)
async def post_outcomes(
    body: OutcomesRequest, log: LogDep, state: StateDep, _: ScorerKey
) -> OutcomeReceiptBody:
    """Record outcomes: a repeat is a no-op, a conflict refuses all (409), unknown ids listed."""
    limit = state.settings.max_batch
    if len(body.outcomes) > limit:
        raise ApiError(
            413,
            "payload_too_large",
            f"{len(body.outcomes)} outcomes in one request; send at most {limit} per request.",
        )
    outcomes = [
        parse_outcome(o.decision_id, o.outcome, o.observed_at, where=f"outcomes[{i}]")
        for i, o in enumerate(body.outcomes)
    ]
    receipt: OutcomeReceipt = await asyncio.to_thread(OutcomeStore(log.path).record, outcomes)
    return OutcomeReceiptBody(**receipt.to_dict())
