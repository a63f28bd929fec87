"""``upshot export``: a training table from the decision log."""

from __future__ import annotations

import argparse
from pathlib import Path
from typing import Any

from service.commands._loop import add_log, add_window

__all__ = ["register"]

_DESCRIPTION = """\
Write the decisions of a campaign that have an outcome as a training table (CSV or
Parquet): features as scored, the action taken (column treatment), the outcome, the
exact probability of that action and of every action, and ipw = 1 / probability. Train
the next version on it with the printed command: the inverse-propensity weights let the
randomized share (exploration and holdout) correct the bias of the policy's own
choices. A sidecar <file>.source.json records where the table came from.
"""


def register(subparsers: Any) -> None:
    """Add ``export``."""
    parser = subparsers.add_parser(
        "export", help="write a training table from the decision log", description=_DESCRIPTION
    )
    parser.add_argument("--campaign", required=True, help="campaign id")
    parser.add_argument(
        "--out", type=Path, required=True, metavar="FILE", help="table to write (.csv/.parquet)"
    )
    add_window(parser)
    add_log(parser)
    parser.set_defaults(handler=run)


def run(args: argparse.Namespace) -> int:
    """Export and print how to train on the table."""
    from service.loop import export_from_log

    result = export_from_log(args.log, args.campaign, args.out, since=args.since, until=args.until)
    p = result.provenance
    print(
        f"wrote {result.rows} decisions of {args.campaign} ({p['first_decision_at']} .. "
        f"{p['last_decision_at']}) to {result.path}; {result.without_outcome} without an "
        "outcome left out"
    )
    print(f"provenance: {result.sidecar} (sha256 {p['sha256'][:16]}...)")
    t = p["training"]
    print("train the next version with:")
    print(
        f"  upshot train {result.path} --treatment {t['treatment']} --outcome {t['outcome']} "
        f"--control {t['control']} --weight {t['sample_weight']} "
        f"--features {','.join(t['features'])} --name MODEL"
    )
    return 0
