"""/v1/rank refuses a list with no limit instead of silently listing everyone."""

from __future__ import annotations

from pathlib import Path

import pytest
from api_support import CAMPAIGN, CAMPAIGN_TOML, columns_of, customers, started

from service.decisions import DecisionLog

pytestmark = pytest.mark.anyio


async def test_rank_without_any_limit_is_refused_with_the_reason(
    make_settings, campaigns_file: Path, tmp_path: Path
) -> None:
    campaigns_file.write_text(CAMPAIGN_TOML.replace("capacity = 50\n", ""), encoding="utf-8")
    settings = make_settings()
    ids, frame = customers(20, seed=3)
    async with started(settings) as client:
        response = await client.post(
            "/v1/rank", json={"campaign": CAMPAIGN, "columns": columns_of(ids, frame)}
        )
        assert response.status_code == 422, response.text
        message = response.json()["error"]["message"]
        assert "neither capacity nor budget" in message and "capacity" in message
        # A budget alone is a limit: the list is built.
        ok = await client.post(
            "/v1/rank",
            json={"campaign": CAMPAIGN, "columns": columns_of(ids, frame), "budget": 5.0},
        )
        assert ok.status_code == 200, ok.text
    with DecisionLog.open(settings.decision_log) as log:
        assert len(list(log.iter_decisions(CAMPAIGN))) == 20  # the refused request logged nothing
