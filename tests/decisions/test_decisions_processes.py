"""Several processes on one store: the same ids appended at once are stored once each."""

from __future__ import annotations

import subprocess
import sys
import textwrap

from service.decisions import DecisionLog

_CHILD = textwrap.dedent(
    """
    import sys
    from service.decisions import DecisionLog, DecisionRecord, decision_id

    def record(i, who):
        features = {"tenure_months": i % 40, "plan": "classic"}
        return DecisionRecord(
            decision_id=decision_id("larkspur-renewal", f"LTC-{i:06d}", "p" * 64,
                                    "larkspur/v0001", features, 40.0),
            created_at=f"2026-03-01T09:00:00.{who:06d}+00:00", campaign="larkspur-renewal",
            customer_id=f"LTC-{i:06d}", model_name="larkspur", model_version="v0001",
            policy_hash="p" * 64, features=features, value=40.0, arms=["email", "call"],
            tau=[0.05, 0.12], low=[0.01, 0.02], high=[0.09, 0.22], mu0=0.4, action="none",
            expected_value=0.0, explored=False, holdout=True, do_not_contact=False,
            propensity=0.2, action_probs={"none": 0.2, "email": 0.75, "call": 0.05},
            mode="score",
        )

    who = int(sys.argv[2])
    sys.stdin.readline()  # start together
    with DecisionLog.open(sys.argv[1]) as log:
        for start in range(0, 600, 100):  # singles and COPY-sized batches, interleaved
            if start % 200:
                log.append_sync([record(i, who) for i in range(start, start + 100)])
            else:
                for i in range(start, start + 100):
                    log.append_sync([record(i, who)])
        print(log.records_written)
    """
)


def test_two_processes_appending_the_same_ids_store_one_record_each(location: str) -> None:
    DecisionLog.open(location).close()  # schema first, so both children only append
    children = [
        subprocess.Popen(
            [sys.executable, "-c", _CHILD, location, str(who)],
            stdin=subprocess.PIPE,
            stdout=subprocess.PIPE,
            text=True,
        )
        for who in (1, 2)
    ]
    for child in children:
        assert child.stdin is not None
        child.stdin.write("go\n")
        child.stdin.flush()
    written = [int(child.communicate(timeout=120)[0]) for child in children]
    assert all(child.returncode == 0 for child in children)
    assert sum(written) == 600  # every id inserted by exactly one of them
    with DecisionLog.open(location) as log:
        stored = list(log.iter_decisions("larkspur-renewal"))
    assert len(stored) == 600 and len({r.decision_id for r in stored}) == 600
    # Each record is whole: one child's, never a mix.
    assert {r.created_at[-13:-6] for r in stored} <= {".000001", ".000002"}
