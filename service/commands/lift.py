"""``upshot lift``: the lift a campaign's policy really delivered, with intervals."""

from __future__ import annotations

import argparse
from pathlib import Path
from typing import Any

from service.commands._loop import (
    add_campaigns,
    add_log,
    add_window,
    fmt,
    interval,
    load_campaign,
    print_json,
    print_warnings,
)

__all__ = ["register"]

_DESCRIPTION = """\
Measure the realized lift of a campaign from its decision log and outcomes: among the
customers the policy chose to contact, contacted vs the randomized holdout; over all
decisions, the policy vs contacting no one (IPS over the holdout and exploration);
incremental outcomes and profit after contact cost; and IPS/SNIPS/DR estimates of
contacting no one or everyone through each arm.
"""


def register(subparsers: Any) -> None:
    """Add ``lift``."""
    parser = subparsers.add_parser(
        "lift", help="realized lift of a campaign against its random control",
        description=_DESCRIPTION,
    )  # fmt: skip
    parser.add_argument("campaign", help="campaign id")
    add_window(parser)
    parser.add_argument("--plot", type=Path, metavar="FILE.png", help="also draw a PNG")
    parser.add_argument("--confidence", type=float, default=0.95, help="interval level (0.95)")
    parser.add_argument("--json", action="store_true", help="print the whole report as JSON")
    add_log(parser)
    add_campaigns(parser)
    parser.set_defaults(handler=run)


def run(args: argparse.Namespace) -> int:
    """Compute, print (and plot) the realized lift."""
    from service.loop import campaign_lift, plot_lift, read_logged

    campaign = load_campaign(args.campaigns, args.campaign)
    logged = read_logged(args.log, args.campaign, since=args.since, until=args.until, detail=False)
    report = campaign_lift(logged, campaign, confidence=args.confidence)
    if args.plot is not None:
        plot_lift(report, args.plot)
    if args.json:
        print_json(report.to_dict())
        return 0
    lift, level = report.lift, f"{report.lift.confidence:.0%}"
    print(
        f"campaign {report.campaign}: {report.with_outcome} of {report.decisions} decisions "
        f"have an outcome ({report.first_decision_at} .. {report.last_decision_at})"
    )
    t = lift.targeted
    if t is not None:
        print(
            f"targeted: {t.n_contacted} contacted, {t.n_holdout} held out; outcome "
            f"{fmt(t.contacted_mean)} vs {fmt(t.holdout_mean)}"
        )
        print(f"  lift per contact            {interval(t.difference)}  ({level} interval)")
        print(f"  incremental outcomes        {interval(t.incremental_outcome)}")
        print(
            f"  incremental profit          {interval(t.incremental_profit)}  "
            f"(after {fmt(t.contact_cost)} contact cost)"
        )
    print("policy vs contacting no one, per decision:")
    print(f"  outcome under policy        {interval(lift.policy_outcome)}")
    print(f"  lift                        {interval(lift.lift)}")
    print(f"  incremental outcomes        {interval(lift.incremental_outcome)}  (total)")
    print(f"  incremental profit          {interval(lift.incremental_profit)}  (total)")
    print("net value per decision (IPS) of simple alternatives:")
    print(f"  policy as run               {interval(lift.policy_net_value)}  (observed)")
    for alt in lift.alternatives.values():
        print(f"  {alt.name:<27} {interval(alt.net_value.ips)}")
    print(f"best single arm for everyone: {lift.best_arm}")
    print_warnings(report.warnings)
    if args.plot is not None:
        print(f"plot: {args.plot}")
    return 0
