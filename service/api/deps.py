"""Request dependencies as ``Annotated`` aliases; tests swap them with overrides.

All are ``async def``: FastAPI runs a plain ``def`` dependency in a worker thread, a
thread hop per dependency per request.
"""

from __future__ import annotations

from typing import Annotated

from fastapi import Depends, Request, Security
from fastapi.security import HTTPAuthorizationCredentials, HTTPBearer

from service.api.auth import Principal
from service.api.state import ServiceState
from service.decisions import DecisionLog
from service.registry import ModelRegistry
from service.scoring import Catalog

__all__ = [
    "AdminKey",
    "AnalystKey",
    "CatalogDep",
    "LogDep",
    "RegistryDep",
    "ScorerKey",
    "StateDep",
    "get_catalog",
    "get_log",
    "get_registry",
    "get_state",
]

_bearer = HTTPBearer(auto_error=False, description="An API key: `Authorization: Bearer <key>`.")


async def get_state(request: Request) -> ServiceState:
    """The state the app built at start-up."""
    state: ServiceState = request.app.state.service
    return state


StateDep = Annotated[ServiceState, Depends(get_state)]


async def get_catalog(state: StateDep) -> Catalog:
    """The current campaign catalog (one snapshot per request)."""
    return state.catalog


async def get_log(state: StateDep) -> DecisionLog:
    """The decision log."""
    return state.log


async def get_registry(state: StateDep) -> ModelRegistry:
    """The model registry."""
    return state.registry


CatalogDep = Annotated[Catalog, Depends(get_catalog)]
LogDep = Annotated[DecisionLog, Depends(get_log)]
RegistryDep = Annotated[ModelRegistry, Depends(get_registry)]


def _authenticate(
    state: ServiceState, credentials: HTTPAuthorizationCredentials | None, role: str
) -> Principal:
    header = f"{credentials.scheme} {credentials.credentials}" if credentials else None
    return state.keyring.require(header, role)


async def require_scorer(
    state: StateDep,
    credentials: Annotated[HTTPAuthorizationCredentials | None, Security(_bearer)],
) -> Principal:
    """A key with role scorer (or admin)."""
    return _authenticate(state, credentials, "scorer")


async def require_analyst(
    state: StateDep,
    credentials: Annotated[HTTPAuthorizationCredentials | None, Security(_bearer)],
) -> Principal:
    """A key with role analyst (or admin): heavy reads over the decision log."""
    return _authenticate(state, credentials, "analyst")


async def require_admin(
    state: StateDep,
    credentials: Annotated[HTTPAuthorizationCredentials | None, Security(_bearer)],
) -> Principal:
    """A key with role admin."""
    return _authenticate(state, credentials, "admin")


ScorerKey = Annotated[Principal, Depends(require_scorer)]
AnalystKey = Annotated[Principal, Depends(require_analyst)]
AdminKey = Annotated[Principal, Depends(require_admin)]
