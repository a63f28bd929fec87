"""The replica poller in process: what it does when the shared files change (no timing)."""

from __future__ import annotations

from pathlib import Path

import httpx
import pytest
from replica_support import CAMPAIGN, MODEL, promote

from service.api import create_app
from service.api.sync import ReplicaSync
from service.config import load_settings


@pytest.fixture
def anyio_backend() -> str:
    return "asyncio"


@pytest.mark.anyio
async def test_poller_rebinds_reloads_and_keeps_serving_through_a_broken_file(
    models_dir: Path, campaigns_file: Path, tmp_path: Path
) -> None:
    settings = load_settings(
        models_dir=models_dir, campaigns_file=campaigns_file,
        decision_log=str(tmp_path / "decisions.sqlite3"), sync_seconds=0,
    )  # fmt: skip
    app = create_app(settings)
    async with app.router.lifespan_context(app):
        state = app.state.service
        sync = ReplicaSync(state, 1.0)
        await sync.prime()
        sync.adopt(state.catalog)
        assert await sync.check() is None

        promote(models_dir, "v0002")  # as another replica (or the CLI) would
        assert await sync.check() == "rebind"
        assert state.catalog.serving()[CAMPAIGN] == (MODEL, "v0002")
        assert await sync.check() is None

        good = campaigns_file.read_text(encoding="utf-8")
        campaigns_file.write_text(good.replace("[campaigns.", "[campaigns"), encoding="utf-8")
        assert await sync.check() is None  # refused: the previous campaigns keep serving
        assert state.catalog.serving()[CAMPAIGN] == (MODEL, "v0002")

        campaigns_file.write_text(good.replace("value = 40.0", "value = 55.0"), encoding="utf-8")
        assert await sync.check() == "reload"
        assert state.catalog.get(CAMPAIGN).campaign.value == 55.0

        transport = httpx.ASGITransport(app=app)
        async with httpx.AsyncClient(transport=transport, base_url="http://t") as http:
            ready = await http.get("/readyz")
        assert ready.json()["campaigns"] == {CAMPAIGN: f"{MODEL}@v0002"}
