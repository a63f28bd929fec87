"""What the app builds once at start-up and hands to every request.

The registry, the decision log and the campaign catalog are created in the app's
lifespan (or passed in by the caller, e.g. tests) and reached through ``deps.py``;
nothing below imports them as globals.
"""

from __future__ import annotations

import asyncio
import logging

from service.api.auth import KeyRing
from service.api.limits import HeavyReads
from service.api.metrics import Metrics
from service.config import Settings
from service.decisions import DecisionLog
from service.registry import ModelRegistry
from service.scoring import Catalog, Committer, bind_campaigns, load_catalog
from service.scoring.catalog import validated_catalog

__all__ = ["ServiceState"]

logger = logging.getLogger(__name__)


class ServiceState:
    """Registry, decision log, campaign catalog, keys and metrics of one running app."""

    def __init__(
        self,
        settings: Settings,
        *,
        registry: ModelRegistry | None,
        log: DecisionLog | None,
        keyring: KeyRing,
        metrics: Metrics,
    ) -> None:
        self.settings = settings
        self.keyring = keyring
        self.metrics = metrics
        self.heavy_reads = HeavyReads(settings.max_heavy_reads, metrics)
        self._registry = registry
        self._log = log
        self._owns_log = log is None
        self._catalog: Catalog | None = None
        self._committer: Committer | None = None
        self._lock = asyncio.Lock()

    @property
    def registry(self) -> ModelRegistry:
        assert self._registry is not None, "the app has not started"
        return self._registry

    @property
    def log(self) -> DecisionLog:
        assert self._log is not None, "the app has not started"
        return self._log

    @property
    def committer(self) -> Committer:
        assert self._committer is not None, "the app has not started"
        return self._committer

    @property
    def catalog(self) -> Catalog:
        assert self._catalog is not None, "the app has not started"
        return self._catalog

    async def start(self) -> None:
        """Open the registry and the log, then load the campaigns and their models."""
        if self._registry is None:
            self._registry = ModelRegistry(self.settings.models_dir)
        if self._log is None:
            self._log = await asyncio.to_thread(DecisionLog.open, self.settings.decision_log)
        self._committer = Committer(self._log)
        self._set_catalog(
            await asyncio.to_thread(
                load_catalog,
                self._registry,
                self.settings.campaigns_file,
                compile=self.settings.compiled,
                form=self.settings.form,
            )
        )

    async def reload(self) -> Catalog:
        """Re-read the campaign file and rebind models; the old catalog serves meanwhile.

        The new catalog replaces the old one only when every campaign can serve (every
        named model loads and verifies on disk); otherwise a
        :class:`~service.scoring.catalog.CatalogRefused` leaves the old one in place.
        """
        async with self._lock:
            catalog = await asyncio.to_thread(
                validated_catalog,
                self.registry,
                self.settings.campaigns_file,
                compile=self.settings.compiled,
                previous=self._catalog,
                form=self.settings.form,
            )
            self._set_catalog(catalog)
            return catalog

    async def rebind(self) -> Catalog:
        """Rebind the loaded campaigns to the registry's current champions."""
        async with self._lock:
            catalog = await asyncio.to_thread(
                bind_campaigns,
                self.registry,
                self.catalog.campaigns,
                compile=self.settings.compiled,
                previous=self._catalog,
                form=self.settings.form,
            )
            self._set_catalog(catalog)
            return catalog

    def close(self) -> None:
        """Close the log if this app opened it."""
        if self._owns_log and self._log is not None:
            self._log.close()
            self._log = None

    def _set_catalog(self, catalog: Catalog) -> None:
        self._catalog = catalog
        self.metrics.set_models(catalog.serving())
