"""Benchmark the scoring service over loopback against its ceilings.

One run, one uvicorn worker, 8 concurrent keep-alive connections:

1. single-customer ``POST /v1/score`` throughput and p50/p99 latency against the
   trivial ``GET /healthz`` of the same server (the ceiling of the HTTP stack);
2. ``POST /v1/score/batch`` and ``POST /v1/rank`` with 100,000 customers in column form
   against the same model's in-process vectorised prediction (``predict_interval`` of
   the compiled model on a DataFrame, the fastest in-process path; ``--sklearn`` also
   times ``BootstrapUplift.predict_interval``). The ratio uses the fastest in-process
   time, so it is conservative.

Targets (issue 4): single-score throughput >= 0.5x the trivial endpoint; batch >= 0.4x
in-process. Every decision is committed to the SQLite decision log (WAL,
``synchronous=FULL``) before its response is sent, as in production.

Usage::

    python bench/serve.py                      # trains a demo-sized gbm model first
    python bench/serve.py --base linear        # a light model: overheads dominate
    python bench/serve.py --models-dir models  # reuse a registry with a larkspur champion

The load generator is a small asyncio HTTP/1.1 client (no third-party tool), run in this
process while the server runs in its own; the machine has 2 cores, one for each.
"""

from __future__ import annotations

import argparse
import asyncio
import os
import socket
import statistics
import subprocess
import sys
import tempfile
import time
from collections.abc import Callable, Iterator
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import orjson
import pandas as pd

from service.registry import ModelRegistry
from service.simulation import simulate
from service.uplift.compiled import compile_model

ROOT = Path(__file__).resolve().parents[1]
CAMPAIGNS = ROOT / "campaigns" / "larkspur.toml"
CAMPAIGN = "larkspur-renewal"
MODEL = "larkspur"


@dataclass
class Load:
    """What a load phase measured."""

    name: str
    requests: int
    seconds: float
    latencies: list[float]
    errors: int

    @property
    def rate(self) -> float:
        return self.requests / self.seconds

    def quantile(self, q: float) -> float:
        return float(np.quantile(self.latencies, q)) * 1e3 if self.latencies else float("nan")


# -- load generator ----------------------------------------------------------------------


def _request(method: str, path: str, body: bytes | None, port: int) -> bytes:
    head = f"{method} {path} HTTP/1.1\r\nHost: 127.0.0.1:{port}\r\n"
    if body is None:
        return (head + "\r\n").encode()
    head += f"Content-Type: application/json\r\nContent-Length: {len(body)}\r\n\r\n"
    return head.encode() + body


async def _read_response(reader: asyncio.StreamReader) -> tuple[int, bytes]:
    head = await reader.readuntil(b"\r\n\r\n")
    status = int(head[9:12])
    length = 0
    for line in head.split(b"\r\n")[1:]:
        name, _, value = line.partition(b":")
        if name.strip().lower() == b"content-length":
            length = int(value)
    body = await reader.readexactly(length) if length else b""
    return status, body


async def _worker(
    port: int,
    next_request: Callable[[], bytes],
    stop_at: float,
    measure_from: float,
    out: Load,
) -> None:
    reader, writer = await asyncio.open_connection("127.0.0.1", port)
    try:
        while (start := time.perf_counter()) < stop_at:
            writer.write(next_request())
            status, _ = await _read_response(reader)
            end = time.perf_counter()
            if start >= measure_from:
                out.requests += 1
                out.latencies.append(end - start)
                out.errors += status != 200
    finally:
        writer.close()


async def _load(
    name: str, port: int, make: Callable[[], bytes], seconds: float, connections: int
) -> Load:
    warm = 1.0
    begin = time.perf_counter()
    out = Load(name, 0, seconds, [], 0)
    await asyncio.gather(
        *(
            _worker(port, make, begin + warm + seconds, begin + warm, out)
            for _ in range(connections)
        )
    )
    return out


async def _one(port: int, request: bytes) -> tuple[float, int, bytes]:
    reader, writer = await asyncio.open_connection("127.0.0.1", port, limit=2**30)
    try:
        start = time.perf_counter()
        writer.write(request)
        status, body = await _read_response(reader)
        return time.perf_counter() - start, status, body
    finally:
        writer.close()


# -- setup -------------------------------------------------------------------------------


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        port: int = s.getsockname()[1]
        return port


