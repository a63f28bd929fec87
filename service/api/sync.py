"""Keep a replica's catalog in step with what the other replicas changed.

Replicas share the model registry (``UPSHOT_MODELS_DIR``), the campaign file and the
decision log. A promotion or a campaign reload made through one replica changes the
registry's ``state.json`` or the campaign file (or an opt-out file it names); every
replica polls both every ``UPSHOT_SYNC_SECONDS`` (default 2 s) and rebinds or reloads
when they differ from what it last saw, so a change made anywhere is served everywhere
within one interval (plus the time to load a new model). Polling costs a few small file
reads per interval and needs nothing but the shared files.
"""

from __future__ import annotations

import asyncio
import hashlib
import logging
import tomllib
from pathlib import Path

from service.api.state import ServiceState
from service.errors import UpshotError
from service.policy import Campaign
from service.registry import ModelRegistry
from service.scoring import Catalog

__all__ = ["ReplicaSync"]

logger = logging.getLogger(__name__)

Champions = dict[str, str | None]


class ReplicaSync:
    """Poll the campaign file's digest and the registry's champions; apply what changed.

    :meth:`prime` records the campaign file's digest before the state loads it and
    :meth:`adopt` the versions it then serves, so a change made during start-up is seen
    by the first poll; :meth:`check` compares once; :meth:`run` checks every
    ``interval`` seconds until cancelled.
    """

    def __init__(self, state: ServiceState, interval: float) -> None:
        self.state = state
        self.interval = interval
        self._digest: str | None = None
        self._champions: Champions = {}

    async def prime(self) -> None:
        """Remember the campaign file's digest (before the state loads the file)."""
        self._digest = await asyncio.to_thread(_digest, self.state.settings.campaigns_file)

    def adopt(self, catalog: Catalog) -> None:
        """Remember the versions the loaded catalog serves for champion-following campaigns."""
        serving = catalog.serving()
        self._champions = {
            c.model: serving.get(cid, (c.model, None))[1]
            for cid, c in catalog.campaigns.items()
            if c.model is not None and c.model_version is None  # a pilot has no model
        }

    async def check(self) -> str | None:
        """One poll: ``"reload"``, ``"rebind"`` or None (nothing changed)."""
        digest = await asyncio.to_thread(_digest, self.state.settings.campaigns_file)
        if digest != self._digest:
            self._digest = digest
            try:
                catalog = await self.state.reload()
            except UpshotError as err:
                # The previous campaigns keep serving; a corrected file changes the digest.
                logger.error("campaign file changed but cannot be loaded: %s", err)
                return None
            self._champions = await asyncio.to_thread(
                _champions, self.state.registry, dict(catalog.campaigns)
            )
            logger.warning("campaign file changed: reloaded, serving %s", catalog.serving())
            return "reload"
        campaigns = dict(self.state.catalog.campaigns)
        champions = await asyncio.to_thread(_champions, self.state.registry, campaigns)
        if champions == self._champions:
            return None
        self._champions = champions
        catalog = await self.state.rebind()
        logger.warning("champion changed: rebound, serving %s", catalog.serving())
        return "rebind"

    async def run(self) -> None:
        """Check every ``interval`` seconds until cancelled; errors are logged, not fatal."""
        while True:
            await asyncio.sleep(self.interval)
            try:
                await self.check()
            except asyncio.CancelledError:
                raise
            except Exception:
                logger.exception("replica sync check failed; retrying in %.1f s", self.interval)


def _digest(path: Path) -> str | None:
    """SHA-256 of the campaign file and of the opt-out files it names (None: unreadable)."""
    try:
        data = path.read_bytes()
    except OSError:
        return None
    digest = hashlib.sha256(data)
    try:
        tables = tomllib.loads(data.decode("utf-8")).get("campaigns", {})
    except (UnicodeDecodeError, tomllib.TOMLDecodeError):
        return digest.hexdigest()  # reload reports what is wrong with it
    for table in tables.values() if isinstance(tables, dict) else ():
        name = table.get("suppression_file") if isinstance(table, dict) else None
        if isinstance(name, str):
            try:
                digest.update((path.parent / name).read_bytes())
            except OSError:
                digest.update(b"\0unreadable\0" + name.encode())
    return digest.hexdigest()


def _champions(registry: ModelRegistry, campaigns: dict[str, Campaign]) -> Champions:
    """Champion of every model name a campaign follows (pinned versions never move)."""
    names = sorted(
        {c.model for c in campaigns.values() if c.model is not None and c.model_version is None}
    )
    out: Champions = {}
    for name in names:
        try:
            out[name] = registry.champion(name)
        except UpshotError as err:
            out[name] = f"unreadable: {err}"
    return out
