"""Replicas over real processes: one shared log, one id per decision, shared promotions.

Each replica is a separate ``upshot serve`` process on its own port, sharing the model
registry, the campaign file and the decision log, as replicas behind a load balancer do.
"""

from __future__ import annotations

import random
import threading
import time
from collections import Counter
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import httpx
import pytest
from replica_support import (
    CAMPAIGN,
    MODEL,
    SYNC_SECONDS,
    Replica,
    customers,
    serving,
    start_replica,
    wait_ready,
)

from service.decisions import DecisionLog

# Every test starts three real service processes (~30 s on a busy 2-core machine).
pytestmark = pytest.mark.slow

# Promotions must reach the other replica within this long: one poll interval plus the
# time to load and verify a small model on a busy 2-core machine (our budget, no source).
PROPAGATION_S = SYNC_SECONDS + 10.0


@pytest.fixture
def pair(
    models_dir: Path, campaigns_file: Path, log_url: str, tmp_path: Path
) -> Iterator[tuple[Replica, Replica]]:
    yield from _pair(models_dir, campaigns_file, log_url, tmp_path)


@pytest.fixture
def sqlite_pair(
    models_dir: Path, campaigns_file: Path, sqlite_log_url: str, tmp_path: Path
) -> Iterator[tuple[Replica, Replica]]:
    yield from _pair(models_dir, campaigns_file, sqlite_log_url, tmp_path)


def _pair(
    models_dir: Path, campaigns_file: Path, log_url: str, tmp_path: Path
) -> Iterator[tuple[Replica, Replica]]:
    a = start_replica("a", models_dir, campaigns_file, log_url, tmp_path)
    # B runs two worker processes (`upshot serve --workers 2`): three processes in all.
    b = start_replica("b", models_dir, campaigns_file, log_url, tmp_path, workers=2)
    try:
        wait_ready(a)
        wait_ready(b)
        yield a, b
    finally:
        a.stop()
        b.stop()


def _logged(log_url: str) -> list[Any]:
    with DecisionLog.open(log_url) as log:
        return list(log.iter_decisions(CAMPAIGN))


def _wait_for(predicate: Any, timeout: float) -> float:
    start = time.monotonic()
    while time.monotonic() - start < timeout:
        if predicate():
            return time.monotonic() - start
        time.sleep(0.1)
    raise AssertionError(f"not true within {timeout} s")


def test_same_request_on_two_replicas_is_one_decision(
    pair: tuple[Replica, Replica], log_url: str
) -> None:
    a, b = pair
    people = customers(20, seed=11, prefix="LTC-R")
    answers = []
    for person in people:
        body = {"campaign": CAMPAIGN, "customer": person}
        first, second = (
            a.client.post("/v1/score", json=body),
            b.client.post("/v1/score", json=body),
        )
        assert first.status_code == second.status_code == 200, (first.text, second.text)
        assert first.json()["decision_id"] == second.json()["decision_id"]
        assert first.json()["propensity"] == second.json()["propensity"]
        answers.append(first.json())
    rows = _logged(log_url)
    assert sorted(r.decision_id for r in rows) == sorted(x["decision_id"] for x in answers)

    # An outcome posted through one replica is seen by the other's lift report.
    outcomes = [{"decision_id": x["decision_id"], "outcome": i % 2} for i, x in enumerate(answers)]
    recorded = b.client.post("/v1/outcomes", json={"outcomes": outcomes})
    assert recorded.status_code == 200, recorded.text
    assert recorded.json()["recorded"] == len(outcomes)
    again = a.client.post("/v1/outcomes", json={"outcomes": outcomes})
    assert again.json()["unchanged"] == len(outcomes)
    lift = a.client.get(f"/v1/campaigns/{CAMPAIGN}/lift")
    assert lift.status_code == 200, lift.text
    assert lift.json()["decisions"] == len(answers)


def test_promotion_and_reload_through_one_replica_reach_the_other(
    sqlite_pair: tuple[Replica, Replica], campaigns_file: Path
) -> None:
    # Propagation goes through the shared registry and campaign file, not the log.
    a, b = sqlite_pair
    assert serving(a)[CAMPAIGN] == serving(b)[CAMPAIGN] == f"{MODEL}@v0001"
    promoted = a.client.post(
        f"/v1/admin/models/{MODEL}/promote", json={"version": "v0002", "reason": "test"}
    )
    assert promoted.status_code == 200, promoted.text
    assert serving(a)[CAMPAIGN] == f"{MODEL}@v0002"
    waited = _wait_for(lambda: serving(b)[CAMPAIGN] == f"{MODEL}@v0002", PROPAGATION_S)
    assert waited < PROPAGATION_S
    person = customers(1, seed=12, prefix="LTC-P")[0]
    answer = b.client.post("/v1/score", json={"campaign": CAMPAIGN, "customer": person})
    assert answer.json()["model"] == {"name": MODEL, "version": "v0002"}

    # A second campaign added to the shared file and reloaded through B serves on A.
    text = campaigns_file.read_text(encoding="utf-8")
    campaigns_file.write_text(
        text + text.replace(f"campaigns.{CAMPAIGN}", "campaigns.winback"), encoding="utf-8"
    )
    assert b.client.post("/v1/admin/campaigns/reload").status_code == 200
    _wait_for(lambda: "winback" in serving(a), PROPAGATION_S)
    assert serving(a)["winback"] == f"{MODEL}@v0002"


def test_sigkill_under_concurrent_load_loses_no_acknowledged_decision(
    pair: tuple[Replica, Replica], log_url: str
) -> None:
    a, b = pair
    people = customers(240, seed=13, prefix="LTC-K")
    acked: list[tuple[str, str]] = []  # (customer id, decision id) answered with 200
    lock = threading.Lock()
    rng = random.Random(2026)

    def send(replicas: list[Replica], chunk: list[dict[str, Any]]) -> None:
        for i, person in enumerate(chunk):
            # Every other request goes to both replicas: a retry after a timeout.
            targets = replicas if i % 2 == 0 else [replicas[i % 4 // 2]]
            for replica in targets:
                try:
                    answer = replica.client.post(
                        "/v1/score", json={"campaign": CAMPAIGN, "customer": person}
                    )
                except httpx.TransportError:
                    continue  # the killed replica: not acknowledged
                if answer.status_code == 200:
                    with lock:
                        acked.append((person["id"], answer.json()["decision_id"]))

    threads = [
        threading.Thread(target=send, args=([a, b] if k % 2 else [b, a], people[k::4]))
        for k in range(4)
    ]
    for thread in threads:
        thread.start()
    time.sleep(rng.uniform(0.5, 3.0))  # a random moment under load
    a.kill()
    for thread in threads:
        thread.join(timeout=300)
    assert not any(t.is_alive() for t in threads)

    rows = _logged(log_url)
    logged = Counter(r.decision_id for r in rows)
    per_customer = Counter(r.customer_id for r in rows)
    assert acked, "no request was acknowledged"
    missing = {d for _, d in acked} - set(logged)
    assert not missing, f"{len(missing)} acknowledged decisions are not in the log"
    assert max(logged.values()) == 1
    assert max(per_customer.values()) == 1  # the same request on both replicas: one record
    assert len({d for _, d in acked}) == len({c for c, _ in acked})
    survivors = sum(1 for c, _ in acked if c in {p["id"] for p in people[-20:]})
    assert survivors > 0, "the surviving replica stopped answering"
