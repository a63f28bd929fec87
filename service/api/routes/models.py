"""Registered models: versions, roles, and what serves each campaign."""

from __future__ import annotations

import asyncio
from typing import Any

from fastapi import APIRouter

from service.api.deps import CatalogDep, RegistryDep, ScorerKey
from service.api.openapi import error_responses
from service.api.routing import OrjsonRoute
from service.api.schemas import ModelInfo, ModelList
from service.errors import BundleError, NotFoundError
from service.registry import ModelRegistry
from service.scoring import Catalog

router = APIRouter(prefix="/v1/models", tags=["models"], route_class=OrjsonRoute)


@router.get("", response_model=ModelList, responses=error_responses(401, 403))
async def list_models(catalog: CatalogDep, registry: RegistryDep, _: ScorerKey) -> ModelList:
    """Every registered model with its versions, champion, challenger and feature schema."""
    return await asyncio.to_thread(_describe, catalog, registry)


def _describe(catalog: Catalog, registry: ModelRegistry) -> ModelList:
    models = []
    for name in registry.names():
        serving = {
            cid: version for cid, (model, version) in catalog.serving().items() if model == name
        }
        forms = {cid: form for cid, form in catalog.forms().items() if cid in serving}
        champion = registry.champion(name)
        models.append(
            ModelInfo(
                name=name,
                versions=registry.versions(name),
                champion=champion,
                challenger=registry.challenger(name),
                serving=serving,
                serving_forms=forms,
                **_schema(catalog, registry, name, champion),
            )
        )
    return ModelList(models=models)


def _schema(
    catalog: Catalog, registry: ModelRegistry, name: str, version: str | None
) -> dict[str, Any]:
    manifest: dict[str, Any] = {}
    for bound in catalog.bound.values():
        if (bound.bundle.name, bound.bundle.version) == (name, version):
            manifest = bound.bundle.manifest
    if not manifest and version is not None:
        try:
            manifest = registry.verify(name, version)
        except (BundleError, NotFoundError):
            manifest = {}
    return {
        "features": list(manifest.get("features", [])),
        "arms": [str(a) for a in manifest.get("arms", [])],
        "outcome_type": manifest.get("outcome_type"),
    }
