"""Benchmark the scoring service over loopback against its ceilings, in one run.

1. ``GET /healthz`` (the HTTP stack's ceiling) and ``POST /v1/score`` (one customer per
   request, 20,000 distinct customers cycled) driven by ``wrk`` (Debian package ``wrk``;
   a Lua script supplies the bodies), with 1 and with 2 worker processes
   (``upshot serve --workers N``) and 8 and 32 open connections: throughput, p50 and
   p99, ratios side by side. Every score waits for its durable commit, so with few
   connections the disk's commit latency bounds the rate: at most ``connections /
   commit time`` per second even with free CPU. The run measures that latency first (a
   SQLite commit in WAL mode with ``synchronous=FULL``, as the log does) and prints the
   bound beside the rows; at 32 connections group commit lifts it and the CPU rules.
2. ``POST /v1/score/batch`` and ``POST /v1/rank`` with 100,000 customers in column form
   (1 worker): time, customers/s, and the server's peak resident memory above idle
   during the request (``/proc/<pid>/clear_refs`` resets the peak, ``VmHWM`` reads it).
   The model's share is timed in-process on the same 100,000 customers
   (``predict_interval`` of the form the service serves, compact by default), so the
   rest is the service's.
3. A ranked list of 1,000,000 candidates through the engine's chunk API
   (``decide_chunk`` -> ``rank_chunks`` -> ``emit_columns`` -> the SQLite log, 100,000
   per chunk), in a separate process: time, model share, peak memory. One request of a
   million customers would exceed the service's default body and batch limits; this is
   the path a file or Dask source drives.

Every decision is committed to the SQLite decision log (WAL, ``synchronous=FULL``)
before its response is sent, as in production. Targets (issue 8): single score >= 0.5x
the trivial endpoint, its p99 <= 3x the trivial p99; batch and rank >= 25,000
customers/s with peak memory <= 300 MB above idle.

Usage::

    python bench/serve.py                      # trains the demo-sized gbm S-learner first
    python bench/serve.py --base linear --bootstrap 3   # a light model: overheads dominate
    python bench/serve.py --models-dir models  # reuse a registry with a larkspur champion

The machine has 2 cores; wrk and the server share them. Run it on a quiet machine, with
``nice`` on a shared one, and read the ratios (measured side by side) before the rates.
"""

from __future__ import annotations

import argparse
import json
import os
import re
import resource
import shutil
import socket
import statistics
import subprocess
import sys
import tempfile
import time
from dataclasses import dataclass, replace
from pathlib import Path

import orjson
import pandas as pd

from service.registry import ModelRegistry
from service.simulation import simulate

ROOT = Path(__file__).resolve().parents[1]
CAMPAIGNS = ROOT / "campaigns" / "larkspur.toml"
CAMPAIGN = "larkspur-renewal"
MODEL = "larkspur"
_UNITS = {"us": 1e-3, "ms": 1.0, "s": 1e3}
Timings = dict[str, list[tuple[float, float]]]


@dataclass
class Load:
    """What one wrk phase measured."""

    name: str
    rate: float
    p50: float
    p99: float
    errors: int


# -- wrk ---------------------------------------------------------------------------------


def _wrk(url: str, seconds: float, connections: int, script: Path | None, name: str) -> Load:
    command = ["wrk", "-t1", f"-c{connections}", f"-d{seconds:g}s", "--latency", url]
    if script is not None:
        # A fresh tag makes every request's customer id one the log has not seen (a
        # repeated id would be an idempotent retry, which inserts nothing).
        command[1:1] = ["-s", str(script)]
        command += ["--", f"{name.replace(' ', '')}-{time.time_ns()}"]
    out = subprocess.run(command, check=True, capture_output=True, text=True).stdout
    rate = float(re.search(r"Requests/sec:\s+([\d.]+)", out).group(1))  # type: ignore[union-attr]
    quantiles = {
        q: float(v) * _UNITS[unit]
        for q, v, unit in re.findall(r"^\s+(50|99)%\s+([\d.]+)(us|ms|s)\s*$", out, re.M)
    }
    errors = sum(int(n) for n in re.findall(r"Non-2xx or 3xx responses: (\d+)", out))
    errors += sum(int(n) for n in re.findall(r"(?:connect|read|write|timeout) (\d+)", out))
    return Load(name, rate, quantiles["50"], quantiles["99"], errors)


