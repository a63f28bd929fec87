"""An acknowledged decision survives the process being killed right after append returns
(both engines: SQLite fsyncs its WAL, PostgreSQL commits with synchronous_commit = on)."""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import textwrap

from service.decisions import DecisionLog

# The child builds records itself; ids and fields mirror the conftest factory.
_CHILD_PRELUDE = textwrap.dedent(
    """
    import asyncio, os, signal, sys
    from service.decisions import DecisionLog, DecisionRecord, decision_id

    def record(i):
        features = {"tenure_months": i % 40, "plan": "classic"}
        return DecisionRecord(
            decision_id=decision_id("larkspur-renewal", f"LTC-{i:06d}", "p" * 64,
                                    "larkspur/v0001", features, 40.0),
            created_at="2026-03-01T09:00:00+00:00", campaign="larkspur-renewal",
            customer_id=f"LTC-{i:06d}", model_name="larkspur", model_version="v0001",
            policy_hash="p" * 64, features=features, value=40.0, arms=["email", "call"],
            tau=[0.05, 0.12], low=[0.01, 0.02], high=[0.09, 0.22], mu0=0.4, action="none",
            expected_value=0.0, explored=False, holdout=True, do_not_contact=False,
            propensity=0.2, action_probs={"none": 0.2, "email": 0.75, "call": 0.05},
            mode="score",
        )

    log = DecisionLog.open(sys.argv[1])
    """
)


def _run_child(body: str, path: str) -> subprocess.Popen[str]:
    return subprocess.Popen(
        [sys.executable, "-c", _CHILD_PRELUDE + textwrap.dedent(body), str(path)],
        stdout=subprocess.PIPE,
        text=True,
    )


def test_record_survives_sigkill_right_after_append_sync(location: str) -> None:
    path = location
    child = _run_child(
        """
        log.append_sync([record(1), record(2)])
        os.kill(os.getpid(), signal.SIGKILL)
        """,
        path,
    )
    child.communicate(timeout=60)
    assert child.returncode == -signal.SIGKILL
    with DecisionLog.open(path) as log:
        stored = list(log.iter_decisions("larkspur-renewal"))
    assert [r.customer_id for r in stored] == ["LTC-000001", "LTC-000002"]


def test_every_acknowledged_decision_survives_a_kill_mid_stream(location: str) -> None:
    # The child appends from 16 concurrent tasks (group commit) and prints each id once
    # its append has returned; the parent kills it while appends are still in flight.
    path = location
    child = _run_child(
        """
        async def worker(start):
            for i in range(start, 10**9, 16):
                r = record(i)
                await log.append([r])
                print(r.decision_id, flush=True)

        async def main():
            await asyncio.gather(*(worker(s) for s in range(16)))

        asyncio.run(main())
        """,
        path,
    )
    assert child.stdout is not None
    acknowledged = [child.stdout.readline().strip() for _ in range(400)]
    os.kill(child.pid, signal.SIGKILL)
    rest, _ = child.communicate(timeout=60)
    # Lines the child printed before dying were acknowledged too.
    acknowledged += [line for line in rest.splitlines() if len(line) == 32]
    assert child.returncode == -signal.SIGKILL
    with DecisionLog.open(path) as log:
        missing = [d for d in acknowledged if log.get(d) is None]
        stored = log.records_written + sum(1 for _ in log.iter_decisions("larkspur-renewal"))
    assert missing == []
    assert stored >= len(acknowledged) >= 400
