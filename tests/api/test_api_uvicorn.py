"""The service as a real uvicorn process on loopback, driven by the typed client."""

from __future__ import annotations

import json
import os
import signal
import socket
import subprocess
import sys
import time
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path

import httpx
import pytest
from api_support import CAMPAIGN, CAMPAIGN_TOML, customers, features_of

from service.api.auth import hash_key, new_key
from service.client import ApiError, UpshotClient
from service.decisions import DecisionLog

KEY = new_key()


@dataclass
class Server:
    url: str
    process: subprocess.Popen[bytes]
    log_path: Path
    stderr_path: Path


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        port: int = s.getsockname()[1]
        return port


def _start(models: Path, root: Path) -> Server:
    campaigns = root / "campaigns.toml"
    campaigns.write_text(CAMPAIGN_TOML, encoding="utf-8")
    port = _free_port()
    env = {
        **os.environ,
        "UPSHOT_MODELS_DIR": str(models),
        "UPSHOT_CAMPAIGNS_FILE": str(campaigns),
        "UPSHOT_DECISION_LOG": str(root / "decisions.sqlite3"),
        "UPSHOT_API_KEYS": f"tests:scorer:{hash_key(KEY)}",
    }
    stderr = root / "server.log"
    command = [sys.executable, "-m", "service.commands.serve", "serve", "--port", str(port)]
    with stderr.open("wb") as sink:
        process = subprocess.Popen(command, env=env, stdout=sink, stderr=sink)
    url = f"http://127.0.0.1:{port}"
    deadline = time.monotonic() + 60
    while time.monotonic() < deadline:
        if process.poll() is not None:
            raise AssertionError(f"server exited: {stderr.read_text()[-2000:]}")
        try:
            if httpx.get(f"{url}/readyz", timeout=1).status_code == 200:
                return Server(url, process, root / "decisions.sqlite3", stderr)
        except httpx.TransportError:
            pass
        time.sleep(0.2)
    process.kill()
    raise AssertionError(f"server not ready in 60 s: {stderr.read_text()[-2000:]}")


def _stop(server: Server) -> None:
    if server.process.poll() is None:
        server.process.terminate()
        server.process.wait(timeout=30)


@pytest.fixture(scope="session")
def server(trained_models: Path, tmp_path_factory: pytest.TempPathFactory) -> Iterator[Server]:
    """One uvicorn process for the session, with a scorer key configured."""
    running = _start(trained_models, tmp_path_factory.mktemp("uvicorn"))
    yield running
    _stop(running)


def test_probes_docs_and_metrics_over_http(server: Server) -> None:
    assert httpx.get(f"{server.url}/healthz").json() == {"status": "ok"}
    assert httpx.get(f"{server.url}/readyz").json()["ready"] is True
    assert httpx.get(f"{server.url}/openapi.json").json()["info"]["title"]
    assert "upshot_http_requests_total" in httpx.get(f"{server.url}/metrics").text


def test_client_scores_ranks_and_lists_over_http(server: Server) -> None:
    ids, frame = customers(30, seed=31)
    with UpshotClient(server.url, api_key=KEY) as upshot:
        decision = upshot.score(CAMPAIGN, ids[0], features_of(frame, 0))
        again = upshot.score(CAMPAIGN, ids[0], features_of(frame, 0))
        assert again == decision, "a retry gets the same decision"
        rows = [{"id": cid, "features": features_of(frame, i)} for i, cid in enumerate(ids)]
        batch = upshot.score_batch(CAMPAIGN, rows)
        assert batch.decisions[0].decision_id == decision.decision_id
        ranked = upshot.rank(CAMPAIGN, customers=rows, capacity=5)
        assert len(ranked.contacts) <= 5
        assert ranked.totals.candidates == 30
        assert upshot.campaigns().campaigns[0].name == CAMPAIGN
        assert upshot.models().models[0].champion == "v0001"
        with pytest.raises(ApiError) as refused:
            upshot.score(CAMPAIGN, "x", {"colour": "red"})
        assert refused.value.status == 422 and refused.value.code == "invalid_input"
    with UpshotClient(server.url) as anonymous, pytest.raises(ApiError) as denied:
        anonymous.score(CAMPAIGN, "x", {})
    assert denied.value.status == 401


def test_logs_are_json_lines(server: Server) -> None:
    lines = [line for line in server.stderr_path.read_text().splitlines() if line.strip()]
    assert lines
    for line in lines:
        entry = json.loads(line)
        assert {"time", "level", "logger", "message"} <= set(entry)


@pytest.mark.slow
def test_an_acknowledged_decision_survives_sigkill(trained_models: Path, tmp_path: Path) -> None:
    running = _start(trained_models, tmp_path)
    try:
        ids, frame = customers(1, seed=32)
        with UpshotClient(running.url, api_key=KEY) as upshot:
            decision = upshot.score(CAMPAIGN, ids[0], features_of(frame, 0))
        running.process.send_signal(signal.SIGKILL)
        running.process.wait(timeout=10)
    finally:
        _stop(running)
    with DecisionLog.open(running.log_path) as log:
        record = log.get(decision.decision_id)
    assert record is not None
    assert record.action == decision.action
    assert record.propensity == pytest.approx(decision.propensity)