def _score_script(path: Path, n: int) -> Path:
    """A wrk Lua script cycling through the features of ``n`` customers, each request
    with a new customer id (the tag given after ``--`` and a counter)."""
    _, frame = _customers(n, seed=11)
    records = frame.astype(object).where(frame.notna(), None).to_dict("records")
    lines = ["local heads, tails = {}, {}"]
    for features in records:
        body = orjson.dumps(
            {"campaign": CAMPAIGN, "customer": {"id": "@ID@", "features": features}}
        )
        head, tail = body.decode().split("@ID@")
        lines.append(f"heads[#heads + 1] = [==[{head}]==]; tails[#tails + 1] = [==[{tail}]==]")
    lines += [
        "local i, n, tag = 0, 0, 'wrk'",
        "function init(args) if #args > 0 then tag = args[1] end end",
        'local headers = {["Content-Type"] = "application/json"}',
        "request = function()",
        "  i = i % #heads + 1",
        "  n = n + 1",
        '  local body = heads[i] .. tag .. "-" .. n .. tails[i]',
        '  return wrk.format("POST", "/v1/score", headers, body)',
        "end",
    ]
    path.write_text("\n".join(lines), encoding="utf-8")
    return path


# -- the server ----------------------------------------------------------------------------


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        port: int = s.getsockname()[1]
        return port


def _start_server(models_dir: Path, log: Path, port: int, workers: int) -> subprocess.Popen[bytes]:
    env = {
        **{k: v for k, v in os.environ.items() if not k.startswith("UPSHOT_")},
        "UPSHOT_MODELS_DIR": str(models_dir),
        "UPSHOT_CAMPAIGNS_FILE": str(CAMPAIGNS),
        "UPSHOT_DECISION_LOG": str(log),
        "UPSHOT_LOG_LEVEL": "warning",
    }
    command = [sys.executable, "-m", "service.commands.serve", "serve", "--port", str(port),
               "--workers", str(workers)]  # fmt: skip
    server = subprocess.Popen(command, env=env)
    deadline = time.time() + 180
    while time.time() < deadline:
        if _ready(port) and (workers == 1 or len(_children(server.pid)) >= workers):
            # every worker has answered at least once
            if all(_ready(port) for _ in range(4 * workers)):
                return server
        if server.poll() is not None:
            raise SystemExit("the server exited during start-up")
        time.sleep(0.25)
    server.terminate()
    raise SystemExit("the server did not become ready within 180 s")


def _ready(port: int) -> bool:
    try:
        with socket.create_connection(("127.0.0.1", port), timeout=5) as s:
            s.sendall(_request("GET", "/readyz", None, port))
            return b" 200 " in s.recv(64)
    except OSError:
        return False


def _children(pid: int) -> list[int]:
    found = []
    for entry in Path("/proc").iterdir():
        if entry.name.isdigit():
            try:
                stat = (entry / "stat").read_text().rsplit(")", 1)[1].split()
            except OSError:
                continue
            if int(stat[1]) == pid:
                found.append(int(entry.name))
    return found


def _stop(server: subprocess.Popen[bytes]) -> None:
    server.terminate()
    server.wait(timeout=60)


def _request(method: str, path: str, body: bytes | None, port: int) -> bytes:
    head = f"{method} {path} HTTP/1.1\r\nHost: 127.0.0.1:{port}\r\n"
    if body is None:
        return (head + "\r\n").encode()
    head += f"Content-Type: application/json\r\nContent-Length: {len(body)}\r\n\r\n"
    return head.encode() + body


def _status_kb(pid: int, field: str) -> int:
    for line in Path(f"/proc/{pid}/status").read_text().splitlines():
        if line.startswith(field + ":"):
            return int(line.split()[1])
    raise RuntimeError(f"{field} not in /proc/{pid}/status")


def _timed(port: int, request: bytes, pid: int) -> tuple[float, float, int]:
    """Seconds, peak RSS above idle (MB) of the server process, and the response size."""
    idle = _status_kb(pid, "VmRSS")
    Path(f"/proc/{pid}/clear_refs").write_text("5")  # reset VmHWM to the current RSS
    with socket.create_connection(("127.0.0.1", port)) as s:
        start = time.perf_counter()
        s.sendall(request)
        reader = s.makefile("rb")
        status = int(reader.readline().split()[1])
        length = 0
        while (line := reader.readline()) not in (b"\r\n", b""):
            name, _, value = line.partition(b":")
            if name.strip().lower() == b"content-length":
                length = int(value)
        body = reader.read(length)
        seconds = time.perf_counter() - start
    if status != 200:
        raise SystemExit(f"request failed with {status}: {body[:300]!r}")
    peak = _status_kb(pid, "VmHWM")
    return seconds, (peak - idle) / 1024, len(body)


