"""Decision-log throughput and heavy reads, on SQLite and (optionally) PostgreSQL.

Writes: ``python bench/decision_log.py [--appends 2000] [--postgres URL]`` compares group
commit with one transaction per append call (every append waits for its COMMIT, as the
service does before answering): append calls per second, records per second and records
per transaction.

Bulk path: ``python bench/decision_log.py --copy --postgres URL`` compares COPY through a
staging table with one INSERT per row, for calls of 100 to 10,000 decisions.

Reads: ``python bench/decision_log.py --reads 400000 [--postgres URL]`` builds a log of that
many decisions with outcomes, then runs each way of reading a campaign's window for the
realized lift (read, then campaign_lift) in its own process and prints wall time and peak
memory (RSS) above the process's baseline, side by side: ``records`` rebuilds one
DecisionRecord per decision (what the first release's read_logged did, re-implemented here
on the new store), ``arrays`` is read_logged(detail=False) (what lift reads now), ``detail``
is read_logged() with ids and feature text (what replay, export and drift read).
"""

from __future__ import annotations

import argparse
import asyncio
import json
import os
import subprocess
import sys
import tempfile
import time
from collections.abc import Callable
from pathlib import Path

import numpy as np

from service.decisions import JOINED, DecisionColumns, DecisionLog, DecisionRecord, decision_id
from service.decisions.outcomes import Outcome
from service.loop import LoggedDecisions

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
    location: str, group_limit: int, appends: int, concurrency: int, per_append: int
) -> tuple[float, float, float]:
    with DecisionLog.open(location, group_limit=group_limit) as log:
        start = time.perf_counter()
        asyncio.run(_run(log, appends, concurrency, per_append))
        seconds = time.perf_counter() - start
        records, commits = log.records_written, log.commits
    return appends / seconds, records / seconds, records / max(commits, 1)


def _columns(start: int, n: int, created_at: str, rng: np.random.Generator) -> DecisionColumns:
    """n fictional Larkspur Tea Club decisions in column form (ids start..start+n)."""
    ids = [f"LTC-{i:07d}" for i in range(start, start + n)]
    features = [
        json.dumps(
            {"cups_logged_last_30d": i % 90, "monthly_spend": 12.0 + i % 25, "plan": "classic",
             "region": "north", "signup_channel": "web", "support_tickets_90d": i % 4,
             "tenure_months": i % 60},
            sort_keys=True, separators=(",", ":"),
        )
        for i in range(start, start + n)
    ]  # fmt: skip
    holdout = rng.random(n) < 0.1
    action = np.where(holdout, 0, rng.choice(3, size=n, p=[0.3, 0.6, 0.1])).astype(np.intp)
    probs = np.tile([0.3, 0.6, 0.1], (n, 1))
    tau = rng.normal(0.05, 0.02, size=(n, 2))
    return DecisionColumns(
        campaign="larkspur-renewal", model_name="larkspur", model_version="v0001",
        policy_hash=_POLICY, arms=("email", "call"), mode="score", created_at=created_at,
        decision_id=[decision_id("larkspur-renewal", c, _POLICY, "larkspur/v0001", {}, 40.0)
                     for c in ids],
        customer_id=ids, features=features, value=np.full(n, 40.0), tau=tau, low=tau - 0.03,
        high=tau + 0.03, mu0=np.full(n, 0.4), action=action, expected_value=np.ones(n),
        explored=rng.random(n) < 0.05, holdout=holdout,
        do_not_contact=np.zeros(n, dtype=bool), action_probs=probs,
    )  # fmt: skip


def _build(location: str, n: int) -> float:
    rng = np.random.default_rng(0)
    start = time.perf_counter()
    with DecisionLog.open(location) as log:
        for first in range(0, n, 10_000):
            size = min(10_000, n - first)
            minute = first // 10_000
            at = f"2026-03-01T{minute // 60:02d}:{minute % 60:02d}:00+00:00"
            batch = _columns(first, size, at, rng)
            log.append_columns_sync([batch])
            y = rng.random(size) < 0.3
            log.record_outcomes(
                [Outcome(d, float(v)) for d, v in zip(batch.decision_id, y, strict=True)]
            )
    return time.perf_counter() - start


