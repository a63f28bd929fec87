"""File scoring at scale: ``upshot score --rank`` on a 1M-row Parquet audience.

Run: ``nice python bench/scale.py [--rows 1000000] [--postgres URL]`` (the PostgreSQL
rows need a server: ``--postgres`` or ``$UPSHOT_TEST_POSTGRES_URL``, e.g. from
``scripts/postgres start``; without one they are left out). Builds, once per work
directory: a linear T-learner on 20,000 simulated Larkspur Tea Club customers (invented
demo data) and an audience of ``--rows`` simulated customers in Parquet parts. Then runs
``upshot score DATA --rank --capacity N`` as a child process per set-up (one process or
``--dask local`` with 2 workers; SQLite or PostgreSQL log), each into a fresh log, and
prints wall time (process start-up included), the run's own time (``score_file``, as the
command reports it), the CPU seconds of the command and every process it started (less
sensitive to a busy machine than wall time; last sample, 0.1 s), rows per second of the
run and peak memory (RSS of the command, and of the
command with every process it started, Dask workers included, sampled every 0.1 s).
Last, the log's own insert rate per backend: decisions in column form (10,000 per
append) into a fresh log. Target (issue 9): 1M decided, ranked and logged in <= 60 s,
peak RSS <= 2 GB.
"""

from __future__ import annotations

import argparse
import os
import re
import subprocess
import sys
import tempfile
import time
import uuid
from pathlib import Path
from urllib.parse import urlsplit, urlunsplit

import psutil

CAMPAIGN = "bench-renewal"
CAMPAIGN_TOML = f"""
[campaigns.{CAMPAIGN}]
model = "larkspur"
value = 40.0
exploration = 0.05
holdout = 0.10
capacity = 50000
salt = "bench-scale"

[campaigns.{CAMPAIGN}.arms]
email = {{ cost = 0.40 }}
call = {{ cost = 3.50 }}
"""
_PART_ROWS = 100_000


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", type=int, default=1_000_000)
    parser.add_argument("--capacity", type=int, default=50_000)
    parser.add_argument("--workdir", type=Path, help="keep model and audience here")
    parser.add_argument("--postgres", default=os.environ.get("UPSHOT_TEST_POSTGRES_URL"))
    parser.add_argument("--skip-dask", action="store_true")
    args = parser.parse_args()
    work = args.workdir or Path(tempfile.mkdtemp(prefix="upshot-bench-scale-"))
    work.mkdir(parents=True, exist_ok=True)
    models, campaigns, data = _prepare(work, args.rows)
    backends = ["sqlite"] + (["postgresql"] if args.postgres else [])
    modes = ["one process"] + ([] if args.skip_dask else ["dask local, 2 workers"])
    print(f"audience: {args.rows:,} rows in {len(list(data.glob('*.parquet')))} Parquet "
          f"parts; --rank --capacity {args.capacity:,}; machine: {os.cpu_count()} cores, "
          "shared with other work while measured")  # fmt: skip
    print()
    print(f"| {'set-up':<24} | {'log':<10} | {'wall s':>7} | {'run s':>6} | {'CPU s':>6} | "
          f"{'rows/s':>9} | {'peak RSS cmd':>12} | {'peak RSS all':>12} |")  # fmt: skip
    print(f"|{'-' * 26}|{'-' * 12}|{'-' * 9}|{'-' * 8}|{'-' * 8}|{'-' * 11}|{'-' * 14}|"
          f"{'-' * 14}|")  # fmt: skip
    for backend in backends:
        for mode in modes:
            log, drop = _fresh_log(backend, work, args.postgres)
            try:
                wall, run_s, cpu_s, rss_cmd, rss_all = _run(models, campaigns, data, log, mode,
                                              args.capacity, work)  # fmt: skip
            finally:
                drop()
            print(f"| {mode:<24} | {backend:<10} | {wall:>7.1f} | {run_s:>6.1f} | {cpu_s:>6.1f} | "
                  f"{args.rows / run_s:>9,.0f} | "
                  f"{rss_cmd / 2**20:>9,.0f} MB | {rss_all / 2**20:>9,.0f} MB |")  # fmt: skip
    print()
    print("decision log insert rate (column form, 10,000 decisions per append, fresh log):")
    for backend in backends:
        log, drop = _fresh_log(backend, work, args.postgres)
        try:
            rate = _insert_rate(models, campaigns, log)
        finally:
            drop()
        print(f"  {backend:<10} {rate:>10,.0f} decisions/s")


