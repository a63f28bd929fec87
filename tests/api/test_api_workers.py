"""``upshot serve --workers 2``: two real processes share one SQLite decision log.

Identical requests sent at the same time, likely to different workers, must give one
logged decision each, and no acknowledged decision may be missing from the log.
"""

from __future__ import annotations

import asyncio
import os
import socket
import subprocess
import sys
import time
from pathlib import Path

import httpx
import pytest
from api_support import CAMPAIGN, CAMPAIGN_TOML, columns_of, customers, features_of

from service.decisions import DecisionLog

pytestmark = pytest.mark.slow


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        port: int = s.getsockname()[1]
        return port


def _children(pid: int) -> list[int]:
    found = []
    for entry in Path("/proc").iterdir():
        if entry.name.isdigit():
            try:
                fields = (entry / "stat").read_text().rsplit(")", 1)[1].split()
            except OSError:
                continue
            if int(fields[1]) == pid:
                found.append(int(entry.name))
    return found


async def _post_all(url: str, bodies: list[tuple[str, dict[str, object]]]) -> list[httpx.Response]:
    # One connection per request, so that the kernel spreads them over both workers.
    async def post(path: str, body: dict[str, object]) -> httpx.Response:
        async with httpx.AsyncClient(base_url=url, timeout=120) as http:
            return await http.post(path, json=body)

    return await asyncio.gather(*(post(path, body) for path, body in bodies))


def test_two_workers_log_every_decision_once(trained_models: Path, tmp_path: Path) -> None:
    campaigns = tmp_path / "campaigns.toml"
    campaigns.write_text(CAMPAIGN_TOML, encoding="utf-8")
    log_path = tmp_path / "decisions.sqlite3"
    port = _free_port()
    command = [
        sys.executable, "-m", "service.commands.serve", "serve", "--port", str(port),
        "--workers", "2", "--models-dir", str(trained_models), "--campaigns", str(campaigns),
        "--decision-log", str(log_path),
    ]  # fmt: skip
    env = {k: v for k, v in os.environ.items() if not k.startswith("UPSHOT_")}
    # 202 requests at once: above the default shedding bound (32 per worker), which
    # this test is not about.
    env["UPSHOT_MAX_IN_FLIGHT"] = "512"
    with (tmp_path / "server.log").open("wb") as sink:
        server = subprocess.Popen(command, env=env, stdout=sink, stderr=sink)
    url = f"http://127.0.0.1:{port}"
    try:
        deadline = time.monotonic() + 120
        while True:
            assert server.poll() is None, (tmp_path / "server.log").read_text()[-2000:]
            assert time.monotonic() < deadline, "server not ready in 120 s"
            try:
                if httpx.get(f"{url}/readyz", timeout=1).status_code == 200:
                    break
            except httpx.TransportError:
                pass
            time.sleep(0.3)
        assert len(_children(server.pid)) >= 2, "expected two worker processes"

        ids, frame = customers(300, seed=61, prefix="W-")
        singles = [
            ("/v1/score", {"campaign": CAMPAIGN,
                           "customer": {"id": cid, "features": features_of(frame, i)}})
            for i, cid in enumerate(ids[:100])
        ]  # fmt: skip
        rest = columns_of(ids[100:], frame.iloc[100:])
        batch = ("/v1/score/batch", {"campaign": CAMPAIGN, "columns": rest})
        # Every request twice, at the same time.
        requests = [*singles, *singles, batch, batch]
        responses = asyncio.run(_post_all(url, requests))
    finally:
        server.terminate()
        server.wait(timeout=60)
    assert [r.status_code for r in responses] == [200] * len(requests)
    first = [r.json()["decision_id"] for r in responses[:100]]
    again = [r.json()["decision_id"] for r in responses[100:200]]
    assert first == again, "a retry on another worker gets the same decision"
    batch_ids = responses[200].json()["columns"]["decision_id"]
    assert responses[201].json()["columns"]["decision_id"] == batch_ids
    with DecisionLog.open(log_path) as log:
        logged = list(log.iter_decisions(CAMPAIGN))
    assert len(logged) == 300, "one record per decision, none lost, none doubled"
    assert {r.decision_id for r in logged} == set(first) | set(batch_ids)
