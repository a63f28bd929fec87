"""The app factory: ``create_app(settings)`` builds the scoring service.

The registry, the decision log and the campaign catalog are built once in the lifespan
(unless passed in) and reached by routes through ``deps.py``.
"""

from __future__ import annotations

import asyncio
import gc
import logging
import sys
from collections.abc import AsyncIterator
from contextlib import asynccontextmanager

from fastapi import FastAPI

from service import __version__, hashing
from service.api.auth import KeyRing
from service.api.docs import install_docs
from service.api.errors import install_error_handlers
from service.api.hotpath import HotPath
from service.api.limits import RequestLimits
from service.api.metrics import Metrics, MetricsMiddleware
from service.api.responses import OrjsonResponse
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
from service.api.state import ServiceState
from service.api.sync import ReplicaSync
from service.config import Settings, load_settings
from service.decisions import DecisionLog
from service.monitoring import DriftCollector
from service.registry import ModelRegistry

__all__ = ["API_VERSION", "app_from_env", "create_app"]

logger = logging.getLogger(__name__)

_SWITCH_INTERVAL_S = 0.0005

API_VERSION = "1"
"""Major version of the HTTP API; it is also the path prefix (``/v1``)."""

_DESCRIPTION = """
Per-customer contact decisions from uplift models: `POST /v1/score` for one customer,
`POST /v1/score/batch` for many, `POST /v1/rank` for a contact list cut at capacity or
budget. Every decision is committed to the decision log before it is returned, and a
retried request returns the same decision and `decision_id`.

Errors always have the shape `{"error": {"code", "message", "details"}}`.

**Responsible use.** Decisions are estimates with stated uncertainty, not advice. Honour
opt-outs, do-not-call registries, consent and marketing law where each customer lives; do
not target on protected attributes where law forbids it. In healthcare an uplift estimate
is not a clinical decision; political outreach follows local election law.
"""


def create_app(
    settings: Settings, *, registry: ModelRegistry | None = None, log: DecisionLog | None = None
) -> FastAPI:
    """Build the scoring service.

    Parameters
    ----------
    settings : Settings
        Read once by :func:`service.config.load_settings`.
    registry : ModelRegistry, optional
        Default: a registry on ``settings.models_dir``, built at start-up.
    log : DecisionLog, optional
        Default: the log at ``settings.decision_log``, opened at start-up and closed at
        shutdown (a log passed in stays open: its owner closes it).
    """
    keyring = KeyRing(settings.keys())
    metrics_ = Metrics()
    state = ServiceState(settings, registry=registry, log=log, keyring=keyring, metrics=metrics_)
    # Drift gauges on /metrics, computed off the event loop from the log's last decisions.
    metrics_.registry.register(
        DriftCollector(
            lambda: (
                state.log,
                {
                    c: b.bundle
                    for c, b in state.catalog.bound.items()
                    if not b.campaign.is_pilot  # a pilot has no training reference
                },
            )
        )
    )

    @asynccontextmanager
    async def lifespan(app: FastAPI) -> AsyncIterator[None]:
        if not keyring.enabled:
            logger.warning(
                "NO API KEY CONFIGURED: authentication is OFF and every caller on this "
                "machine acts as admin; the service only binds to loopback (%s). Configure "
                "UPSHOT_API_KEYS before exposing it.",
                settings.host,
            )
        # Replicas: see what other replicas promote or reload (service/api/sync.py).
        sync = ReplicaSync(state, settings.sync_seconds)
        await sync.prime()
        await state.start()
        sync.adopt(state.catalog)
        hashing.warm_up()  # the batch path's hash kernel, compiled before the first batch
        poller = asyncio.create_task(sync.run()) if settings.sync_seconds > 0 else None
        # Everything loaded so far (libraries, models) lives as long as the process: move
        # it out of the cyclic collector's sight, or every full collection rescans ~300k
        # objects (~60-150 ms measured), which was the single-score p99.
        gc.collect()
        gc.freeze()
        # The log's writer thread needs the GIL twice per group commit; by default it may
        # wait 5 ms for the event loop to let go, which was most of a single score's time
        # at 8 connections. Half a millisecond keeps the hand-over short.
        sys.setswitchinterval(_SWITCH_INTERVAL_S)
        logger.info(
            "serving campaigns %s; not servable: %s",
            sorted(state.catalog.bound),
            sorted(state.catalog.problems),
        )
        try:
            yield
        finally:
            if poller is not None:
                poller.cancel()
                await asyncio.gather(poller, return_exceptions=True)
            state.close()
            gc.unfreeze()  # what this app held may be collected again (tests start many)

    app = FastAPI(
        title="upshot scoring service",
        version=f"{API_VERSION}.0 (upshot {__version__})",
        description=_DESCRIPTION,
        lifespan=lifespan,
        default_response_class=OrjsonResponse,
        docs_url=None,  # served from the package by install_docs (works offline)
        redoc_url=None,
        # Prometheus metrics are ours (metrics.py); FastAPI's OpenTelemetry hooks would
        # only add per-request work.
        telemetry={"tracing": False, "metrics": False, "logs": False, "operation_spans": False},
    )
    app.state.service = state
    app.state.metrics = metrics_
    install_error_handlers(app)
    # Innermost of ours: POST /v1/score skips the router (hotpath.py), after shedding,
    # the body limit and the metrics have seen it.
    app.add_middleware(HotPath, owner=app)
    app.add_middleware(MetricsMiddleware, metrics=metrics_)
    # Outermost: shedding and the body limit act before any other work is done.
    app.add_middleware(
        RequestLimits,
        max_in_flight=settings.max_in_flight,
        max_body_bytes=settings.max_body_bytes,
        metrics=metrics_,
    )
    for module in (health, score, rank, models, campaigns, admin, metrics, outcomes, lift):
        app.include_router(module.router)
    install_docs(app, title=app.title)
    app.include_router(outcomes.admin_router)
    return app


def app_from_env() -> FastAPI:
    """The app configured from ``UPSHOT_*`` variables (for ``uvicorn --factory``)."""
    return create_app(load_settings())