_CAMPAIGN = """
[campaigns.larkspur-renewal]
model = "larkspur"
value = 40.0
salt = "bench"
[campaigns.larkspur-renewal.arms]
email = { cost = 0.4 }
call = { cost = 3.5 }
"""


def _records_read(log: DecisionLog) -> LoggedDecisions:
    """The first release's read: a DecisionRecord per decision, then arrays from them."""
    from service.decisions.record import from_row

    rows = [
        (from_row(row[:-2]), row[-2])
        for chunk in log.iter_joined("larkspur-renewal", JOINED)
        for row in chunk
    ]
    records = [r for r, _ in rows]
    labels = ["none", *records[0].arms]
    index = {label: j for j, label in enumerate(labels)}
    return LoggedDecisions(
        campaign="larkspur-renewal", since=None, until=None, labels=labels,
        outcome=np.array([np.nan if y is None else y for _, y in rows], dtype=float),
        action=np.array([index[r.action] for r in records], dtype=np.intp),
        action_probs=np.array([[r.action_probs[k] for k in labels] for r in records]),
        holdout=np.array([r.holdout for r in records], dtype=bool),
        explored=np.array([r.explored for r in records], dtype=bool),
        value=np.array([r.value for r in records], dtype=float),
        tau=np.array([r.tau for r in records], dtype=float),
        mu0=np.array([r.mu0 for r in records], dtype=float),
        first_at=records[0].created_at, last_at=records[-1].created_at,
    )  # fmt: skip


def _child(location: str, mode: str, campaigns: str) -> None:
    from service.loop import campaign_lift, read_logged
    from service.policy import load_campaigns

    campaign = load_campaigns(campaigns)["larkspur-renewal"]
    base = _reset_peak()
    start = time.perf_counter()
    with DecisionLog.open(location) as log:
        if mode == "records":
            logged = _records_read(log)
        else:
            logged = read_logged(log, "larkspur-renewal", detail=mode == "detail")
        campaign_lift(logged, campaign)
    seconds = time.perf_counter() - start
    peak = _status_kb("VmHWM")
    print(json.dumps({"seconds": seconds, "peak_mb": (peak - base) / 1024}))


def _status_kb(key: str) -> int:
    for line in Path("/proc/self/status").read_text().splitlines():
        if line.startswith(key + ":"):
            return int(line.split()[1])
    raise SystemExit(f"/proc/self/status has no {key}; this bench needs Linux")


def _reset_peak() -> int:
    """Reset the peak RSS (Linux: clear_refs 5), so imports do not count; the RSS now."""
    Path("/proc/self/clear_refs").write_text("5")
    return _status_kb("VmRSS")


def _reads(locations: dict[str, str], n: int, folder: Path) -> None:
    campaigns = folder / "campaigns.toml"
    campaigns.write_text(_CAMPAIGN, encoding="utf-8")
    print(f"{n:,} decisions with outcomes; one process per cell; peak RSS above baseline")
    print(f"{'engine':<12}{'read':<10}{'seconds':>9}{'peak MB':>9}")
    for engine, location in locations.items():
        print(f"{engine:<12}{'(build)':<10}{_build(location, n):>9.1f}")
        for mode in ("records", "arrays", "detail"):
            out = subprocess.run(
                [sys.executable, __file__, "--child", location, mode, str(campaigns)],
                capture_output=True, text=True,
            )  # fmt: skip
            if out.returncode:
                raise SystemExit(out.stderr)
            cell = json.loads(out.stdout.strip().splitlines()[-1])
            print(f"{engine:<12}{mode:<10}{cell['seconds']:>9.1f}{cell['peak_mb']:>9.0f}")


