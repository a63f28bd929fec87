"""Outcomes fed back by decision id, and their explicit correction by an admin."""

from __future__ import annotations

import asyncio
import logging
from typing import Annotated

from fastapi import APIRouter, Path

from service.api.deps import AdminKey, LogDep, RegistryDep, ScorerKey, StateDep
from service.api.errors import ApiError
from service.api.loop_schemas import (
    CorrectionBody,
    CorrectionRequest,
    OutcomeReceiptBody,
    OutcomesRequest,
)
from service.api.routing import OrjsonRoute
from service.api.schemas import ErrorBody
from service.decisions import parse_outcome
from service.loop.kinds import registry_outcome_kinds

router = APIRouter(prefix="/v1/outcomes", tags=["learning loop"], route_class=OrjsonRoute)
admin_router = APIRouter(prefix="/v1/admin/outcomes", tags=["admin"], route_class=OrjsonRoute)

logger = logging.getLogger(__name__)

ERRORS: dict[int | str, dict[str, object]] = {
    status: {"model": ErrorBody} for status in (401, 403, 409, 413, 422)
}
ADMIN_ERRORS: dict[int | str, dict[str, object]] = {
    status: {"model": ErrorBody} for status in (401, 403, 404, 422)
}


@router.post("", response_model=OutcomeReceiptBody, responses=ERRORS)
async def post_outcomes(
    body: OutcomesRequest, log: LogDep, registry: RegistryDep, state: StateDep, _: ScorerKey
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
    kinds = registry_outcome_kinds(registry)
    receipt = await asyncio.to_thread(log.record_outcomes, outcomes, kinds)
    return OutcomeReceiptBody(**receipt.to_dict())


@admin_router.post(
    "/{decision_id}/correction", response_model=CorrectionBody, responses=ADMIN_ERRORS
)
async def correct_outcome(
    decision_id: Annotated[str, Path(min_length=1, max_length=200)],
    body: CorrectionRequest,
    log: LogDep,
    registry: RegistryDep,
    key: AdminKey,
) -> CorrectionBody:
    """Replace a recorded outcome; the old value, who, when and why are kept."""
    fixed = parse_outcome(decision_id, body.outcome, body.observed_at, where="correction")
    done = await asyncio.to_thread(
        log.correct_outcome,
        fixed,
        actor=f"api:{key.name}",
        reason=body.reason,
        kinds=registry_outcome_kinds(registry),
    )
    logger.warning(
        "outcome of decision %s corrected from %g to %g by %s: %s",
        decision_id, done.previous.outcome, done.outcome.outcome, key.name, body.reason,
    )  # fmt: skip
    return CorrectionBody.model_validate(done.to_dict())
