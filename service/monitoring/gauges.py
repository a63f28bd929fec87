"""Drift gauges for ``/metrics``: PSI per campaign, feature and score, refreshed off-loop."""

from __future__ import annotations

import logging
import threading
import time
from collections.abc import Callable, Iterator, Mapping
from pathlib import Path

from prometheus_client.core import GaugeMetricFamily
from prometheus_client.registry import Collector

from service.decisions import DecisionLog
from service.errors import UpshotError
from service.loop.logged import read_logged
from service.monitoring.recent import log_drift
from service.registry import LoadedBundle

__all__ = ["DriftCollector"]

logger = logging.getLogger(__name__)

Source = Callable[[], tuple[DecisionLog | str | Path, Mapping[str, LoadedBundle]]]
"""Returns the decision log (or its location) and the bundle serving each campaign."""


class DriftCollector(Collector):  # type: ignore[misc]
    """Publishes ``upshot_drift_psi{campaign, kind, name}`` from a cached computation.

    A scrape never waits for the log: it returns the last values and, when they are
    older than ``max_age`` seconds, starts one background refresh over the last
    ``window`` decisions of each campaign.
    """

    def __init__(self, source: Source, *, window: int = 5000, max_age: float = 300.0) -> None:
        self._source = source
        self._window = window
        self._max_age = max_age
        self._values: list[tuple[str, str, str, float]] = []
        self._stamp = -float("inf")
        self._lock = threading.Lock()
        self._running = False

    def describe(self) -> Iterator[GaugeMetricFamily]:
        # Registration asks for names only; without this it would call collect() and
        # start a refresh before the app (and its log) exists.
        yield _family()

    def collect(self) -> Iterator[GaugeMetricFamily]:
        self._maybe_refresh()
        family = _family()
        with self._lock:
            values = list(self._values)
        for campaign, kind, name, value in values:
            family.add_metric([campaign, kind, name], value)
        yield family

    def refresh(self) -> None:
        """Recompute every campaign's drift now (what the background thread runs)."""
        log, bundles = self._source()
        values = []
        for campaign, bundle in bundles.items():
            try:
                logged = read_logged(log, campaign, last=self._window)
                report = log_drift(logged, bundle)
            except UpshotError as err:
                logger.debug("no drift for campaign %s: %s", campaign, err)
                continue
            values += [(campaign, i.kind, i.name, i.psi) for i in report.items]
        with self._lock:
            self._values = values
            self._stamp = time.monotonic()

    def _maybe_refresh(self) -> None:
        with self._lock:
            if self._running or time.monotonic() - self._stamp < self._max_age:
                return
            self._running = True
        threading.Thread(target=self._run, name="drift-gauges", daemon=True).start()

    def _run(self) -> None:
        try:
            self.refresh()
        except Exception:
            logger.exception("drift gauges could not be refreshed")
        finally:
            with self._lock:
                self._running = False


def _family() -> GaugeMetricFamily:
    return GaugeMetricFamily(
        "upshot_drift_psi",
        "Population stability index of a feature or score over the last decisions vs "
        "the serving model's training reference (0.1 watch, 0.25 act: common "
        "practice, no source).",
        labels=["campaign", "kind", "name"],
    )
