"""Prometheus metrics of one app: requests, latency, decisions, exploration, errors.

Each app owns its :class:`~prometheus_client.CollectorRegistry`, so several apps (tests,
a reload) never collide in the global registry. :class:`MetricsMiddleware` is plain ASGI
(no per-request task or body copy) so that measuring costs next to nothing.
"""

from __future__ import annotations

import time
from collections.abc import Sequence
from typing import Any

from prometheus_client import CollectorRegistry, Counter, Gauge, Histogram, generate_latest
from starlette.types import ASGIApp, Message, Receive, Scope, Send

__all__ = ["Metrics", "MetricsMiddleware"]

_LATENCY_BUCKETS = (
    0.0005, 0.001, 0.002, 0.004, 0.008, 0.016, 0.032, 0.064, 0.125, 0.25, 0.5, 1.0, 2.5,
    5.0, 10.0, 30.0,
)  # fmt: skip


class Metrics:
    """The metric families of the service, in their own registry."""

    def __init__(self) -> None:
        self.registry = CollectorRegistry(auto_describe=True)
        self.requests = Counter(
            "upshot_http_requests", "HTTP requests served, by route, method and status.",
            ["route", "method", "status"], registry=self.registry,
        )  # fmt: skip
        self.latency = Histogram(
            "upshot_http_request_duration_seconds", "Time to serve a request, by route.",
            ["route"], buckets=_LATENCY_BUCKETS, registry=self.registry,
        )  # fmt: skip
        self.errors = Counter(
            "upshot_http_errors", "Error responses, by error code.", ["code"],
            registry=self.registry,
        )  # fmt: skip
        self.decisions = Counter(
            "upshot_decisions", "Decisions committed to the log, by campaign, mode and action.",
            ["campaign", "mode", "action"], registry=self.registry,
        )  # fmt: skip
        self.explored = Counter(
            "upshot_decisions_explored", "Decisions whose action was drawn by exploration.",
            ["campaign"], registry=self.registry,
        )  # fmt: skip
        self.held_out = Counter(
            "upshot_decisions_held_out", "Chosen contacts withheld as randomized control.",
            ["campaign"], registry=self.registry,
        )  # fmt: skip
        self.exploration_share = Gauge(
            "upshot_exploration_share", "Share of this process's decisions that explored.",
            ["campaign"], registry=self.registry,
        )  # fmt: skip
        self.model_info = Gauge(
            "upshot_model_info", "The model version serving each campaign (value 1).",
            ["campaign", "model", "version"], registry=self.registry,
        )  # fmt: skip
        self.shed = Counter(
            "upshot_http_shed", "Requests refused at once to bound the work in progress, by "
            "reason: in_flight (503) or heavy_read (429).", ["reason"], registry=self.registry,
        )  # fmt: skip
        self.in_flight = Gauge(
            "upshot_http_in_flight", "Requests in progress in this worker.",
            registry=self.registry,
        )  # fmt: skip
        self._counts: dict[str, tuple[int, int]] = {}
        self._decision_children: dict[tuple[str, str, str], Any] = {}
        self._campaign_children: dict[str, tuple[Any, Any, Any]] = {}

    def record_decisions(
        self, campaign: str, mode: str, actions: Sequence[str], explored: int, held_out: int
    ) -> None:
        """Count a committed group of decisions."""
        tally: dict[str, int] = {}
        for action in actions:
            tally[action] = tally.get(action, 0) + 1
        for action, count in tally.items():
            key = (campaign, mode, action)
            child = self._decision_children.get(key)
            if child is None:
                child = self._decision_children[key] = self.decisions.labels(*key)
            child.inc(count)
        children = self._campaign_children.get(campaign)
        if children is None:
            children = self._campaign_children[campaign] = (
                self.explored.labels(campaign),
                self.held_out.labels(campaign),
                self.exploration_share.labels(campaign),
            )
        if explored:
            children[0].inc(explored)
        if held_out:
            children[1].inc(held_out)
        seen, explored_so_far = self._counts.get(campaign, (0, 0))
        seen, explored_so_far = seen + len(actions), explored_so_far + explored
        self._counts[campaign] = (seen, explored_so_far)
        children[2].set(explored_so_far / seen if seen else 0.0)

    def set_models(self, serving: dict[str, tuple[str, str]]) -> None:
        """Publish which model version serves each campaign."""
        self.model_info.clear()
        for campaign, (model, version) in serving.items():
            self.model_info.labels(campaign, model, version).set(1)

    def render(self) -> bytes:
        """The Prometheus text exposition of every metric."""
        return generate_latest(self.registry)


class MetricsMiddleware:
    """Count and time every HTTP request by its route template (not its raw path)."""

    def __init__(self, app: ASGIApp, metrics: Metrics) -> None:
        self.app = app
        self.metrics = metrics
        # Label lookups take a lock and build a tuple; keep the children per label set.
        self._children: dict[tuple[str, str, int], tuple[Any, Any]] = {}

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return
        start = time.perf_counter()
        status = 500

        async def send_status(message: Message) -> None:
            nonlocal status
            if message["type"] == "http.response.start":
                status = message["status"]
            await send(message)

        try:
            await self.app(scope, receive, send_status)
        finally:
            route = scope.get("route")
            key = (getattr(route, "path", "unmatched"), scope["method"], status)
            children = self._children.get(key)
            if children is None:
                children = self._children[key] = (
                    self.metrics.requests.labels(key[0], key[1], str(status)),
                    self.metrics.latency.labels(key[0]),
                )
            children[0].inc()
            children[1].observe(time.perf_counter() - start)
