"""Liveness and readiness probes (no API key needed)."""

from __future__ import annotations

import asyncio

from fastapi import APIRouter

from service.api.deps import CatalogDep, LogDep, RegistryDep
from service.api.errors import ApiError
from service.api.openapi import error_responses
from service.api.routing import OrjsonRoute
from service.api.schemas import Health, Readiness
from service.scoring import readiness_problems

router = APIRouter(tags=["health"], route_class=OrjsonRoute)


@router.get("/healthz", response_model=Health)
async def healthz() -> Health:
    """The process is up and answering."""
    return Health(status="ok")


@router.get("/readyz", response_model=Readiness, responses=error_responses(503))
async def readyz(catalog: CatalogDep, registry: RegistryDep, log: LogDep) -> Readiness:
    """Every campaign's model is loaded and verified on disk, and the log is writable."""
    problems = await asyncio.to_thread(readiness_problems, catalog, registry, log)
    serving = {cid: f"{name}@{version}" for cid, (name, version) in catalog.serving().items()}
    if problems:
        raise ApiError(
            503,
            "not_ready",
            f"Not ready: {problems[0]}"
            + (f" (and {len(problems) - 1} more)" if problems[1:] else ""),
            {"problems": problems, "campaigns": serving, "forms": catalog.forms()},
        )
    return Readiness(ready=True, problems=[], campaigns=serving, forms=catalog.forms())
