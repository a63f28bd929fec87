"""Realized lift of a campaign, read from its decision log."""

from __future__ import annotations

import asyncio
from typing import Annotated, Any

from fastapi import APIRouter, Query

from service.api.deps import CatalogDep, LogDep, ScorerKey
from service.api.loop_schemas import LiftReportBody
from service.api.routing import OrjsonRoute
from service.api.schemas import ErrorBody
from service.errors import NotFoundError
from service.loop import campaign_lift, read_logged

router = APIRouter(prefix="/v1/campaigns", tags=["learning loop"], route_class=OrjsonRoute)

ERRORS: dict[int | str, dict[str, object]] = {
    status: {"model": ErrorBody} for status in (401, 403, 404, 422)
}


@router.get("/{campaign_id}/lift", response_model=LiftReportBody, responses=ERRORS)
async def campaign_lift_report(
    campaign_id: str,
    catalog: CatalogDep,
    log: LogDep,
    _: ScorerKey,
    since: Annotated[str | None, Query(description="ISO 8601; decisions from then on.")] = None,
    until: Annotated[str | None, Query(description="ISO 8601; decisions before then.")] = None,
    confidence: Annotated[float, Query(gt=0.5, lt=1.0)] = 0.95,
) -> LiftReportBody:
    """The lift the campaign's policy delivered against its randomized control."""
    campaign = catalog.campaigns.get(campaign_id)
    if campaign is None:
        raise NotFoundError(
            f"Campaign {campaign_id!r} is not in the campaign file; known campaigns are "
            f"{sorted(catalog.campaigns)}."
        )

    def work() -> dict[str, Any]:
        logged = read_logged(log, campaign_id, since=since, until=until, detail=False)
        return campaign_lift(logged, campaign, confidence=confidence).to_dict()

    return LiftReportBody.model_validate(await asyncio.to_thread(work))
