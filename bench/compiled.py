"""Scoring latency and throughput: scikit-learn path, compiled full form, compact form.

Trains each learner (gradient-boosted base, bootstrap intervals) on a seeded simulated
campaign, then prints one table: per-row latency (median and p99 over single-customer
calls, dict in, interval out), batch throughput, agreement of the paths, and the
one-off costs (compile_model, first kernel call with and without numba's cache). The
compact serving form (the full-data fit plus a model of the bootstrap spread, as
``upshot train`` makes it) is timed beside the compiled full form in the same run.

Run: ``python bench/compiled.py`` (about 15 minutes on 2 cores; ``--quick`` for a
smaller run; ``--design larkspur --learners s`` for a model like the demo's: S-learner,
two arms). Timings depend on what else the machine is doing; run it on a quiet one.
"""

from __future__ import annotations

import argparse
import os
import pickle
import subprocess
import sys
import tempfile
import time
from collections.abc import Callable
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
from threadpoolctl import threadpool_limits

from service.uplift import BootstrapUplift, make_learner
from service.uplift.compact import compact_form, fit_spread_models
from service.uplift.compiled import CompiledUplift, compile_model

FIRST_CALL = """
import pickle, sys, time
from service.uplift.compiled import CompiledUplift
with open(sys.argv[1], "rb") as handle:
    model = pickle.load(handle)
start = time.perf_counter()
model.warm_up()
print(time.perf_counter() - start)
"""


DESIGN = "groups"


def _campaign(n: int, seed: int) -> tuple[pd.DataFrame, np.ndarray, np.ndarray]:
    """Features, outcome and treatment of a seeded randomized campaign."""
    try:
        from service.simulation import simulate
    except ImportError:
        return _local_campaign(n, seed)
    sim = simulate(DESIGN, n, random_state=seed)
    return sim.X, sim.y, sim.treatment


def _local_campaign(n: int, seed: int) -> tuple[pd.DataFrame, np.ndarray, np.ndarray]:
    rng = np.random.default_rng(seed)
    X = pd.DataFrame(rng.normal(size=(n, 6)), columns=[f"x{i}" for i in range(1, 7)])
    X["segment"] = rng.choice(np.array(list("abcd"), dtype=object), n)
    t = rng.integers(0, 2, n)
    logit = -1 + 0.5 * X["x1"] + t * (0.4 * X["x2"] - 0.3 * (X["segment"] == "a"))
    y = (rng.random(n) < 1 / (1 + np.exp(-logit))).astype(float)
    return X, y, t


def _timings(call: Callable[[Any], Any], items: list[Any]) -> np.ndarray:
    """Wall time of each call, in microseconds."""
    out = np.empty(len(items))
    for i, item in enumerate(items):
        start = time.perf_counter_ns()
        call(item)
        out[i] = (time.perf_counter_ns() - start) / 1e3
    return out


def _first_call(compiled: CompiledUplift) -> tuple[float, float]:
    """Seconds of the first kernel call in a fresh process: empty cache, then warm."""
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "compiled.pkl"
        path.write_bytes(pickle.dumps(compiled))
        env = {**os.environ, "NUMBA_CACHE_DIR": str(Path(tmp) / "numba")}
        runs = [
            subprocess.run(
                [sys.executable, "-c", FIRST_CALL, str(path)],
                env=env,
                check=True,
                capture_output=True,
                text=True,
            )
            for _ in range(2)
        ]
    cold, cached = (float(run.stdout.strip()) for run in runs)
    return cold, cached


