"""``upshot export``: a training table from the decision log."""

from __future__ import annotations

import argparse
from pathlib import Path
from typing import Any

from service.commands._loop import add_campaigns, add_log, add_window, launcher, print_warnings

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
    add_campaigns(parser)
    parser.set_defaults(handler=run)


def run(args: argparse.Namespace) -> int:
    """Export and print how to train on the table."""
    from service.loop import export_from_log
    from service.policy import load_campaigns

    # The campaign file only adds value and costs to the printed command; not required.
    campaigns = load_campaigns(args.campaigns) if args.campaigns.is_file() else {}
    campaign = campaigns.get(args.campaign)
    value = None if campaign is None else campaign.value
    costs = None if campaign is None else {arm.name: arm.cost for arm in campaign.arms}
    result = export_from_log(
        args.log, args.campaign, args.out, since=args.since, until=args.until,
        value=value, costs=costs,
    )  # fmt: skip
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
        f"  {launcher()} train {result.path} --treatment {t['treatment']} "
        f"--outcome {t['outcome']} --control {t['control']} --weight {t['sample_weight']} "
        f"--features {','.join(t['features'])}{_valuation(value, costs)} --name MODEL"
    )
    if campaign is None:
        print(
            f"(campaign {args.campaign!r} is not in {args.campaigns}: add --value and --cost "
            "so the report is valued like the campaign)"
        )
    print_warnings(result.warnings)
    return 0


def _valuation(value: float | None, costs: dict[str, float] | None) -> str:
    if value is None or costs is None:
        return ""
    cost = ",".join(f"{arm}={cost:g}" for arm, cost in costs.items())
    return f" --value {value:g} --cost {cost}"