# -- data and model ------------------------------------------------------------------------


def _train(models_dir: Path, n: int, learner: str, base: str, n_bootstrap: int) -> None:
    from service.training import train_model

    sim = simulate(MODEL, n=n, random_state=0)
    _progress(f"training {MODEL}: learner={learner}, base={base}, {n} rows, "
              f"{n_bootstrap} bootstraps ...")  # fmt: skip
    result = train_model(
        sim.to_frame(), treatment=sim.treatment_name, outcome=sim.outcome_name,
        features=list(sim.X.columns), learner=learner, base=base, name=MODEL,
        models_dir=models_dir, n_bootstrap=n_bootstrap, random_state=0,
    )  # fmt: skip
    ModelRegistry(models_dir).promote(MODEL, result.version, actor="bench", reason="benchmark")


def _customers(n: int, seed: int) -> tuple[list[str], pd.DataFrame]:
    sim = simulate(MODEL, n=n, random_state=seed)
    return [f"BENCH-{seed}-{i:07d}" for i in range(n)], sim.X


def _columns(ids: list[str], frame: pd.DataFrame) -> dict[str, list[object]]:
    columns: dict[str, list[object]] = {"id": list(ids)}
    for name in frame.columns:
        column = frame[name]
        columns[str(name)] = column.astype(object).where(column.notna(), None).tolist()
    return columns


# -- the million-row ranked list (child process) -------------------------------------------


def _big_rank(models_dir: Path, log_path: Path, n: int, chunk: int, capacity: int) -> None:
    """Rank ``n`` candidates through the chunk API; print a JSON line of what it took."""
    from service.decisions import DecisionLog
    from service.policy import load_campaigns
    from service.scoring import bind_campaigns, decide_chunk, emit_columns, rank_chunks
    from service.scoring.collector import paused

    bound = bind_campaigns(ModelRegistry(models_dir), load_campaigns(CAMPAIGNS)).get(CAMPAIGN)
    model = bound.model
    spent = {"model": 0.0, "source": 0.0}
    estimate = model.estimate

    def timed_estimate(table, level, **options):  # type: ignore[no-untyped-def]
        start = time.perf_counter()
        try:
            return estimate(table, level, **options)
        finally:
            spent["model"] += time.perf_counter() - start

    model.estimate = timed_estimate  # type: ignore[method-assign]
    base_kb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    log = DecisionLog.open(log_path)
    start = time.perf_counter()

    def work() -> int:
        chunks = []
        for k, first in enumerate(range(0, n, chunk)):
            size = min(chunk, n - first)
            t = time.perf_counter()  # the source (a file, in production) is not timed
            ids, frame = _customers(size, seed=1000 + k)
            columns = {k2: v for k2, v in _columns(ids, frame).items() if k2 != "id"}
            spent["source"] += time.perf_counter() - t
            table = bound.schema.table_from_columns(columns, size)
            decided = decide_chunk(bound, ids, table, None, first_row=first)
            # Keep what emitting needs; the per-row reason lists are for responses only.
            chunks.append(replace(decided, batch=replace(decided.batch, reasons=[]),
                                  input_reasons=[]))  # fmt: skip
        all_ids = [i for c in chunks for i in c.ids]
        ranking = rank_chunks(bound, all_ids, [c.batch for c in chunks],
                              capacity=capacity, budget=None)  # fmt: skip
        offset = 0
        for decided in chunks:
            log.append_columns_sync([emit_columns(decided, ranking, offset)])
            offset += len(decided)
        return int(ranking.result.listed.sum())

    listed = paused(work)
    seconds = time.perf_counter() - start - spent["source"]
    log.close()
    peak_kb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    print(json.dumps({"seconds": seconds, "model": spent["model"], "listed": listed,
                      "peak_mb": peak_kb / 1024, "base_mb": base_kb / 1024}))  # fmt: skip