def _writes(locations: dict[str, Callable[[str], str]], appends: int) -> None:
    cases = [(1, 1), (8, 1), (64, 1), (8, 100), (2, 1000)]
    print(f"{appends} append calls per cell (fewer for big calls); each waits for its commit")
    header = f"{'engine':<12}{'mode':<22}{'tasks':>6}{'rec/call':>9}{'calls/s':>10}"
    print(header + f"{'records/s':>11}{'rec/commit':>12}")
    for engine, location_for in locations.items():
        for concurrency, per_append in cases:
            calls_n = appends if per_append == 1 else max(appends * 5 // per_append, 10)
            for label, limit in (("one per transaction", 1), ("group commit", 1000)):
                where = location_for(f"g{limit}_c{concurrency}_b{per_append}")
                calls, records, per_commit = _measure(
                    where, limit, calls_n, concurrency, per_append
                )
                print(
                    f"{engine:<12}{label:<22}{concurrency:>6}{per_append:>9}{calls:>10.0f}"
                    f"{records:>11.0f}{per_commit:>12.1f}"
                )


def _copy_vs_insert(admin_url: str) -> None:
    """PostgreSQL bulk path: COPY into a staging table vs one INSERT per row."""
    import service.decisions.postgres as engine

    rng = np.random.default_rng(0)
    print("postgresql bulk appends (one task): records/s")
    print(f"{'rows/call':>10}{'row INSERTs':>13}{'COPY':>9}{'ratio':>7}")
    for size in (100, 1000, 10_000):
        batches = [
            _columns(i * size, size, "2026-03-01T00:00:00+00:00", rng)
            for i in range(max(20_000 // size, 3))
        ]
        speeds = []
        for copy_min in (10**9, 1):
            engine._COPY_MIN = copy_min
            url = _fresh_postgres(admin_url, f"upshot_bench_copy_{size}_{min(copy_min, 2)}")
            with DecisionLog.open(url) as log:
                start = time.perf_counter()
                for batch in batches:
                    log.append_columns_sync([batch])
                speeds.append(size * len(batches) / (time.perf_counter() - start))
        print(f"{size:>10}{speeds[0]:>13.0f}{speeds[1]:>9.0f}{speeds[1] / speeds[0]:>7.1f}")


def _fresh_postgres(admin_url: str, name: str) -> str:
    import psycopg

    with psycopg.connect(admin_url, autocommit=True) as conn:
        conn.execute(f"DROP DATABASE IF EXISTS {name} WITH (FORCE)")  # type: ignore[call-overload]
        conn.execute(f"CREATE DATABASE {name}")  # type: ignore[call-overload]
    base, _, _ = admin_url.rpartition("/")
    return f"{base}/{name}"


def main() -> None:
    if len(sys.argv) > 1 and sys.argv[1] == "--child":
        _child(*sys.argv[2:5])
        return
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--appends", type=int, default=2000, help="append calls per cell")
    parser.add_argument("--reads", type=int, default=0, help="decisions for the read table")
    parser.add_argument("--copy", action="store_true", help="PostgreSQL: COPY vs INSERT")
    parser.add_argument(
        "--postgres",
        default=os.environ.get("UPSHOT_TEST_POSTGRES_URL"),
        help="a PostgreSQL URL whose user may create databases (optional)",
    )
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        if args.copy:
            if not args.postgres:
                raise SystemExit("--copy needs --postgres URL (or UPSHOT_TEST_POSTGRES_URL)")
            _copy_vs_insert(args.postgres)
            return
        if args.reads:
            locations = {"sqlite": str(folder / "reads.db")}
            if args.postgres:
                locations["postgresql"] = _fresh_postgres(args.postgres, "upshot_bench_reads")
            _reads(locations, args.reads, folder)
            return
        cells: dict[str, Callable[[str], str]] = {"sqlite": lambda c: str(folder / f"{c}.db")}
        if args.postgres:
            cells["postgresql"] = lambda c: _fresh_postgres(args.postgres, f"upshot_bench_{c}")
        _writes(cells, args.appends)


if __name__ == "__main__":
    main()