def _train(models_dir: Path, n: int, base: str, n_bootstrap: int) -> None:
    from service.training import train_model

    sim = simulate(MODEL, n=n, random_state=0)
    _progress(f"training {MODEL}: T-learner, base={base}, {n} rows, {n_bootstrap} bootstraps ...")
    result = train_model(
        sim.to_frame(), treatment=sim.treatment_name, outcome=sim.outcome_name,
        features=list(sim.X.columns), learner="t", base=base, name=MODEL,
        models_dir=models_dir, n_bootstrap=n_bootstrap, random_state=0,
    )  # fmt: skip
    ModelRegistry(models_dir).promote(MODEL, result.version, actor="bench", reason="benchmark")


def _start_server(models_dir: Path, log: Path, port: int) -> subprocess.Popen[bytes]:
    env = {
        **os.environ,
        "UPSHOT_MODELS_DIR": str(models_dir),
        "UPSHOT_CAMPAIGNS_FILE": str(CAMPAIGNS),
        "UPSHOT_DECISION_LOG": str(log),
        "UPSHOT_LOG_LEVEL": "warning",
    }
    command = [
        sys.executable, "-m", "uvicorn", "--factory", "service.api.app:app_from_env",
        "--host", "127.0.0.1", "--port", str(port), "--workers", "1", "--no-access-log",
        "--log-level", "warning",
    ]  # fmt: skip
    server = subprocess.Popen(command, env=env)
    deadline = time.time() + 120
    while time.time() < deadline:
        try:
            with socket.create_connection(("127.0.0.1", port), timeout=0.5) as s:
                s.sendall(_request("GET", "/readyz", None, port))
                if b" 200 " in s.recv(64):
                    return server
        except OSError:
            pass
        if server.poll() is not None:
            raise SystemExit("the server exited during start-up")
        time.sleep(0.25)
    server.terminate()
    raise SystemExit("the server did not become ready within 120 s")


def _customers(n: int, seed: int) -> tuple[list[str], pd.DataFrame]:
    sim = simulate(MODEL, n=n, random_state=seed)
    ids = [f"BENCH-{seed}-{i:07d}" for i in range(n)]
    return ids, sim.X


def _score_bodies(n: int) -> Iterator[bytes]:
    ids, frame = _customers(n, seed=11)
    records = frame.astype(object).where(frame.notna(), None).to_dict("records")
    while True:
        for cid, features in zip(ids, records, strict=True):
            yield orjson.dumps(
                {"campaign": CAMPAIGN, "customer": {"id": cid, "features": features}}
            )


def _columns_body(ids: list[str], frame: pd.DataFrame, extra: dict[str, object]) -> bytes:
    columns: dict[str, object] = {"id": ids}
    for name in frame.columns:
        column = frame[name]
        columns[name] = column.astype(object).where(column.notna(), None).tolist()
    return orjson.dumps({"campaign": CAMPAIGN, "columns": columns, **extra})


# -- main --------------------------------------------------------------------------------


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--models-dir", type=Path, help="registry with a larkspur champion")
    parser.add_argument("--train-rows", type=int, default=20000)
    parser.add_argument("--base", default="gbm", choices=["gbm", "linear"])
    parser.add_argument("--bootstrap", type=int, default=20)
    parser.add_argument("--seconds", type=float, default=10.0)
    parser.add_argument("--connections", type=int, default=8)
    parser.add_argument("--batch", type=int, default=100_000)
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument(
        "--sklearn",
        action="store_true",
        help="also time the scikit-learn path in-process (slow for gbm models)",
    )
    args = parser.parse_args()

    with tempfile.TemporaryDirectory(prefix="upshot-bench-") as tmp:
        models_dir = args.models_dir or Path(tmp) / "models"
        if args.models_dir is None:
            _train(models_dir, args.train_rows, args.base, args.bootstrap)
        port = _free_port()
        server = _start_server(models_dir, Path(tmp) / "decisions.sqlite3", port)
        try:
            _run(args, models_dir, port)
        finally:
            server.terminate()
            server.wait(timeout=30)


