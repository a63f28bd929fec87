"""Realized lift of a campaign, read from its decision log.

A lift report reads every decision of its window, so it is bounded three ways: it needs
an ``analyst`` (or ``admin``) key rather than the scorer keys CRM systems hold, at most
``UPSHOT_MAX_HEAVY_READS`` run at once (429 with ``Retry-After`` beyond), and without
``since`` it covers the ``UPSHOT_LIFT_WINDOW_DAYS`` days before ``until`` (without
``until``: from midnight UTC that many days ago).
"""

from __future__ import annotations

import asyncio
from datetime import UTC, datetime, timedelta
from typing import Annotated, Any

from fastapi import APIRouter, Path, Query

from service.api.deps import AnalystKey, CatalogDep, LogDep, StateDep
from service.api.examples import DEMO_CAMPAIGN
from service.api.loop_schemas import LiftReportBody
from service.api.openapi import error_responses
from service.api.routing import OrjsonRoute
from service.errors import DataError, NotFoundError
from service.loop import campaign_lift, read_logged

router = APIRouter(prefix="/v1/campaigns", tags=["learning loop"], route_class=OrjsonRoute)


@router.get(
    "/{campaign_id}/lift",
    response_model=LiftReportBody,
    responses=error_responses(401, 403, 404, 422, 429),
)
async def campaign_lift_report(
    campaign_id: Annotated[str, Path(examples=[DEMO_CAMPAIGN])],
    catalog: CatalogDep,
    log: LogDep,
    state: StateDep,
    _: AnalystKey,
    since: Annotated[
        str | None,
        Query(
            description="ISO 8601; decisions from then on (default: UPSHOT_LIFT_WINDOW_DAYS, "
            "30 unless configured, before `until`, or before today's midnight UTC).",
            max_length=64,
        ),
    ] = None,
    until: Annotated[
        str | None,
        Query(description="ISO 8601; decisions before then (default: now).", max_length=64),
    ] = None,
    confidence: Annotated[float, Query(gt=0.5, lt=1.0)] = 0.95,
) -> LiftReportBody:
    """The lift the campaign's policy delivered against its randomized control."""
    campaign = catalog.campaigns.get(campaign_id)
    if campaign is None:
        raise NotFoundError(
            f"Campaign {campaign_id!r} is not in the campaign file; known campaigns are "
            f"{sorted(catalog.campaigns)}."
        )
    end = _moment(until, "until")
    # Without `until`, count from today's midnight (UTC): repeated calls on one day read
    # the same window.
    reference = end or datetime.now(UTC).replace(hour=0, minute=0, second=0, microsecond=0)
    start = _moment(since, "since") or _days_before(reference, state.settings.lift_window_days)

    def work() -> dict[str, Any]:
        logged = read_logged(log, campaign_id, since=start, until=end, detail=False)
        return campaign_lift(logged, campaign, confidence=confidence).to_dict()

    with state.heavy_reads.slot():
        return LiftReportBody.model_validate(await asyncio.to_thread(work))


def _moment(text: str | None, what: str) -> datetime | None:
    """An ISO 8601 time as an aware UTC datetime (a time without offset is UTC)."""
    if text is None:
        return None
    try:
        moment = datetime.fromisoformat(text.strip().replace("Z", "+00:00"))
        if moment.tzinfo is None:
            moment = moment.replace(tzinfo=UTC)
        return moment.astimezone(UTC)
    except (ValueError, OverflowError):
        raise DataError(
            f"{what}={text!r} is not an ISO 8601 time between the years 1 and 9999; write "
            "e.g. 2026-03-01 or 2026-03-01T09:30:00+00:00."
        ) from None


def _days_before(moment: datetime, days: int) -> datetime:
    try:
        return moment - timedelta(days=days)
    except OverflowError:
        return datetime.min.replace(tzinfo=UTC)
