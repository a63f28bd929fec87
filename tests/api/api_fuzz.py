"""Fuzz the real service with schemathesis: shared by tests/api/test_api_fuzz.py and
bench/fuzz.py.

:func:`serve` runs ``upshot serve`` as a uvicorn process on loopback (the demo campaign's
name, keys of every role); :func:`fuzz` generates requests for every operation of its
OpenAPI document, valid (positive) and schema-violating (negative), sends each with
every given set of headers, and counts requests, server errors (5xx) and responses that
break the declared contract (status, content type, headers, body schema).
"""

from __future__ import annotations

import os
import socket
import subprocess
import sys
import time
from collections import Counter
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import httpx
import requests
import schemathesis
from hypothesis import HealthCheck, Phase, given, seed, settings
from hypothesis.errors import Unsatisfiable
from schemathesis import GenerationMode
from schemathesis.checks import (
    content_type_conformance,
    not_a_server_error,
    response_headers_conformance,
    response_schema_conformance,
    status_code_conformance,
)

from service.api.auth import hash_key, new_key

DEMO_CAMPAIGN = "larkspur-renewal"
KEYS = {role: new_key() for role in ("scorer", "analyst", "admin")}
CHECKS = [
    not_a_server_error,
    status_code_conformance,
    content_type_conformance,
    response_headers_conformance,
    response_schema_conformance,
]


def campaign_toml(model: str = "larkspur") -> str:
    """The demo campaign (invented Larkspur Tea Club), scored with ``model``."""
    return f"""
[campaigns.{DEMO_CAMPAIGN}]
model = "{model}"
value = 40.0
exploration = 0.05
holdout = 0.10
capacity = 500
salt = "fuzz"
suppression = ["LTC-000007"]
[campaigns.{DEMO_CAMPAIGN}.arms]
email = {{ cost = 0.40 }}
call = {{ cost = 3.50 }}
"""


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        port: int = s.getsockname()[1]
        return port


@contextmanager
def serve(models: Path, root: Path, **env: str) -> Iterator[str]:
    """Run ``upshot serve`` on a free loopback port; yield its base URL; stop it."""
    campaigns = root / "campaigns.toml"
    campaigns.write_text(campaign_toml(), encoding="utf-8")
    port = _free_port()
    keys = ",".join(f"fuzz-{role}:{role}:{hash_key(key)}" for role, key in KEYS.items())
    environment = {
        **os.environ,
        "UPSHOT_MODELS_DIR": str(models),
        "UPSHOT_CAMPAIGNS_FILE": str(campaigns),
        "UPSHOT_DECISION_LOG": str(root / "decisions.sqlite3"),
        "UPSHOT_API_KEYS": keys,
        "UPSHOT_LOG_LEVEL": "warning",
        **env,
    }
    stderr = root / "server.log"
    command = [sys.executable, "-m", "service.commands.serve", "serve", "--port", str(port)]
    with stderr.open("wb") as sink:
        process = subprocess.Popen(command, env=environment, stdout=sink, stderr=sink)
    url = f"http://127.0.0.1:{port}"
    try:
        _wait_ready(url, process, stderr)
        yield url
    finally:
        process.terminate()
        process.wait(timeout=30)


def _wait_ready(url: str, process: subprocess.Popen[bytes], stderr: Path) -> None:
    deadline = time.monotonic() + 120
    while time.monotonic() < deadline:
        if process.poll() is not None:
            raise RuntimeError(f"server exited: {stderr.read_text()[-2000:]}")
        try:
            if httpx.get(f"{url}/readyz", timeout=2).status_code == 200:
                return
        except httpx.TransportError:
            pass
        time.sleep(0.2)
    raise RuntimeError(f"server not ready in 120 s: {stderr.read_text()[-2000:]}")


@dataclass
class FuzzResult:
    """What a fuzz run saw."""

    requests: int = 0
    server_errors: int = 0
    violations: int = 0
    statuses: Counter[int] = field(default_factory=Counter)
    by_operation: Counter[str] = field(default_factory=Counter)
    examples: list[str] = field(default_factory=list)

    def note(self, where: str, kind: str, text: str) -> None:
        if len(self.examples) < 20:
            self.examples.append(f"{kind} on {where}: {text[:600]}")


def fuzz(
    url: str,
    *,
    max_examples: int,
    headers: dict[str, dict[str, str]],
    random_seed: int = 0,
    document: dict[str, Any] | None = None,
) -> FuzzResult:
    """Send generated requests to every operation at ``url``, once per ``headers`` entry.

    ``max_examples`` cases are generated per operation and generation mode (positive and
    negative), so an operation gets about ``2 * max_examples * len(headers)`` requests.
    ``document`` replaces the service's own OpenAPI document (to check the checks).
    """
    if document is None:
        document = httpx.get(f"{url}/openapi.json", timeout=30).json()
    schema = schemathesis.openapi.from_dict(document)
    result = FuzzResult()
    session = requests.Session()
    for operation in schema.get_all_operations():
        op = operation.ok()
        for mode in (GenerationMode.POSITIVE, GenerationMode.NEGATIVE):
            _run(op, mode, url, session, headers, max_examples, random_seed, result)
    return result


def _run(
    op: Any,
    mode: GenerationMode,
    url: str,
    session: requests.Session,
    headers: dict[str, dict[str, str]],
    max_examples: int,
    random_seed: int,
    result: FuzzResult,
) -> None:
    where = f"{op.method.upper()} {op.path}"

    @seed(random_seed)
    @settings(
        max_examples=max_examples,
        deadline=None,
        database=None,
        phases=[Phase.generate],
        suppress_health_check=list(HealthCheck),
    )
    @given(case=op.as_strategy(generation_mode=mode))
    def one(case: Any) -> None:
        for who, extra in headers.items():
            response = case.call(base_url=url, session=session, headers=extra, timeout=30)
            result.requests += 1
            result.statuses[response.status_code] += 1
            result.by_operation[where] += 1
            if response.status_code >= 500:
                result.server_errors += 1
                result.note(where, f"{response.status_code} ({who})", response.text)
                continue
            try:
                case.validate_response(response, checks=CHECKS[1:], headers=extra)
            except (Exception, BaseExceptionGroup) as failure:  # every failed check counts
                result.violations += 1
                result.note(where, f"violation ({who}, {mode.value})", str(failure))

    try:
        one()
    except Unsatisfiable:
        pass  # nothing to violate (an operation without parameters or body, negative mode)


def key_headers(*roles: str) -> dict[str, dict[str, str]]:
    """Header sets: one per role named (``"none"`` sends no key)."""
    return {
        role: ({} if role == "none" else {"Authorization": f"Bearer {KEYS[role]}"})
        for role in roles
    }
