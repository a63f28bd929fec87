"""One router per resource."""

from __future__ import annotations

from service.api.routes import (
    admin,
    campaigns,
    health,
    lift,
    metrics,
    models,
    outcomes,
    rank,
    score,
)

__all__ = [
    "admin",
    "campaigns",
    "health",
    "lift",
    "metrics",
    "models",
    "outcomes",
    "rank",
    "score",
]
