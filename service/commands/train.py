"""``upshot train``: train a new model version from a CSV or Parquet campaign table."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path
from typing import Any

from service.commands._common import (
    add_models_dir,
    default_actor,
    name_from_path,
    parse_assignments,
    parse_cost,
    print_metrics,
)

__all__ = ["register"]

_DESCRIPTION = """\
Train an uplift model on a randomized campaign and save it as a new version of NAME in
the registry: validate the table, pick the learner by cross-validated Qini (--learner
auto), fit it with bootstrap intervals, and write the bundle and its report. Nothing is
written if any step fails.
"""


def register(subparsers: Any) -> None:
    """Add ``train`` to the ``upshot`` sub-commands."""
    parser = subparsers.add_parser(
        "train",
        help="train a new model version from a campaign table",
        description=_DESCRIPTION,
    )
    parser.add_argument("data", type=Path, help="campaign table (.csv, .tsv or .parquet)")
    parser.add_argument(
        "--treatment",
        required=True,
        metavar="COL",
        help="column with the group each customer was in",
    )
    parser.add_argument(
        "--outcome",
        required=True,
        metavar="COL",
        help="column with the outcome (1/0 response, or an amount)",
    )
    parser.add_argument(
        "--control",
        metavar="LABEL",
        help="label of the control group (default: 0, control or none)",
    )
    parser.add_argument(
        "--features",
        nargs="+",
        metavar="COL",
        help="feature columns, space or comma separated (default: all other "
        "columns except identifier-like ones)",
    )
    parser.add_argument(
        "--learner",
        default="auto",
        choices=["auto", "t", "s", "x", "dr", "r", "transformed"],
        help="uplift learner; auto picks the best cross-validated Qini (default: auto)",
    )
    parser.add_argument(
        "--base",
        default="gbm",
        choices=["gbm", "linear"],
        help="base models: gradient-boosted trees or linear (default: gbm)",
    )
    parser.add_argument("--name", help="model name (default: the data file's name)")
    add_models_dir(parser)
    parser.add_argument(
        "--value",
        type=float,
        default=1.0,
        help="value of one conversion, for the profit curve (default: 1)",
    )
    parser.add_argument(
        "--cost",
        type=parse_cost,
        default=0.0,
        metavar="C",
        help="cost of one contact: a number, or per arm as email=0.1,call=2.5 (default: 0)",
    )
    parser.add_argument("--weight", metavar="COL", help="column of row weights")
    parser.add_argument(
        "--propensity",
        metavar="COL|LABEL=COL,...",
        help="assignment probabilities for logged data: one column with the "
        "probability of the group received (one arm), or one column per "
        "group as none=p0,email=p1,call=p2",
    )
    parser.add_argument("--folds", type=int, default=5, help="cross-validation folds (5)")
    parser.add_argument(
        "--bootstrap",
        type=int,
        default=20,
        help="bootstrap refits for prediction intervals (default: 20)",
    )
    parser.add_argument("--seed", type=int, default=0, help="random seed (default: 0)")
    parser.add_argument(
        "--threads",
        type=int,
        default=1,
        help="threads for the numeric libraries while fitting (default: 1; more helps only "
        "on large tables with idle cores)",
    )
    parser.add_argument(
        "--promote", action="store_true", help="make the new version the champion right away"
    )
    parser.add_argument("--quiet", action="store_true", help="no progress bar")
    parser.add_argument(
        "--no-tune",
        dest="tune",
        action="store_false",
        help="keep the base models' fixed settings instead of choosing their capacity by "
        "held-out loss",
    )
    parser.set_defaults(handler=run)


def _features(values: list[str] | None) -> list[str] | None:
    if values is None:
        return None
    return [name.strip() for value in values for name in value.split(",") if name.strip()]


def _propensity(text: str | None) -> str | dict[str, str] | None:
    if text is None or "=" not in text:
        return text
    return parse_assignments(text, "--propensity")


def run(args: argparse.Namespace) -> int:
    """Train, save and print the version, headline metrics and report path."""
    from service.loop import read_provenance
    from service.registry import ModelRegistry
    from service.training import read_table, train_model

    frame = read_table(args.data)
    provenance = read_provenance(args.data)  # set when the table is an `upshot export`
    name = args.name or name_from_path(args.data)
    result = train_model(
        frame,
        treatment=args.treatment,
        outcome=args.outcome,
        control=args.control,
        features=_features(args.features),
        learner=args.learner,
        name=name,
        models_dir=args.models_dir,
        base=args.base,
        n_bootstrap=args.bootstrap,
        n_splits=args.folds,
        random_state=args.seed,
        sample_weight=args.weight,
        propensity=_propensity(args.propensity),
        value=args.value,
        cost=args.cost,
        progress=not args.quiet,
        source=str(args.data),
        threads=args.threads,
        source_decisions=provenance,
        tune=args.tune,
    )
    m = result.manifest
    ignored = m["training_data"]["ignored_columns"]
    if ignored:
        print(
            f"ignored identifier-like column(s): {', '.join(ignored)} (use --features to "
            "choose columns)"
        )
    print(
        f"trained {name} {result.version}: learner {m['learner']['name']} on "
        f"{m['learner']['base']} base models, {m['training_data']['rows']} rows, "
        f"{m['outcome_type']} outcome, control {m['control']!r}"
    )
    print(f"cross-validated metrics ({m['metrics']['n_splits']}-fold, out-of-fold):")
    print_metrics(m)
    compact = m["serving"]["forms"]["compact"]
    if compact["status"] == "built":
        print("serving form: compact (fidelity checks passed; see the report)")
    else:
        print(
            f"WARNING: no compact serving form, the full form will serve: {compact['reason']}",
            file=sys.stderr,
        )
    if args.promote:
        ModelRegistry(args.models_dir).promote(
            name, result.version, actor=default_actor(), reason="promoted at training (--promote)"
        )
        print(f"{name} {result.version} is now the champion")
    else:
        print(
            f'to serve it: upshot models promote {name} {result.version} --reason "..."'
            + (f" --models-dir {args.models_dir}" if str(args.models_dir) != "models" else "")
        )
    if provenance is not None:
        print(
            f"trained on {provenance['decisions']} logged decisions of campaign "
            f"{provenance['campaign']} ({provenance['first_decision_at']} .. "
            f"{provenance['last_decision_at']}); recorded as source_decisions in the manifest"
        )
    print(f"report: {result.report}")
    return 0
