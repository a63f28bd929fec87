"""Real ``upshot serve`` processes sharing one registry, campaign file and decision log."""

from __future__ import annotations

import os
import signal
import socket
import subprocess
import sys
import time
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import httpx
import pandas as pd

from service.registry import ModelRegistry
from service.simulation import simulate
from service.training import train_model

MODEL = "larkspur"
CAMPAIGN = "renewal"
SYNC_SECONDS = 0.5

CAMPAIGN_TOML = f"""
[campaigns.{CAMPAIGN}]
model = "{MODEL}"
value = 40.0
exploration = 0.10
holdout = 0.10
capacity = 50
salt = "replica-tests"

[campaigns.{CAMPAIGN}.arms]
email = {{ cost = 0.40 }}
call = {{ cost = 3.50 }}
"""


def train_version(models_dir: Path, *, random_state: int) -> str:
    """Train a small larkspur model (invented demo data) and return its version."""
    sim = simulate(MODEL, n=2000, random_state=random_state)
    result = train_model(
        sim.to_frame(), treatment=sim.treatment_name, outcome=sim.outcome_name,
        features=list(sim.X.columns), learner="t", base="linear", n_bootstrap=3,
        n_splits=2, name=MODEL, models_dir=models_dir, random_state=random_state,
    )  # fmt: skip
    return result.version


def promote(models_dir: Path, version: str) -> None:
    ModelRegistry(models_dir).promote(MODEL, version, actor="tests", reason="fixture")


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        port: int = s.getsockname()[1]
        return port


@dataclass
class Replica:
    """One ``upshot serve`` process and a client for it."""

    process: subprocess.Popen[bytes]
    client: httpx.Client
    output: Path

    def kill(self) -> None:
        """SIGKILL: no shutdown handler runs, nothing queued gets a chance to flush."""
        self.process.send_signal(signal.SIGKILL)
        self.process.wait()

    def stop(self) -> None:
        self.client.close()
        if self.process.poll() is None:
            self.process.terminate()
            try:
                self.process.wait(timeout=15)
            except subprocess.TimeoutExpired:
                self.process.kill()
                self.process.wait()


def start_replica(
    name: str, models_dir: Path, campaigns_file: Path, log_url: str, workdir: Path,
    *, workers: int = 1,
) -> Replica:  # fmt: skip
    """Start ``upshot serve`` on a free loopback port (then :func:`wait_ready`)."""
    port = free_port()
    env = {
        **os.environ,
        "UPSHOT_MODELS_DIR": str(models_dir),
        "UPSHOT_CAMPAIGNS_FILE": str(campaigns_file),
        "UPSHOT_DECISION_LOG": log_url,
        "UPSHOT_COMPILED": "false",
        "UPSHOT_SYNC_SECONDS": str(SYNC_SECONDS),
        "UPSHOT_LOG_LEVEL": "warning",
        "OMP_NUM_THREADS": "1",
    }
    command = [
        sys.executable, "-m", "service.cli", "serve", "--port", str(port),
        "--workers", str(workers),
    ]  # fmt: skip
    output = workdir / f"replica-{name}.txt"
    with output.open("wb") as sink:
        process = subprocess.Popen(command, env=env, stdout=sink, stderr=subprocess.STDOUT)
    client = httpx.Client(base_url=f"http://127.0.0.1:{port}", timeout=60.0)
    return Replica(process, client, output)


def wait_ready(replica: Replica, *, timeout: float = 120.0) -> None:
    """Wait until the replica's /readyz says ready; stop it and raise if it never does."""
    process, client, output, name = (
        replica.process, replica.client, replica.output, replica.output.stem
    )  # fmt: skip
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        if process.poll() is not None:
            raise RuntimeError(f"replica {name} exited:\n{output.read_text(errors='replace')}")
        try:
            if client.get("/readyz").status_code == 200:
                return
        except httpx.TransportError:
            pass
        time.sleep(0.2)
    replica.stop()
    raise RuntimeError(f"replica {name} was not ready within {timeout} s")


def customers(n: int, *, seed: int, prefix: str) -> list[dict[str, Any]]:
    """Fresh simulated customers (invented demo data) as request bodies' ``customer``."""
    frame: pd.DataFrame = simulate(MODEL, n=n, random_state=seed).X
    rows = frame.astype(object).where(frame.notna(), None).to_dict(orient="records")
    return [{"id": f"{prefix}{i:06d}", "features": row} for i, row in enumerate(rows)]


def serving(replica: Replica) -> dict[str, str]:
    """Campaign -> model@version, as the replica's /readyz reports it."""
    campaigns: dict[str, str] = replica.client.get("/readyz").json()["campaigns"]
    return campaigns