# -- main ------------------------------------------------------------------------------------


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--models-dir", type=Path, help="registry with a larkspur champion")
    parser.add_argument("--train-rows", type=int, default=20000)
    parser.add_argument("--learner", default="s", choices=["s", "t", "x", "dr"])
    parser.add_argument("--base", default="gbm", choices=["gbm", "linear"])
    parser.add_argument("--bootstrap", type=int, default=20)
    parser.add_argument("--seconds", type=float, default=10.0)
    parser.add_argument("--connections", default="8,32", help="comma-separated wrk -c values")
    parser.add_argument("--batch", type=int, default=100_000)
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--big", type=int, default=1_000_000, help="ranked list size; 0: skip")
    parser.add_argument("--big-child", nargs=2, type=Path, help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.big_child:
        _big_rank(*args.big_child, n=args.big, chunk=100_000, capacity=50_000)
        return
    if shutil.which("wrk") is None:
        raise SystemExit("wrk is not installed; apt-get install wrk (Debian package 'wrk').")

    with tempfile.TemporaryDirectory(prefix="upshot-bench-") as tmp_dir:
        tmp = Path(tmp_dir)
        models_dir = args.models_dir or tmp / "models"
        if args.models_dir is None:
            _train(models_dir, args.train_rows, args.learner, args.base, args.bootstrap)
        version = ModelRegistry(models_dir).champion(MODEL)
        script = _score_script(tmp / "score.lua", 20000)
        commit_ms = _commit_latency(tmp)
        loads: dict[tuple[int, int], tuple[Load, Load]] = {}
        for workers in (1, 2):
            port = _free_port()
            server = _start_server(models_dir, tmp / f"decisions-{workers}.sqlite3", port,
                                   workers)  # fmt: skip
            try:
                for connections in _connections(args):
                    loads[workers, connections] = _single(args, port, script, workers,
                                                          connections)  # fmt: skip
                if workers == 1:
                    batch = _batches(args, port, server.pid)
            finally:
                _stop(server)
        model_seconds = _in_process(models_dir, args)
        big = _big(args, models_dir, tmp) if args.big else None
    _report(args, version, loads, batch, model_seconds, big, commit_ms)


def _connections(args: argparse.Namespace) -> list[int]:
    return [int(c) for c in str(args.connections).split(",")]


def _single(
    args: argparse.Namespace, port: int, script: Path, workers: int, connections: int
) -> tuple[Load, Load]:
    url = f"http://127.0.0.1:{port}"
    _progress(f"{workers} worker(s), {connections} connections: GET /healthz and "
              f"POST /v1/score, {args.seconds:g} s each")  # fmt: skip
    _wrk(url + "/healthz", 2, connections, None, "warm-up")
    health = _wrk(url + "/healthz", args.seconds, connections, None, "GET /healthz")
    _wrk(url + "/v1/score", 2, connections, script, "warm-up")
    score = _wrk(url + "/v1/score", args.seconds, connections, script, "POST /v1/score")
    return health, score


def _commit_latency(tmp: Path, commits: int = 200) -> float:
    """Median milliseconds of a durable commit of 8 rows on this disk (WAL, FULL sync)."""
    import sqlite3

    conn = sqlite3.connect(tmp / "commit-probe.sqlite3", isolation_level=None)
    conn.execute("PRAGMA journal_mode = WAL")
    conn.execute("PRAGMA synchronous = FULL")
    conn.execute("CREATE TABLE t (id INTEGER PRIMARY KEY, body TEXT)")
    times = []
    for _ in range(commits):
        start = time.perf_counter()
        conn.execute("BEGIN IMMEDIATE")
        conn.executemany("INSERT INTO t (body) VALUES (?)", [("x" * 500,)] * 8)
        conn.execute("COMMIT")
        times.append(time.perf_counter() - start)
    conn.close()
    return 1e3 * statistics.median(times)


def _batches(
    args: argparse.Namespace, port: int, pid: int
) -> dict[str, list[tuple[float, float]]]:
    """Each repeat sends customers the log has not seen: a repeated request would be an
    idempotent retry (same decision ids, nothing new to insert) and time far less."""
    _progress(f"POST /v1/score/batch and /v1/rank with {args.batch:,} customers ...")
    out: Timings = {"batch": [], "rank": []}
    for r in range(args.repeats):
        ids, frame = _customers(args.batch, seed=23 + r)
        body = {"campaign": CAMPAIGN, "columns": _columns(ids, frame)}
        batch = _request("POST", "/v1/score/batch", orjson.dumps(body), port)
        out["batch"].append(_timed(port, batch, pid)[:2])
        del batch
        ids = [f"R{i}" for i in ids]  # new candidates for the ranked list too
        body = {"campaign": CAMPAIGN, "columns": {**body["columns"], "id": ids}, "capacity": 5000}
        ranked = _request("POST", "/v1/rank", orjson.dumps(body), port)
        out["rank"].append(_timed(port, ranked, pid)[:2])
    return out


def _in_process(models_dir: Path, args: argparse.Namespace) -> list[float]:
    from service.scoring.estimates import load_servable

    _progress("in-process predictions of the same model, in the form the service serves ...")
    _, frame = _customers(args.batch, seed=23)
    registry = ModelRegistry(models_dir)
    _, served = load_servable(registry, MODEL, str(registry.champion(MODEL)))
    model = getattr(served, "compiled", None) or getattr(served, "model")  # noqa: B009
    times = []
    for _ in range(args.repeats):
        start = time.perf_counter()
        model.predict_interval(frame, confidence=0.8)
        times.append(time.perf_counter() - start)
    return times


def _big(args: argparse.Namespace, models_dir: Path, tmp: Path) -> dict[str, float]:
    _progress(f"a ranked list of {args.big:,} candidates through the chunk API ...")
    command = [sys.executable, __file__, "--big", str(args.big), "--big-child",
               str(models_dir), str(tmp / "big.sqlite3")]  # fmt: skip
    out = subprocess.run(command, check=True, capture_output=True, text=True).stdout
    result: dict[str, float] = json.loads(out.strip().splitlines()[-1])
    return result


def _progress(message: str) -> None:
    print(message, file=sys.stderr, flush=True)


def _report(
    args: argparse.Namespace,
    version: str | None,
    loads: dict[tuple[int, int], tuple[Load, Load]],
    batch: Timings,
    model_seconds: list[float],
    big: dict[str, float] | None,
    commit_ms: float,
) -> None:
    n = args.batch
    print()
    trained = (
        f"{args.learner}-learner, {args.base}, {args.bootstrap} bootstraps"
        if args.models_dir is None
        else f"from {args.models_dir}"
    )
    print(f"model {MODEL}:{version} ({trained}); wrk -t1, {args.seconds:g} s per phase; "
          f"{os.cpu_count()} cores, load average {os.getloadavg()[0]:.1f}")  # fmt: skip
    print(
        f"a durable commit on this disk takes {commit_ms:.2f} ms (median; SQLite WAL, "
        "synchronous=FULL), so c connections can get at most c / that many scores/s"
    )
    print(f"{'workers':<8}{'conns':<6}{'phase':<18}{'req/s':>10}{'p50 ms':>9}{'p99 ms':>9}"
          f"{'errors':>8}{'x healthz':>11}{'p99 x':>8}{'commit bound':>14}")  # fmt: skip
    for (workers, connections), (health, score) in loads.items():
        for load in (health, score):
            ratio = load.rate / health.rate
            p99 = load.p99 / health.p99
            bound = f"{connections / commit_ms * 1e3:>14,.0f}" if load is score else ""
            print(f"{workers:<8}{connections:<6}{load.name:<18}{load.rate:>10,.0f}"
                  f"{load.p50:>9.2f}{load.p99:>9.2f}{load.errors:>8}{ratio:>10.2f}x"
                  f"{p99:>7.2f}x{bound}")  # fmt: skip
    print()
    model = statistics.median(model_seconds)
    print(f"{n:,} customers, column form, 1 worker; median of {args.repeats}; peak RSS is the "
          "server's, above idle, worst of the runs")  # fmt: skip
    print(f"{'path':<40}{'seconds':>9}{'customers/s':>13}{'peak MB':>9}{'w/o model /s':>14}")
    print(f"{'in-process predict_interval (served form)':<40}{model:>9.2f}{n / model:>13,.0f}")
    for key, name in (
        ("batch", "POST /v1/score/batch"),
        ("rank", "POST /v1/rank (capacity 5000)"),
    ):
        seconds = statistics.median(t for t, _ in batch[key])
        peak = max(m for _, m in batch[key])
        rest = seconds - model
        print(f"{name:<40}{seconds:>9.2f}{n / seconds:>13,.0f}{peak:>9.0f}"
              f"{n / rest if rest > 0 else float('inf'):>14,.0f}")  # fmt: skip
    if big is not None:
        rest = big["seconds"] - big["model"]
        print(f"{f'rank {args.big:,}, chunk API, in-process':<40}{big['seconds']:>9.2f}"
              f"{args.big / big['seconds']:>13,.0f}{big['peak_mb'] - big['base_mb']:>9.0f}"
              f"{args.big / rest:>14,.0f}")  # fmt: skip
        print(f"  (model {big['model']:.1f} s of it; peak RSS {big['peak_mb']:.0f} MB in all, "
              f"{big['base_mb']:.0f} MB after loading; {big['listed']:,.0f} listed)")  # fmt: skip
    print()
    print(
        "'w/o model /s': customers per second of the time left after the model's share "
        "(the in-process prediction), i.e. what the service adds."
    )


if __name__ == "__main__":
    main()