def _bench(name: str, args: argparse.Namespace) -> list[tuple[str, str, str]]:
    X, y, t = _campaign(args.rows, seed=0)
    start = time.perf_counter()
    with threadpool_limits(1):  # fitting only; OpenMP spin-waits on a busy machine
        model = BootstrapUplift(
            make_learner(name, base="gbm", random_state=0),
            n_bootstrap=args.bootstrap,
            random_state=0,
        ).fit(X, y, t)
    fit_s = time.perf_counter() - start
    start = time.perf_counter()
    compiled = compile_model(model, warm_up=False)
    compile_s = time.perf_counter() - start
    cold_s, cached_s = _first_call(compiled)
    compiled.warm_up()

    pool, _, _ = _campaign(args.batch, seed=1)
    rows = pool.iloc[: args.singles].to_dict("records")
    compiled_row = _timings(compiled.predict_row, rows)
    with threadpool_limits(1):  # one row: extra threads only add overhead
        sklearn_row = _timings(
            lambda row: model.predict_interval(pd.DataFrame([row])), rows[: args.sk_singles]
        )

    sample = pool.iloc[: args.sk_batch]
    start = time.perf_counter()
    expected = model.predict_interval(sample)
    sklearn_batch = time.perf_counter() - start
    start = time.perf_counter()
    with threadpool_limits(1):
        model.predict_interval(sample)
    sklearn_batch_1 = time.perf_counter() - start
    start = time.perf_counter()
    got = compiled.predict_interval(pool)
    compiled_batch = time.perf_counter() - start
    encoded = compiled.encode(pool)
    start = time.perf_counter()
    compiled.predict_interval(encoded, n_threads=1)
    compiled_encoded_1 = time.perf_counter() - start
    gap = max(
        float(np.max(np.abs(a[: len(sample)] - b))) for a, b in zip(got, expected, strict=True)
    )

    trained = compiled.encode(X)
    with threadpool_limits(1):
        spread = fit_spread_models(compiled, trained, seed=0)
    compact = compact_form(model, spread)
    compact.warm_up()
    compact_row = _timings(compact.predict_row, rows)
    start = time.perf_counter()
    lean = compact.predict_interval(encoded, n_threads=1)
    compact_encoded_1 = time.perf_counter() - start
    start = time.perf_counter()
    compact.predict_interval(pool)
    compact_batch = time.perf_counter() - start
    full_1 = compiled.predict_interval(encoded, n_threads=1)
    point_gap = max(float(np.max(np.abs(lean[k] - full_1[k]))) for k in (0, 1))

    p = compiled.program
    size = f"{len(p.tree_roots)} trees, {len(p.node_head)} nodes"
    n = len(pool)
    return [
        (name, "model", f"{args.bootstrap} replicates, {size}, fit {fit_s:.0f} s"),
        (name, "row, scikit-learn (1 thread)", _latency(sklearn_row)),
        (name, "row, compiled (dict in)", _latency(compiled_row)),
        (name, "batch, scikit-learn (frame, all cores)", _rate(len(sample), sklearn_batch)),
        (name, "batch, scikit-learn (frame, 1 thread)", _rate(len(sample), sklearn_batch_1)),
        (name, "batch, compiled (frame, all cores)", _rate(n, compiled_batch)),
        (name, "batch, compiled (encoded, 1 thread)", _rate(n, compiled_encoded_1)),
        (name, "max |compiled - scikit-learn|", f"{gap:.1e}"),
        (name, "compact form", f"{len(compact.program.tree_roots)} trees"),
        (name, "row, compact (dict in)", _latency(compact_row)),
        (name, "batch, compact (frame, all cores)", _rate(n, compact_batch)),
        (name, "batch, compact (encoded, 1 thread)", _rate(n, compact_encoded_1)),
        (
            name,
            "compact / full, encoded, 1 thread",
            f"{compiled_encoded_1 / compact_encoded_1:.1f}x",
        ),
        (name, "max |compact - full| (uplift, control)", f"{point_gap:.1e}"),
        (name, "compile_model", f"{compile_s:.2f} s"),
        (name, "first call, empty numba cache", f"{cold_s:.2f} s"),
        (name, "first call, numba cache warm", f"{cached_s:.3f} s"),
    ]


def _rate(n: int, seconds: float) -> str:
    return f"{n / seconds:,.0f} rows/s (n={n:,})"


def _latency(micros: np.ndarray) -> str:
    median, p99 = np.median(micros), np.percentile(micros, 99)
    return f"median {median:,.0f} us, p99 {p99:,.0f} us (n={len(micros)})"


def main() -> None:
    global DESIGN
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--learners", default="t,dr")
    parser.add_argument("--design", default=DESIGN, help="simulation design (service.simulation)")
    parser.add_argument("--rows", type=int, default=20_000, help="training rows")
    parser.add_argument("--bootstrap", type=int, default=20)
    parser.add_argument("--singles", type=int, default=2000, help="single-row calls, compiled")
    parser.add_argument("--sk-singles", type=int, default=200, help="single-row calls, sklearn")
    parser.add_argument("--batch", type=int, default=100_000, help="batch rows, compiled")
    parser.add_argument("--sk-batch", type=int, default=10_000, help="batch rows, sklearn")
    parser.add_argument("--quick", action="store_true", help="small sizes, for a smoke run")
    args = parser.parse_args()
    DESIGN = args.design
    if args.quick:
        args.rows, args.bootstrap, args.singles, args.sk_singles, args.batch = (
            3000,
            3,
            200,
            20,
            5000,
        )
    print(f"cpus={os.cpu_count()} load={os.getloadavg()[0]:.1f} (1-min average), design {DESIGN}")
    lines = [line for name in args.learners.split(",") for line in _bench(name, args)]
    width = max(len(what) for _, what, _ in lines)
    print(f"| learner | {'measure':<{width}} | result |")
    print(f"|---|{'-' * (width + 2)}|---|")
    for name, what, result in lines:
        print(f"| {name} | {what:<{width}} | {result} |")
    print(f"load={os.getloadavg()[0]:.1f} (1-min average) at the end")


if __name__ == "__main__":
    main()
