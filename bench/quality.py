"""Learner quality on simulation designs with known effects.

For every learner x design: the Qini coefficient (inverse-propensity weighted) of the
learner's ranking on a fresh test sample relative to the oracle's (ranking by the true
effect) on the same sample (nan where the true effect is constant), the
error of the estimated effect (PEHE, root mean squared error against the true uplift),
fit time and peak memory. Each cell runs in a fresh process so its peak resident memory
is its own. Prints a table and writes it as JSON.

Learners are named as in ``service.uplift.LEARNERS`` (tuned nuisance models, the
default); ``NAME/fixed`` runs one with the fixed default settings (``tune=False``), and
``auto`` runs the training command's selection (5-fold cross-validated Qini over
``AUTO_CANDIDATES`` on the training sample only) and fits the winner.

    python bench/quality.py [--train 20000] [--test 50000] [--out bench/results/quality.json]
"""

from __future__ import annotations

import argparse
import json
import resource
import time
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path
from typing import Any

import numpy as np

DESIGNS = ["groups", "groups_two_arms", "larkspur", "nw_a", "nw_b", "nw_c", "nw_d"]
LEARNER_NAMES = ["t", "s", "x", "dr", "r", "transformed", "auto"]


def _cell(
    design: str, learner: str, n_train: int, n_test: int, seed: int, threads: int
) -> dict[str, Any]:
    from threadpoolctl import threadpool_limits

    from service.evaluation import qini_coefficient
    from service.simulation import simulate

    train = simulate(design, n=n_train, random_state=seed)
    test = simulate(design, n=n_test, random_state=seed + 1000)
    before = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    start = time.perf_counter()
    with threadpool_limits(threads):
        model, learner = _fit(learner, train, seed)
    fit_seconds = time.perf_counter() - start
    peak_mb = (resource.getrusage(resource.RUSAGE_SELF).ru_maxrss - before) / 1024
    tau = model.predict(test.X)
    order = [list(model.arms_).index(a) for a in test.arms]
    tau = tau[:, order]
    # Inverse-propensity weights keep the Qini honest on the confounded designs (Nie &
    # Wager A, C, D); on randomized designs they are constant within an arm pair.
    weight = 1.0 / test.propensity
    ratios = []
    for j, arm in enumerate(test.arms):

        def qini(score: np.ndarray, arm: Any = arm) -> float:
            return qini_coefficient(
                test.y,
                test.treatment,
                score,
                control=test.control,
                arm=arm,
                sample_weight=weight,
                normalize=False,
            )

        oracle = qini(test.tau[:, j])
        # A constant true effect (setup C) gives the oracle nothing to rank: no ratio.
        ratios.append(qini(tau[:, j]) / oracle if oracle > 1e-9 else float("nan"))
    return {
        "design": design,
        "learner": learner,
        "outcome": train.outcome_type,
        "qini_vs_oracle": float(np.mean(ratios)),
        "pehe": float(np.sqrt(np.mean((tau - test.tau) ** 2))),
        "fit_seconds": fit_seconds,
        "peak_mb": peak_mb,
    }


def _fit(spec: str, train: Any, seed: int) -> tuple[Any, str]:
    """The fitted model of learner ``spec`` (see the module docstring) and its label."""
    from service.evaluation import select_learner
    from service.training.train import AUTO_CANDIDATES
    from service.uplift import make_learner

    if spec == "auto":
        candidates = {name: make_learner(name, random_state=seed) for name in AUTO_CANDIDATES}
        spec = (
            "auto:"
            + select_learner(candidates, train.X, train.y, train.treatment, random_state=seed).best
        )
        name = spec.removeprefix("auto:")
        model = make_learner(name, random_state=seed)
    else:
        name, _, mode = spec.partition("/")
        model = make_learner(name, random_state=seed, tune=mode != "fixed")
    return model.fit(train.X, train.y, train.treatment), spec


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--train", type=int, default=20000)
    parser.add_argument("--test", type=int, default=50000)
    parser.add_argument("--seed", type=int, default=0)
    parser.add_argument(
        "--threads", type=int, default=1, help="numeric-library threads per fit (default 1)"
    )
    parser.add_argument("--designs", nargs="*", default=DESIGNS)
    parser.add_argument("--learners", nargs="*", default=LEARNER_NAMES)
    parser.add_argument("--out", type=Path, default=Path("bench/results/quality.json"))
    args = parser.parse_args()
    rows = []
    print(
        f"train rows {args.train}, test rows {args.test}, seed {args.seed}, base gbm, "
        f"{args.threads} thread(s) per fit"
    )
    header = (
        f"{'design':<16}{'learner':<13}{'Qini/oracle':>12}{'PEHE':>9}{'fit s':>8}{'peak MB':>9}"
    )
    print(header)
    print("-" * len(header))
    for design in args.designs:
        for learner in args.learners:
            with ProcessPoolExecutor(max_workers=1) as pool:
                row = pool.submit(
                    _cell, design, learner, args.train, args.test, args.seed, args.threads
                ).result()
            rows.append(row)
            print(
                f"{design:<16}{row['learner']:<13}{row['qini_vs_oracle']:>12.3f}{row['pehe']:>9.3f}"
                f"{row['fit_seconds']:>8.1f}{row['peak_mb']:>9.0f}",
                flush=True,
            )
    best: dict[str, float] = {}
    auto: dict[str, float] = {}
    for row in rows:
        if row["outcome"] != "binary":
            continue
        if row["learner"].startswith("auto"):
            auto[row["design"]] = row["qini_vs_oracle"]
        else:
            best[row["design"]] = max(best.get(row["design"], -np.inf), row["qini_vs_oracle"])
    print(
        "\nper binary design: the best single learner (goal >= 0.92 of the oracle's Qini) "
        "and auto (goal: within 0.01 of the best):"
    )
    for design, value in best.items():
        line = f"  {design:<16}best {value:.3f}  {'ok' if value >= 0.92 else 'BELOW GOAL'}"
        if design in auto:
            gap = value - auto[design]
            line += f"   auto {auto[design]:.3f}  {'ok' if gap <= 0.01 else 'BELOW GOAL'}"
        print(line)
    args.out.parent.mkdir(parents=True, exist_ok=True)
    args.out.write_text(
        json.dumps({"settings": vars(args) | {"out": str(args.out)}, "rows": rows}, indent=2)
    )
    print(f"\nwritten to {args.out}")


if __name__ == "__main__":
    main()
