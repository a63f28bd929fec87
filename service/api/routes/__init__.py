"""One router per resource."""

from __future__ import annotations

from service.api.routes import admin, campaigns, health, metrics, models, rank, score

__all__ = ["admin", "campaigns", "health", "metrics", "models", "rank", "score"]
