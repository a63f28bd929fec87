"""The learning loop's statistics at scale: do replay and realized-lift intervals cover?

A logging model trained on a small randomized pilot decides for fresh simulated
Larkspur Tea Club customers (fictional demo design) with exploration and holdout; the
outcomes come from the simulation's true law. On each of ``--reps`` logs, a candidate
model (trained on a larger randomized campaign) is replayed by IPS, SNIPS and DR, and the
realized lift is measured against the randomized control; each interval is checked
against the truth, which the simulation knows. Prints coverage (with a Wilson 95%
interval from statsmodels), mean interval widths and the effective sample size, and
writes them as JSON. The repeated-seeds test in tests/loop runs the same code smaller.

    python bench/loop.py [--reps 500] [--n 5000] [--base linear] [--out bench/results/loop.json]
"""

from __future__ import annotations

import argparse
import json
import sys
import tempfile
import time
from pathlib import Path
from typing import Any

import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent / "tests" / "loop"))  # the shared harness


def _train(models: Path, n: int, seed: int, base: str) -> Any:
    from service.registry import ModelRegistry
    from service.simulation import simulate
    from service.training import train_model

    frame = simulate("larkspur", n, random_state=seed).to_frame()
    result = train_model(
        frame, treatment="treatment", outcome="renewed", control="none", learner="t",
        base=base, name="larkspur", models_dir=models, n_bootstrap=10, n_splits=3,
    )  # fmt: skip
    return ModelRegistry(models).load("larkspur", result.version).model


def _wilson(hits: int, reps: int) -> list[float]:
    from statsmodels.stats.proportion import proportion_confint

    low, high = proportion_confint(hits, reps, alpha=0.05, method="wilson")
    return [float(low), float(high)]


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--reps", type=int, default=500, help="simulated logs (500)")
    parser.add_argument("--n", type=int, default=5000, help="decisions per log (5000)")
    parser.add_argument("--pilot", type=int, default=600, help="rows of the logging model")
    parser.add_argument("--candidate-rows", type=int, default=4000, help="rows of the candidate")
    parser.add_argument("--base", choices=["linear", "gbm"], default="linear")
    parser.add_argument("--exploration", type=float, default=0.2)
    parser.add_argument("--holdout", type=float, default=0.2)
    parser.add_argument("--out", type=Path, default=HERE / "results" / "loop.json")
    args = parser.parse_args()

    from loop_arrays import coverage
    from loop_world import write_campaigns
    from threadpoolctl import threadpool_limits

    from service.policy import load_campaigns

    with threadpool_limits(limits=1), tempfile.TemporaryDirectory() as tmp:
        root = Path(tmp)
        logging = _train(root / "models", args.pilot, 1, args.base)
        candidate = _train(root / "models", args.candidate_rows, 2, args.base)
        campaigns = write_campaigns(
            root / "c.toml", exploration=args.exploration, holdout=args.holdout
        )
        campaign = load_campaigns(campaigns)["renewal"]
        start = time.perf_counter()
        result = coverage(range(50_000, 50_000 + args.reps), args.n, logging, candidate, campaign)
        seconds = time.perf_counter() - start
    widths = result.mean_widths()
    rows = {f"replay {m.upper()}": (result.hits[m], widths[m]) for m in ("ips", "snips", "dr")}
    for kind in ("targeted", "policy"):
        rows[f"lift {kind}"] = (result.lift_hits[kind], float(np.mean(result.lift_widths[kind])))
    print(
        f"{args.reps} logs of {args.n} decisions (exploration {args.exploration}, holdout "
        f"{args.holdout}, {args.base} models); {seconds:.0f} s; mean ESS of the candidate "
        f"{np.mean(result.ess):.0f}"
    )
    print(f"{'INTERVAL':<16} {'COVERAGE':>9} {'WILSON 95%':>16} {'MEAN WIDTH':>11}")
    table = {}
    for name, (hits, width) in rows.items():
        low, high = _wilson(hits, args.reps)
        print(f"{name:<16} {hits / args.reps:>9.3f} [{low:.3f}, {high:.3f}] {width:>11.3f}")
        table[name] = {"coverage": hits / args.reps, "wilson95": [low, high], "width": width}
    args.out.parent.mkdir(parents=True, exist_ok=True)
    args.out.write_text(
        json.dumps(
            {
                "settings": {k: str(v) for k, v in vars(args).items()},
                "results": table,
                "mean_ess": float(np.mean(result.ess)),
                "seconds": seconds,
            },
            indent=2,
        )  # fmt: skip
    )
    print(f"written to {args.out}")


if __name__ == "__main__":
    main()
