"""Decision-log throughput: group commit against one transaction per append call.

Run: ``python bench/decision_log.py [--appends 2000]``. Every append waits for its COMMIT
(WAL, synchronous=FULL), as the service does before answering. Prints a table of append
calls per second, records per second and records per transaction.
"""

from __future__ import annotations

import argparse
import asyncio
import tempfile
import time
from pathlib import Path

from service.decisions import DecisionLog, DecisionRecord, decision_id

_POLICY = "b" * 64


def _record(i: int) -> DecisionRecord:
    # Fictional Larkspur Tea Club customer, the size of a typical scored decision.
    features = {
        "tenure_months": i % 60,
        "monthly_spend": 12.0 + i % 25,
        "cups_logged_last_30d": i % 90,
        "support_tickets_90d": i % 4,
        "plan": "classic",
        "region": "north",
        "signup_channel": "web",
    }
    return DecisionRecord(
        decision_id=decision_id(
            "larkspur-renewal", f"LTC-{i:07d}", _POLICY, "larkspur/v0001", features, 40.0
        ),
        created_at="2026-03-01T09:00:00.000000+00:00",
        campaign="larkspur-renewal",
        customer_id=f"LTC-{i:07d}",
        model_name="larkspur",
        model_version="v0001",
        policy_hash=_POLICY,
        features=features,
        value=40.0,
        arms=["email", "call"],
        tau=[0.051, 0.118],
        low=[0.012, 0.021],
        high=[0.093, 0.221],
        mu0=0.412,
        action="email",
        expected_value=1.64,
        explored=False,
        holdout=False,
        do_not_contact=False,
        propensity=0.8,
        action_probs={"none": 0.15, "email": 0.8, "call": 0.05},
        mode="score",
    )


async def _run(log: DecisionLog, appends: int, concurrency: int, per_append: int) -> None:
    async def worker(start: int) -> None:
        for call in range(start, appends, concurrency):
            base = call * per_append
            await log.append([_record(base + j) for j in range(per_append)])

    await asyncio.gather(*(worker(s) for s in range(concurrency)))


def _measure(
    folder: Path, group_limit: int, appends: int, concurrency: int, per_append: int
) -> tuple[float, float, float]:
    path = folder / f"g{group_limit}-c{concurrency}-b{per_append}.db"
    with DecisionLog.open(path, group_limit=group_limit) as log:
        start = time.perf_counter()
        asyncio.run(_run(log, appends, concurrency, per_append))
        seconds = time.perf_counter() - start
        records, commits = log.records_written, log.commits
    return appends / seconds, records / seconds, records / max(commits, 1)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--appends", type=int, default=2000, help="append calls per cell")
    args = parser.parse_args()
    cases = [(1, 1), (8, 1), (64, 1), (8, 100)]
    print(f"{args.appends} append calls per cell; WAL, synchronous=FULL, commit before return")
    header = f"{'mode':<22}{'tasks':>6}{'rec/call':>9}{'calls/s':>10}{'records/s':>11}"
    print(header + f"{'rec/commit':>12}")
    with tempfile.TemporaryDirectory() as tmp:
        for concurrency, per_append in cases:
            appends = args.appends if per_append == 1 else max(args.appends // 20, 50)
            for label, limit in (("one per transaction", 1), ("group commit", 1000)):
                calls, records, per_commit = _measure(
                    Path(tmp), limit, appends, concurrency, per_append
                )
                print(
                    f"{label:<22}{concurrency:>6}{per_append:>9}{calls:>10.0f}"
                    f"{records:>11.0f}{per_commit:>12.1f}"
                )


if __name__ == "__main__":
    main()
