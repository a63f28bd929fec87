"""``upshot replay``: a candidate model's policy value on the logged decisions."""

from __future__ import annotations

import argparse
from typing import Any

from service.commands._common import add_models_dir, resolve_ref
from service.commands._loop import (
    add_campaigns,
    add_log,
    add_window,
    fmt,
    interval,
    launcher,
    load_campaign,
    print_json,
    print_warnings,
)

__all__ = ["register"]

_DESCRIPTION = """\
Estimate the value (net value per decision: value x outcome - contact cost) that a
candidate model's policy would have had on a campaign's logged decisions: the campaign's
policy with the candidate's estimates, acting greedily (no exploration or holdout). By
IPS, self-normalised IPS and doubly robust estimation, each with an interval; with the
effective sample size and a warning where the log lacks support for the candidate's
actions. Replay on decisions the candidate was not trained on.
"""


def register(subparsers: Any) -> None:
    """Add ``replay``."""
    parser = subparsers.add_parser(
        "replay", help="off-policy value of a candidate model on the log", description=_DESCRIPTION
    )
    parser.add_argument("--campaign", required=True, help="campaign id")
    parser.add_argument(
        "--model", required=True, metavar="NAME[:VERSION]", help="candidate model version"
    )
    add_window(parser)
    parser.add_argument("--confidence", type=float, default=0.95, help="interval level (0.95)")
    parser.add_argument(
        "--reward-model",
        choices=["logged", "candidate"],
        default="logged",
        help="outcome model of DR: the logging model's recorded estimates (default) or "
        "the candidate's",
    )
    parser.add_argument("--json", action="store_true", help="print JSON")
    add_log(parser)
    add_campaigns(parser)
    add_models_dir(parser)
    parser.set_defaults(handler=run)


def run(args: argparse.Namespace) -> int:
    """Replay and print the three estimates."""
    from service.loop import read_logged, replay, replay_gate
    from service.registry import ModelRegistry

    registry = ModelRegistry(args.models_dir)
    name, version = resolve_ref(registry, args.model)
    campaign = load_campaign(args.campaigns, args.campaign)
    logged = read_logged(args.log, args.campaign, since=args.since, until=args.until)
    result = replay(
        logged,
        campaign,
        registry.load(name, version),
        confidence=args.confidence,
        reward_model=args.reward_model,
    )
    champion = registry.champion(name)
    gate = None
    if champion is not None and champion != version:
        gate = replay_gate(
            logged, campaign, registry.load(name, version), registry.load(name, champion),
            confidence=args.confidence,
        )  # fmt: skip
    if args.json:
        body = result.to_dict()
        body["against_champion"] = None if gate is None else _versus(gate)
        print_json(body)
        return 0
    level = f"{args.confidence:.0%}"
    print(
        f"replay of {name}:{version} on campaign {args.campaign}: {result.n} decisions with "
        f"an outcome (of {result.decisions})"
    )
    print(f"net value per decision ({level} intervals):")
    for e in result.net_value.estimates():
        print(f"  {e.method.upper():<6} {interval(e)}")
    print(
        f"  logged policy as run (observed, exploration and holdout included): "
        f"{interval(result.logged)}"
    )
    print(
        f"effective sample size {fmt(result.net_value.ess, 5)} of {result.n}; the candidate "
        f"takes the logged action in {result.agreement:.1%} of decisions"
    )
    mix = ", ".join(f"{k} {v:.1%}" for k, v in result.actions.items())
    print(f"candidate's actions: {mix}")
    if gate is not None:
        champ = gate.champion
        assert champ is not None
        d = gate.difference["dr"]
        print(
            f"against the champion {name}:{champion} (the same decisions, the same policy): "
            f"champion DR {interval(champ.net_value.dr)}; difference DR {interval(d)}"
        )
        verdict = "would promote" if gate.passed else "would refuse"
        print(
            f"`{launcher()} models promote {name} {version} --require-replay` (DR, margin 0) "
            f"{verdict}: promotion is judged against the champion, not the logged policy."
        )
    elif champion is None:
        print(f"model {name} has no champion yet; promotion needs no replay check")
    print_warnings(result.warnings)
    return 0


def _versus(gate: Any) -> dict[str, Any]:
    champion = gate.champion
    return {
        "champion": {"name": champion.model, "version": champion.version},
        "champion_net_value_per_decision": champion.net_value.to_dict(),
        "difference": {k: v.to_dict() for k, v in gate.difference.items()},
        "passes_promotion_check": gate.passed,
    }
