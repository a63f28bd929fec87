"""A real uvicorn process on loopback for the end-to-end loop test."""

from __future__ import annotations

import os
import socket
import subprocess
import sys
import time
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

import httpx


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        port: int = s.getsockname()[1]
        return port


@contextmanager
def serving(
    models_dir: Path, campaigns_file: Path, log_path: Path, *, timeout: float = 60.0
) -> Iterator[httpx.Client]:
    """Start ``uvicorn`` with the service on a free loopback port; yield a client."""
    port = free_port()
    env = {
        **os.environ,
        "UPSHOT_MODELS_DIR": str(models_dir),
        "UPSHOT_CAMPAIGNS_FILE": str(campaigns_file),
        "UPSHOT_DECISION_LOG": str(log_path),
        "UPSHOT_COMPILED": "false",
        "OMP_NUM_THREADS": "1",
    }
    command = [
        sys.executable, "-m", "uvicorn", "--factory", "service.api.app:app_from_env",
        "--host", "127.0.0.1", "--port", str(port), "--log-level", "warning",
    ]  # fmt: skip
    output = log_path.with_name(log_path.name + ".server.txt")
    with output.open("wb") as sink:
        process = subprocess.Popen(command, env=env, stdout=sink, stderr=subprocess.STDOUT)
    base = f"http://127.0.0.1:{port}"
    try:
        with httpx.Client(base_url=base, timeout=60.0) as client:
            _wait_ready(client, process, output, timeout)
            yield client
    finally:
        process.terminate()
        try:
            process.wait(timeout=10)
        except subprocess.TimeoutExpired:
            process.kill()
            process.wait()


def _wait_ready(
    client: httpx.Client, process: subprocess.Popen[bytes], output: Path, timeout: float
) -> None:
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        if process.poll() is not None:
            text = output.read_text(errors="replace")
            raise RuntimeError(f"the service exited with {process.returncode}:\n{text}")
        try:
            if client.get("/readyz").status_code == 200:
                return
        except httpx.TransportError:
            pass
        time.sleep(0.2)
    raise RuntimeError(f"the service was not ready within {timeout} s")
