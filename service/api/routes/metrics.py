"""Prometheus metrics in the text exposition format."""

from __future__ import annotations

from fastapi import APIRouter, Response
from prometheus_client import CONTENT_TYPE_LATEST

from service.api.deps import StateDep

router = APIRouter(tags=["health"])


@router.get(
    "/metrics",
    response_class=Response,
    responses={
        200: {
            "description": "Prometheus text exposition.",
            "content": {CONTENT_TYPE_LATEST.split(";")[0]: {"schema": {"type": "string"}}},
        }
    },
)
async def metrics(state: StateDep) -> Response:
    """Requests, latency histograms, decisions by action, exploration share, errors."""
    return Response(state.metrics.render(), media_type=CONTENT_TYPE_LATEST)
