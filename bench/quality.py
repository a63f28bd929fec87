"""Learner quality on simulation designs with known effects, full and compact forms.

For every learner x design: the Qini coefficient (inverse-propensity weighted) of the
learner's ranking on a fresh test sample relative to the oracle's (ranking by the true
effect) on the same sample (nan where the true effect is constant), the
error of the estimated effect (PEHE, root mean squared error against the true uplift),
fit time and peak memory. Each cell runs in a fresh process so its peak resident memory
is its own. Prints a table and writes it as JSON.

Learners are named as in ``service.uplift.LEARNERS`` (tuned nuisance models, the
default); ``NAME/fixed`` runs one with the fixed default settings (``tune=False``), and
``auto`` runs the training command's selection (5-fold cross-validated Qini over
``AUTO_CANDIDATES``, screened by the out-of-fold R-loss, on the training sample only) and
fits the winner.

With ``--bootstrap B`` (default 20; 0 skips it) the learner is fitted with B bootstrap
refits and the compact serving form is built exactly as ``upshot train`` builds it
(``service.training.forms``, value 1, no contact cost). Then, on the test sample, both
forms side by side: Qini/oracle, coverage of the true uplift by each form's 90%
interval, and the compact form's agreement with the full form on the greedy action and
the customer's do-not-contact flag (the worst over one-sided levels 0.80, 0.90, 0.95);
``built`` says whether the training-time fidelity check (on held-out training rows)
passed (the test-sample columns are shown for a refused form too, from the candidate
that was measured). Targets: Qini within 0.01, actions >= 98%, do-not-contact >= 99%,
coverage no more than 2 points below the full form's.

    python bench/quality.py [--train 20000] [--test 50000] [--bootstrap 20]
                            [--out bench/results/quality.json]
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
    design: str, learner: str, n_train: int, n_test: int, seed: int, threads: int, bootstrap: int
) -> dict[str, Any]:
    from threadpoolctl import threadpool_limits

    from service.evaluation import qini_coefficient
    from service.simulation import simulate

    train = simulate(design, n=n_train, random_state=seed)
    test = simulate(design, n=n_test, random_state=seed + 1000)
    before = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    start = time.perf_counter()
    with threadpool_limits(threads):
        model, learner = _fit(learner, train, seed, bootstrap)
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
    row = {
        "design": design,
        "learner": learner,
        "outcome": train.outcome_type,
        "qini_vs_oracle": float(np.mean(ratios)),
        "pehe": float(np.sqrt(np.mean((tau - test.tau) ** 2))),
        "fit_seconds": fit_seconds,
        "peak_mb": peak_mb,
    }
    if bootstrap:
        with threadpool_limits(threads):
            row |= _forms(model, train, test, order, seed, qini_coefficient, weight)
    return row


def _forms(
    model: Any, train: Any, test: Any, order: list[int], seed: int, qini: Any, weight: Any
) -> dict[str, Any]:
    """The compact form as training builds it, against the full form on the test sample."""
    from service.evaluation.fidelity import (
        CONFIDENCES,
        FormEstimates,
        form_fidelity,
        interval_coverage,
    )
    from service.reporting import Economics
    from service.training.forms import build_compact_form
    from service.training.validate import prepare_training_data
    from service.uplift.compact import interval_sd
    from service.uplift.compiled import compile_model

    data = prepare_training_data(
        train.to_frame(),
        treatment=train.treatment_name,
        outcome=train.outcome_name,
        features=list(train.X.columns),
    )
    economics = Economics.build(1.0, 0.0, model.arms_)
    start = time.perf_counter()
    built = build_compact_form(model, data, economics, random_state=seed)
    form_seconds = time.perf_counter() - start
    out: dict[str, Any] = {"form_seconds": form_seconds, "built": built.compiled is not None}
    out["training_fidelity"] = built.record.get("fidelity")
    out["reason"] = built.record.get("reason")
    if built.candidate is None:
        return out
    estimates = {}
    for form, scorer in (("full", compile_model(model)), ("compact", built.candidate)):
        tau, _, _, high = scorer.predict_interval(test.X, confidence=0.9)
        estimates[form] = FormEstimates(tau[:, order], interval_sd(tau, high, 0.9)[:, order])
        out[f"coverage_{form}"] = interval_coverage(
            test.tau, estimates[form].tau, estimates[form].sd, 0.9
        )
    fidelity = form_fidelity(
        estimates["full"],
        estimates["compact"],
        y=test.y,
        treatment=np.asarray(test.treatment, dtype=object),
        arms=test.arms,
        control=test.control,
        value=1.0,
        costs=np.zeros(len(test.arms)),
        sample_weight=weight,
    )
    out["qini_difference"] = max(abs(q["difference"]) for q in fidelity["qini"].values())
    out["action_agreement"] = min(lvl["action_agreement"] for lvl in fidelity["levels"])
    out["dnc_agreement"] = min(lvl["dnc_agreement"] for lvl in fidelity["levels"])
    out["levels"] = list(CONFIDENCES)
    return out


FORM_HEADER = (
    f"{'built':>6}{'Qini diff':>10}{'action':>8}{'DNC':>8}{'cover full':>11}{'compact':>8}"
    f"{'target':>7}"
)


def _form_cells(row: dict[str, Any]) -> str:
    if "coverage_compact" not in row:
        return f"{'no':>6}  ({row['reason']})"
    ok = (
        row["qini_difference"] <= 0.01
        and row["action_agreement"] >= 0.98
        and row["dnc_agreement"] >= 0.99
        and row["coverage_compact"] >= row["coverage_full"] - 0.02
    )
    built = "yes" if row["built"] else "no"
    return (
        f"{built:>6}{row['qini_difference']:>10.4f}{row['action_agreement']:>8.2%}"
        f"{row['dnc_agreement']:>8.2%}{row['coverage_full']:>11.1%}{row['coverage_compact']:>8.1%}"
        f"{'ok' if ok else 'MISS':>7}"
    )


def _fit(spec: str, train: Any, seed: int, bootstrap: int) -> tuple[Any, str]:
    """The fitted model of learner ``spec`` (see the module docstring) and its label,
    with ``bootstrap`` refits for the interval (0: none)."""
    from service.evaluation import select_learner
    from service.training.train import AUTO_CANDIDATES
    from service.uplift import BootstrapUplift, make_learner

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
    if bootstrap:
        model = BootstrapUplift(model, n_bootstrap=bootstrap, random_state=seed)
    return model.fit(train.X, train.y, train.treatment), spec


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--train", type=int, default=20000)
    parser.add_argument("--test", type=int, default=50000)
    parser.add_argument("--seed", type=int, default=0)
    parser.add_argument(
        "--threads", type=int, default=1, help="numeric-library threads per fit (default 1)"
    )
    parser.add_argument(
        "--bootstrap", type=int, default=20, help="bootstrap refits, for the forms (0: none)"
    )
    parser.add_argument("--designs", nargs="*", default=DESIGNS)
    parser.add_argument("--learners", nargs="*", default=LEARNER_NAMES)
    parser.add_argument("--out", type=Path, default=Path("bench/results/quality.json"))
    args = parser.parse_args()
    rows = []
    print(
        f"train rows {args.train}, test rows {args.test}, seed {args.seed}, base gbm, "
        f"{args.threads} thread(s) per fit, {args.bootstrap} bootstrap refits"
    )
    header = (
        f"{'design':<16}{'learner':<13}{'Qini/oracle':>12}{'PEHE':>9}{'fit s':>8}{'peak MB':>9}"
        + (FORM_HEADER if args.bootstrap else "")
    )
    print(header)
    print("-" * len(header))
    for design in args.designs:
        for learner in args.learners:
            with ProcessPoolExecutor(max_workers=1) as pool:
                row = pool.submit(
                    _cell,
                    design,
                    learner,
                    args.train,
                    args.test,
                    args.seed,
                    args.threads,
                    args.bootstrap,
                ).result()
            rows.append(row)
            print(
                f"{design:<16}{row['learner']:<13}{row['qini_vs_oracle']:>12.3f}"
                f"{row['pehe']:>9.3f}{row['fit_seconds']:>8.1f}{row['peak_mb']:>9.0f}"
                + (_form_cells(row) if args.bootstrap else ""),
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
