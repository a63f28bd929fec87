"""Admin actions: promote a model version, reload the campaign file."""

from __future__ import annotations

import asyncio
import logging
from typing import Annotated

from fastapi import APIRouter, Path

from service.api.deps import AdminKey, RegistryDep, StateDep
from service.api.examples import DEMO_MODEL, PROMOTE
from service.api.openapi import error_responses, request_examples
from service.api.routes.campaigns import describe_campaigns
from service.api.routing import OrjsonRoute
from service.api.schemas import PromoteRequest, PromoteResult, ReloadResult

router = APIRouter(prefix="/v1/admin", tags=["admin"], route_class=OrjsonRoute)

logger = logging.getLogger(__name__)


@router.post(
    "/models/{name}/promote",
    response_model=PromoteResult,
    responses=error_responses(401, 403, 404, 409, 413, 422),
    openapi_extra=request_examples(demo=PROMOTE),
)
async def promote(
    name: Annotated[str, Path(examples=[DEMO_MODEL])],
    body: PromoteRequest,
    state: StateDep,
    registry: RegistryDep,
    key: AdminKey,
) -> PromoteResult:
    """Make a version the champion and rebind the campaigns that follow the champion."""
    previous = await asyncio.to_thread(registry.champion, name)
    await asyncio.to_thread(
        registry.promote, name, body.version, actor=f"api:{key.name}", reason=body.reason
    )
    catalog = await state.rebind()
    logger.warning("model %s promoted to %s by %s: %s", name, body.version, key.name, body.reason)
    following = sorted(
        cid for cid, (model, version) in catalog.serving().items()
        if model == name and version == body.version
    )  # fmt: skip
    return PromoteResult(name=name, champion=body.version, previous=previous, campaigns=following)


@router.post(
    "/campaigns/reload", response_model=ReloadResult, responses=error_responses(401, 403, 422)
)
async def reload_campaigns(state: StateDep, key: AdminKey) -> ReloadResult:
    """Re-read the campaign file; on an error the previous campaigns keep serving."""
    catalog = await state.reload()
    logger.warning("campaigns reloaded by %s: %s", key.name, sorted(catalog.campaigns))
    return ReloadResult(campaigns=describe_campaigns(catalog))