def _run(args: argparse.Namespace, models_dir: Path, port: int) -> None:
    bodies = _score_bodies(20000)
    trivial = _request("GET", "/healthz", None, port)

    def next_score() -> bytes:
        return _request("POST", "/v1/score", next(bodies), port)

    _progress(f"GET /healthz for {args.seconds:g} s ...")
    health = asyncio.run(_load("GET /healthz", port, lambda: trivial, args.seconds,
                               args.connections))  # fmt: skip
    _progress(f"POST /v1/score for {args.seconds:g} s ...")
    single = asyncio.run(_load("POST /v1/score", port, next_score, args.seconds,
                               args.connections))  # fmt: skip

    ids, frame = _customers(args.batch, seed=23)
    batch_body = _request("POST", "/v1/score/batch", _columns_body(ids, frame, {}), port)
    rank_body = _request("POST", "/v1/rank", _columns_body(ids, frame, {"capacity": 5000}), port)
    _progress(f"POST /v1/score/batch and /v1/rank with {args.batch:,} customers ...")
    batch_times = [_timed(port, batch_body) for _ in range(args.repeats)]
    rank_times = [_timed(port, rank_body) for _ in range(args.repeats)]

    _progress("in-process predictions of the same model ...")
    bundle = ModelRegistry(models_dir).load(MODEL)
    models = {"compiled": compile_model(bundle.model)}
    if args.sklearn:
        models["scikit-learn"] = bundle.model
    in_process: dict[str, list[float]] = {name: [] for name in models}
    for _ in range(args.repeats):
        for name, model in models.items():
            start = time.perf_counter()
            model.predict_interval(frame, confidence=0.8)
            in_process[name].append(time.perf_counter() - start)

    _report(args, health, single, batch_times, rank_times, in_process, len(batch_body),
            bundle.version)  # fmt: skip


def _progress(message: str) -> None:
    print(message, file=sys.stderr, flush=True)


def _timed(port: int, request: bytes) -> float:
    seconds, status, body = asyncio.run(_one(port, request))
    if status != 200:
        raise SystemExit(f"batch request failed with {status}: {body[:300]!r}")
    return seconds


def _report(
    args: argparse.Namespace,
    health: Load,
    single: Load,
    batch: list[float],
    ranked: list[float],
    in_process: dict[str, list[float]],
    body_bytes: int,
    version: str,
) -> None:
    n = args.batch
    rows = [
        (health.name, f"{health.rate:,.0f} req/s", f"{health.quantile(0.5):.2f}",
         f"{health.quantile(0.99):.2f}", health.errors),
        (single.name, f"{single.rate:,.0f} req/s", f"{single.quantile(0.5):.2f}",
         f"{single.quantile(0.99):.2f}", single.errors),
    ]  # fmt: skip
    print()
    print(f"model {MODEL}:{version}; {args.connections} keep-alive connections, one uvicorn "
          f"worker, {args.seconds:g} s per phase, {os.cpu_count()} cores")  # fmt: skip
    print(f"{'phase':<24}{'throughput':>16}{'p50 ms':>10}{'p99 ms':>10}{'errors':>8}")
    for name, rate, p50, p99, errors in rows:
        print(f"{name:<24}{rate:>16}{p50:>10}{p99:>10}{errors:>8}")
    print()
    print(f"{n:,} customers, column form ({body_bytes / 1e6:.1f} MB request); median of "
          f"{args.repeats}")  # fmt: skip
    print(f"{'path':<40}{'seconds':>10}{'customers/s':>14}")
    phases = [(f"in-process predict_interval, {name}", t) for name, t in in_process.items()]
    phases += [("POST /v1/score/batch", batch), ("POST /v1/rank (capacity 5000)", ranked)]
    for name, times in phases:
        median = statistics.median(times)
        print(f"{name:<40}{median:>10.2f}{n / median:>14,.0f}")
    print()
    # The ceiling is the faster of the two in-process paths, so the ratio is conservative.
    fastest = min(statistics.median(t) for t in in_process.values())
    ratio_single = single.rate / health.rate
    ratio_batch = fastest / statistics.median(batch)
    ratio_rank = fastest / statistics.median(ranked)
    print(f"single-score / trivial throughput: {ratio_single:.2f}x (target >= 0.5x)")
    print(f"batch / in-process throughput:     {ratio_batch:.2f}x (target >= 0.4x)")
    print(f"rank / in-process throughput:      {ratio_rank:.2f}x")


if __name__ == "__main__":
    main()
