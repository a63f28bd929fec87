"""``upshot models promote --require-replay``: the replay check, kept apart from ``models``."""

from __future__ import annotations

import argparse
from typing import Any

from service.commands._loop import add_campaigns, add_log, print_warnings
from service.errors import DataError, RegistryError

__all__ = ["add_replay_options", "enforce_replay"]


def add_replay_options(parser: argparse.ArgumentParser) -> None:
    """Options of the replay check on ``models promote``."""
    group = parser.add_argument_group(
        "replay check",
        "With --require-replay the version is promoted only if its policy's estimated "
        "value on the campaign's logged decisions (net value per decision, by doubly "
        "robust off-policy evaluation) beats the champion's by more than --margin.",
    )
    group.add_argument(
        "--require-replay", action="store_true", help="refuse unless the replay check passes"
    )
    group.add_argument(
        "--campaign", help="campaign whose log judges it (default: the one using the model)"
    )
    group.add_argument(
        "--margin", type=float, default=0.0, help="required gain per decision (default 0)"
    )
    group.add_argument(
        "--replay-method", choices=["dr", "snips", "ips"], default="dr", help="estimator (dr)"
    )
    group.add_argument(
        "--replay-rule",
        choices=["estimate", "lower"],
        default="estimate",
        help="the estimated gain must exceed the margin (estimate), or the lower end of "
        "its 95%% interval must (lower; stricter)",
    )
    group.add_argument("--since", help="replay decisions from this time on (ISO 8601)")
    group.add_argument("--until", help="replay decisions before this time (ISO 8601)")
    add_log(group)
    add_campaigns(group)


def _campaign(args: argparse.Namespace, name: str) -> Any:
    from service.policy import load_campaigns

    campaigns = load_campaigns(args.campaigns)
    if args.campaign is not None:
        if args.campaign not in campaigns:
            raise DataError(
                f"Campaign {args.campaign!r} is not in {args.campaigns}; its campaigns are "
                f"{sorted(campaigns)}."
            )
        return campaigns[args.campaign]
    using = [c for c in campaigns.values() if c.model == name]
    if len(using) != 1:
        raise DataError(
            f"{len(using)} campaigns in {args.campaigns} use model {name!r}; name the one "
            "whose log should judge the promotion with --campaign."
        )
    return using[0]


def enforce_replay(args: argparse.Namespace, registry: Any) -> None:
    """Replay challenger and champion; print the verdict; raise if the challenger fails.

    Raises
    ------
    RegistryError
        The challenger's estimated value does not beat the champion's by the margin;
        nothing is promoted.
    """
    from service.loop import read_logged, replay_gate

    version = registry.resolve(args.name, args.version)
    champion = registry.champion(args.name)
    if champion == version:
        return
    campaign = _campaign(args, args.name)
    logged = read_logged(args.log, campaign.id, since=args.since, until=args.until)
    gate = replay_gate(
        logged,
        campaign,
        registry.load(args.name, version),
        registry.load(args.name, champion) if champion is not None else None,
        margin=args.margin,
        method=args.replay_method,
        rule=args.replay_rule,
    )
    print(f"replay check: {gate.message}")
    print_warnings(gate.warnings)
    if not gate.passed:
        raise RegistryError(
            f"Not promoted: {gate.message} Keep the champion, or collect more decisions "
            "(and outcomes) and replay again."
        )
