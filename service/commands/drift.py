"""``upshot drift``: PSI of features and scores against the serving model's reference."""

from __future__ import annotations

import argparse
from typing import Any

from service.commands._common import add_models_dir, resolve_ref
from service.commands._loop import add_campaigns, add_log, add_window, load_campaign, print_json
from service.errors import DataError

__all__ = ["register"]

_DESCRIPTION = """\
Population stability index of each feature and of each arm's score over a recent window
of a campaign's decision log, against the training reference stored in the model
bundle. PSI < 0.1 stable, 0.1-0.25 watch, >= 0.25 act: common practice, no published
source.
"""


def register(subparsers: Any) -> None:
    """Add ``drift``."""
    parser = subparsers.add_parser(
        "drift", help="population stability of features and scores", description=_DESCRIPTION
    )
    parser.add_argument("--campaign", required=True, help="campaign id")
    parser.add_argument(
        "--model",
        metavar="NAME[:VERSION]",
        help="reference bundle (default: the version serving the campaign)",
    )
    add_window(parser)
    parser.add_argument(
        "--last", type=int, default=5000, help="most recent decisions to use (5000)"
    )
    parser.add_argument("--json", action="store_true", help="print JSON")
    add_log(parser)
    add_campaigns(parser)
    add_models_dir(parser)
    parser.set_defaults(handler=run)


def run(args: argparse.Namespace) -> int:
    """Compute and print the PSI table, worst first; exit 0 whatever the level."""
    from service.loop import read_logged
    from service.monitoring import log_drift
    from service.registry import ModelRegistry

    registry = ModelRegistry(args.models_dir)
    campaign = load_campaign(args.campaigns, args.campaign)
    if args.model:
        name, version = resolve_ref(registry, args.model)
    elif campaign.model is None:
        raise DataError(
            f"Campaign {args.campaign!r} is a randomized pilot with no model, so there is no "
            "training reference to compare with; pass --model NAME[:VERSION] to compare its "
            "decisions with that model's training data."
        )
    else:
        name, version = campaign.model, registry.resolve(campaign.model, campaign.model_version)
    logged = read_logged(
        args.log, args.campaign, since=args.since, until=args.until, last=args.last
    )
    report = log_drift(logged, registry.load(name, version))
    if args.json:
        print_json(report.to_dict())
        return 0
    print(
        f"drift of campaign {args.campaign} over its last {report.n} decisions vs "
        f"{name}:{version}'s training reference"
    )
    print(f"{'KIND':<8} {'NAME':<28} {'PSI':>8}  LEVEL")
    for item in report.items:
        print(f"{item.kind:<8} {item.name:<28} {item.psi:>8.4f}  {item.level}")
    print("levels: PSI < 0.1 stable, < 0.25 watch, else act (common practice, no source)")
    return 0
