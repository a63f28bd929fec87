"""``upshot plan``: customers per group for a pilot or a holdout, and how long a replay takes."""

from __future__ import annotations

import argparse
import math
from typing import Any

from service.commands._loop import print_json
from service.errors import DataError

__all__ = ["register"]

_DESCRIPTION = """\
Settle the numbers before a campaign. For an uplift D on a base response rate P (or on
an amount with standard deviation S): the customers per group a randomized pilot needs
to detect it at the given power and two-sided significance, and, with --holdout H, the
contacted and held-out customers a running campaign needs (unequal groups). With
--margin M and --exploration E: the logged decisions a replay needs before it can tell
a challenger better by M per decision (in outcome units), from the effective sample size,
and with --daily N how many days that is. Binary outcomes: Fleiss, Levin & Paik (2003);
amounts: the two-sample normal approximation.
"""


def register(subparsers: Any) -> None:
    """Add ``plan``."""
    parser = subparsers.add_parser(
        "plan",
        help="sample sizes for a pilot or holdout; days a replay needs",
        description=_DESCRIPTION,
    )
    parser.add_argument(
        "--baseline",
        type=float,
        required=True,
        metavar="P",
        help="response rate without contact (0.30), or the mean amount",
    )
    parser.add_argument(
        "--uplift",
        type=float,
        required=True,
        metavar="D",
        help="uplift to detect, e.g. 0.03 (3 points) or an amount",
    )
    parser.add_argument(
        "--sd",
        type=float,
        metavar="S",
        help="standard deviation of an amount outcome (omit for 1/0 outcomes)",
    )
    parser.add_argument("--power", type=float, default=0.8, help="power (default 0.8)")
    parser.add_argument(
        "--alpha", type=float, default=0.05, help="two-sided significance level (default 0.05)"
    )
    parser.add_argument("--arms", type=int, default=1, help="contact arms in the pilot (1)")
    parser.add_argument(
        "--holdout",
        type=float,
        metavar="H",
        help="holdout share of a running campaign's chosen contacts",
    )
    parser.add_argument(
        "--exploration",
        type=float,
        metavar="E",
        help="exploration rate of the campaign (for the replay estimate)",
    )
    parser.add_argument(
        "--margin",
        type=float,
        metavar="M",
        help="gain per decision a replay must detect (outcome units)",
    )
    parser.add_argument("--daily", type=float, metavar="N", help="decisions per day")
    parser.add_argument("--json", action="store_true", help="print JSON")
    parser.set_defaults(handler=run)


def plan(args: argparse.Namespace) -> dict[str, Any]:
    """The whole plan as a JSON-ready dictionary."""
    from service.planning import replay_volume, sample_size_amount, sample_size_proportions

    if args.arms < 1:
        raise DataError(f"--arms {args.arms} must be at least 1.")
    binary = args.sd is None

    def sizes(ratio: float) -> Any:
        common = {"power": args.power, "alpha": args.alpha, "ratio": ratio}
        if binary:
            return sample_size_proportions(args.baseline, args.uplift, **common)
        return sample_size_amount(args.uplift, args.sd, **common)

    pilot = sizes(1.0)
    body: dict[str, Any] = {
        "outcome": "binary" if binary else "amount",
        "baseline": args.baseline,
        "uplift": args.uplift,
        "sd": args.sd,
        "power": args.power,
        "alpha": args.alpha,
        "method": "Fleiss, Levin & Paik (2003), pooled null variance"
        if binary
        else "two-sample normal approximation (z-test)",
        "n_per_group": pilot.contacted,
        "pilot": {
            "arms": args.arms,
            "n_per_group": pilot.contacted,
            "total": pilot.contacted * (args.arms + 1),
        },
        "holdout": None,
        "replay": None,
    }
    if args.holdout is not None:
        if not (0.0 < args.holdout < 1.0):
            raise DataError(f"--holdout {args.holdout} must lie in (0, 1), e.g. 0.10.")
        split = sizes(args.holdout / (1.0 - args.holdout))
        body["holdout"] = {
            "share": args.holdout,
            "contacted": split.contacted,
            "held_out": split.control,
            "chosen": split.total,
        }
    if args.margin is not None:
        if args.exploration is None:
            raise DataError("--margin needs --exploration (the campaign's rate, e.g. 0.05).")
        sd = math.sqrt(args.baseline * (1 - args.baseline)) if binary else args.sd
        volume = replay_volume(
            margin=args.margin,
            sd=sd,
            exploration=args.exploration,
            holdout=args.holdout or 0.0,
            arms=args.arms,
            power=args.power,
            alpha=args.alpha,
        )
        days = None
        if args.daily is not None:
            if not args.daily > 0:
                raise DataError(f"--daily {args.daily} must be a positive number of decisions.")
            days = volume.decisions / args.daily
        body["replay"] = {
            "margin": args.margin,
            "exploration": args.exploration,
            "holdout": args.holdout or 0.0,
            "effective_sample_size": volume.effective_sample_size,
            "ess_per_decision": volume.ess_per_decision,
            "decisions": volume.decisions if math.isfinite(volume.decisions) else None,
            "daily": args.daily,
            "days": days if days is not None and math.isfinite(days) else None,
        }
    return body


def run(args: argparse.Namespace) -> int:
    """Print the plan."""
    body = plan(args)
    if args.json:
        print_json(body)
        return 0
    what = "rate" if binary_of(body) else "mean amount"
    print(
        f"detect an uplift of {args.uplift:g} on a base {what} of {args.baseline:g} "
        f"(two-sided alpha {args.alpha:g}, power {args.power:g}; {body['method']})"
    )
    p = body["pilot"]
    print(
        f"  pilot at equal shares: {p['n_per_group']:,} customers per group; "
        f"{p['total']:,} for no contact + {p['arms']} arm(s)"
    )
    h = body["holdout"]
    if h is not None:
        print(
            f"  running campaign, holdout {h['share']:.0%}: {h['chosen']:,} chosen contacts "
            f"({h['contacted']:,} contacted, {h['held_out']:,} held out)"
        )
    r = body["replay"]
    if r is not None:
        head = (
            f"  replay, challenger better by {r['margin']:g} per decision at exploration "
            f"{r['exploration']:g} and holdout {r['holdout']:g}: effective sample size "
            f"{r['effective_sample_size']:,}"
        )
        if r["decisions"] is None:
            print(
                head + "; impossible without exploration (the log never tries "
                "what a challenger would do differently)"
            )
        else:
            days = "" if r["days"] is None else f", {r['days']:,.1f} days at {r['daily']:,.0f}/day"
            print(
                f"{head}, about {r['decisions']:,.0f} logged decisions "
                f"(each counts {r['ess_per_decision']:.3g}){days}"
            )
        print(
            "  (the replay figure assumes the challenger departs from the logged policy "
            "where it matters, so only the randomized share informs it)"
        )
    return 0


def binary_of(body: dict[str, Any]) -> bool:
    """The plan is for a 1/0 outcome."""
    return bool(body["outcome"] == "binary")