def _prepare(work: Path, rows: int) -> tuple[Path, Path, Path]:
    models = work / "models"
    campaigns = work / "campaigns.toml"
    campaigns.write_text(CAMPAIGN_TOML, encoding="utf-8")
    if not (models / "larkspur" / "state.json").exists():
        from service.registry import ModelRegistry
        from service.simulation import simulate
        from service.training import train_model

        sim = simulate("larkspur", 20_000, random_state=0)
        result = train_model(
            sim.to_frame(), treatment=sim.treatment_name, outcome=sim.outcome_name,
            features=list(sim.X.columns), learner="t", base="linear", name="larkspur",
            models_dir=models, random_state=0,
        )  # fmt: skip
        ModelRegistry(models).promote("larkspur", result.version, actor="bench", reason="bench")
    data = work / f"audience-{rows}"
    if not data.exists():
        from service.simulation import simulate

        tmp = work / f".audience-{rows}.partial"
        tmp.mkdir()
        for k, start in enumerate(range(0, rows, _PART_ROWS)):
            n = min(_PART_ROWS, rows - start)
            frame = simulate("larkspur", n, random_state=1000 + k).X
            frame.insert(0, "customer_id", [f"LTC-B{start + i:08d}" for i in range(n)])
            frame.to_parquet(tmp / f"part-{k:04d}.parquet", index=False, row_group_size=n)
        tmp.rename(data)
    return models, campaigns, data


def _fresh_log(backend: str, work: Path, admin_url: str | None) -> tuple[str, object]:
    if backend == "sqlite":
        path = work / f"log-{uuid.uuid4().hex[:8]}.sqlite3"

        def drop_file() -> None:
            for p in work.glob(path.name + "*"):
                p.unlink()

        return str(path), drop_file
    import psycopg

    assert admin_url is not None
    name = f"upshot_bench_{uuid.uuid4().hex[:10]}"
    with psycopg.connect(admin_url, autocommit=True) as conn:
        conn.execute(f"CREATE DATABASE {name}")  # type: ignore[call-overload]
    parts = urlsplit(admin_url)
    url = urlunsplit((parts.scheme, parts.netloc, f"/{name}", parts.query, ""))

    def drop_db() -> None:
        with psycopg.connect(admin_url, autocommit=True) as conn:
            conn.execute(f"DROP DATABASE IF EXISTS {name} WITH (FORCE)")  # type: ignore[call-overload]

    return url, drop_db


def _run(
    models: Path, campaigns: Path, data: Path, log: str, mode: str, capacity: int, work: Path
) -> tuple[float, float, float, int, int]:
    out = work / "ranked.parquet"
    command = [
        sys.executable, "-m", "service.cli", "score", str(data), "--campaign", CAMPAIGN,
        "--out", str(out), "--rank", "--capacity", str(capacity), "--campaigns",
        str(campaigns), "--models-dir", str(models), "--decision-log", log, "--quiet",
    ]  # fmt: skip
    if mode.startswith("dask"):
        command += ["--dask", "local", "--workers", "2"]
    env = {**os.environ, "OMP_NUM_THREADS": "1"}
    started = time.perf_counter()
    process = subprocess.Popen(command, env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    parent = psutil.Process(process.pid)
    peak_cmd = peak_all = 0
    cpu: dict[int, float] = {}  # last CPU seconds seen per process of the tree
    while process.poll() is None:
        try:
            tree = [parent, *parent.children(recursive=True)]
            rss = [p.memory_info().rss for p in tree]
            for p in tree:
                times = p.cpu_times()
                cpu[p.pid] = times.user + times.system
        except psutil.Error:
            rss = []
        if rss:
            peak_cmd, peak_all = max(peak_cmd, rss[0]), max(peak_all, sum(rss))
        time.sleep(0.1)
    wall = time.perf_counter() - started
    stdout, stderr = process.communicate()
    if process.returncode != 0:
        raise SystemExit(f"{' '.join(command)} failed:\n{stderr.decode()[-3000:]}")
    text = stdout.decode().strip()
    print(f"  ({mode}): {text}", file=sys.stderr)
    run_s = float(re.search(r" in ([0-9.]+) s$", text).group(1))  # type: ignore[union-attr]
    return wall, run_s, sum(cpu.values()), peak_cmd, peak_all


def _insert_rate(models: Path, campaigns: Path, location: str) -> float:
    import pyarrow as pa

    from service.batch.files import chunk_columns
    from service.decisions import DecisionLog
    from service.policy import load_campaigns
    from service.registry import ModelRegistry
    from service.scoring import bind_campaigns, decide_chunk, emit_columns
    from service.simulation import simulate

    bound = bind_campaigns(ModelRegistry(models), load_campaigns(campaigns)).get(CAMPAIGN)
    batches = []
    for k in range(10):
        frame = simulate("larkspur", 10_000, random_state=5000 + k).X
        frame.insert(0, "customer_id", [f"LTC-I{k}-{i:06d}" for i in range(len(frame))])
        ids, columns, values = chunk_columns(pa.Table.from_pandas(frame), "customer_id", 0)
        table = bound.schema.table_from_columns(columns, len(ids))
        batches.append(emit_columns(decide_chunk(bound, ids, table, values)))
    with DecisionLog.open(location) as log:
        started = time.perf_counter()
        for batch in batches:
            log.append_columns_sync([batch])
        seconds = time.perf_counter() - started
    return sum(len(b) for b in batches) / seconds


if __name__ == "__main__":
    main()
