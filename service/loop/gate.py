"""Promotion by replay: a challenger must beat the champion on the logged decisions."""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from service.errors import DataError
from service.loop.logged import LoggedDecisions
from service.loop.replay import ReplayResult, replay, rewards
from service.offpolicy import Estimate, compare_policies
from service.policy import Campaign
from service.registry import LoadedBundle

__all__ = ["GATE_METHODS", "GATE_RULES", "ReplayGate", "replay_gate"]

GATE_METHODS = ("dr", "snips", "ips")
"""Estimators a promotion may be judged by; DR by default (lowest variance here)."""

GATE_RULES = ("estimate", "lower")
"""``estimate``: the estimated gain must exceed the margin; ``lower``: the lower end of
its interval must (stricter: the gain must be clear of the noise)."""


@dataclass(frozen=True)
class ReplayGate:
    """The verdict: does the challenger's estimated value beat the champion's by the margin?

    ``difference`` is challenger minus champion in net value per decision (paired, on
    the same decisions) by every estimator; the verdict uses ``method``'s point estimate
    (``rule="estimate"``) or the lower end of its interval (``rule="lower"``).
    """

    passed: bool
    method: str
    rule: str
    margin: float
    challenger: ReplayResult
    champion: ReplayResult | None
    difference: dict[str, Estimate]
    message: str
    warnings: list[str] = field(default_factory=list)

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready verdict."""
        return {
            "passed": self.passed,
            "method": self.method,
            "rule": self.rule,
            "margin": self.margin,
            "message": self.message,
            "difference": {k: v.to_dict() for k, v in self.difference.items()},
            "challenger": self.challenger.to_dict(),
            "champion": None if self.champion is None else self.champion.to_dict(),
            "warnings": list(self.warnings),
        }


def replay_gate(
    logged: LoggedDecisions,
    campaign: Campaign,
    challenger: LoadedBundle,
    champion: LoadedBundle | None,
    *,
    margin: float = 0.0,
    method: str = "dr",
    rule: str = "estimate",
    confidence: float = 0.95,
) -> ReplayGate:
    """Replay both models on the same decisions and judge the challenger.

    It passes when ``V(challenger) - V(champion) > margin`` by ``method`` (net value per
    decision, the campaign's currency) -- the estimate, or with ``rule="lower"`` the
    lower end of its interval -- or when there is no champion to beat.
    """
    if method not in GATE_METHODS:
        raise DataError(f"method={method!r} must be one of {list(GATE_METHODS)}.")
    if rule not in GATE_RULES:
        raise DataError(f"rule={rule!r} must be one of {list(GATE_RULES)}.")
    if not (math.isfinite(margin) and margin >= 0):
        raise DataError(
            f"margin={margin!r} must be a finite number >= 0 (net value per decision)."
        )
    mine = replay(logged, campaign, challenger, confidence=confidence)
    if champion is None:
        return ReplayGate(
            True, method, rule, margin, mine, None, {}, "There is no champion to beat.",
            mine.warnings,
        )  # fmt: skip
    theirs = replay(logged, campaign, champion, confidence=confidence)
    done = logged.with_outcomes()
    net, costs = rewards(done, campaign)
    predicted = np.column_stack([done.mu0, done.mu0[:, None] + done.tau])
    q_net = done.value[:, None] * predicted - costs
    diff = compare_policies(
        mine.target,
        theirs.target,
        done.action,
        done.action_probs,
        net,
        reward_model=q_net,
        confidence=confidence,
    )
    d = diff[method]
    passed = bool((d.value if rule == "estimate" else d.low) > margin)
    verb = "beats" if passed else "does not beat"
    how = "" if rule == "estimate" else " (lower end of the interval)"
    message = (
        f"{challenger.name}:{challenger.version} {verb} the champion "
        f"{champion.name}:{champion.version} by more than {margin:g} per decision{how} on "
        f"{mine.n} logged decisions of {logged.campaign!r}: {method.upper()} difference "
        f"{d.value:+.4g} [{d.low:+.4g}, {d.high:+.4g}] ({confidence:.0%} interval)."
    )
    notes = [*mine.warnings, *(f"champion: {w}" for w in theirs.warnings)]
    return ReplayGate(passed, method, rule, margin, mine, theirs, diff, message, notes)
