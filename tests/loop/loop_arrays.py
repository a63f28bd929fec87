"""Replay on arrays: simulated logs and the true value of a candidate's policy.

Shared by the repeated-seeds coverage test and ``bench/loop.py``. Everything is the
production code path except HTTP and SQLite: the logging model's estimates go through
the campaign policy (``service.policy.decide``) with random draws, outcomes come from
the simulation's true law, and the candidate acts by the greedy policy replay uses
(``service.loop.greedy_policy``); the estimates are ``service.offpolicy``'s.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from service.loop import greedy_policy
from service.offpolicy import (
    OffPolicyEvaluation,
    RealizedLift,
    evaluate_policy,
    one_hot,
    realized_lift,
)
from service.policy import Campaign, decide, two_sided_level
from service.simulation import SimulatedCampaign, simulate

Estimates = tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]


def estimates(model: Any, X: Any, campaign: Campaign) -> Estimates:
    """(tau, mu0, low, high) in the campaign's arm order, at its do-not-contact level."""
    tau, mu0, low, high = model.predict_interval(
        X, confidence=two_sided_level(campaign.confidence)
    )
    columns = campaign.arm_columns([str(a) for a in model.arms_])
    return tau[:, columns], mu0, low[:, columns], high[:, columns]


@dataclass(frozen=True)
class LogResult:
    """One simulated log: the replay of the candidate and the realized lift, with truth."""

    replay: OffPolicyEvaluation
    true_value: float
    lift: RealizedLift
    true_targeted_lift: float
    true_policy_lift: float


def replay_log(
    sim: SimulatedCampaign, logged: Estimates, candidate: Estimates, campaign: Campaign, seed: int
) -> LogResult:
    """Log ``sim``'s customers with the logging estimates, then replay the candidate.

    The truth: the candidate's greedy policy's mean net value on these customers; the
    mean true uplift of the chosen arm over the customers the policy chose to contact;
    and ``sum_a P(a) tau_a`` per decision for the policy as run.
    """
    n = len(sim.y)
    # Not default_rng(seed): simulate() draws from that stream, and reusing it would tie
    # the exploration draws to the customers' features.
    rng = np.random.default_rng((seed, 1))
    tau, mu0, low, high = logged
    nobody = np.zeros(n, dtype=bool)
    batch = decide(
        tau, low, high, mu0, campaign.value, campaign.costs, nobody,
        (rng.random(n), rng.random(n), rng.random(n)),
        exploration=campaign.exploration, holdout=campaign.holdout, margin=campaign.dnc_margin,
    )  # fmt: skip
    expected = sim.expected_outcomes()
    y = (rng.random(n) < expected[np.arange(n), batch.action]).astype(float)
    costs = np.concatenate([[0.0], campaign.costs])
    net = campaign.value * y - costs[batch.action]
    q = campaign.value * np.column_stack([mu0, mu0[:, None] + tau]) - costs
    c_tau, _, _, c_high = candidate
    target = one_hot(greedy_policy(c_tau, c_high, np.full(n, campaign.value), campaign, nobody), 3)
    result = evaluate_policy(
        target, batch.action, batch.action_probs, net, reward_model=q, warn=False
    )
    truth = float((target * (campaign.value * expected - costs)).sum(axis=1).mean())
    lift = realized_lift(
        y, batch.action, batch.action_probs, batch.holdout, value=campaign.value,
        costs=campaign.costs, labels=list(campaign.action_labels()),
    )  # fmt: skip
    tau_all = expected - expected[:, :1]
    targeted = batch.chosen > 0
    true_targeted = float(tau_all[np.arange(n), batch.chosen][targeted].mean())
    true_policy = float((batch.action_probs * tau_all).sum(axis=1).mean())
    return LogResult(result, truth, lift, true_targeted, true_policy)


@dataclass
class Coverage:
    """How often each estimator's interval held the truth, and the intervals' widths."""

    reps: int = 0
    hits: dict[str, int] = field(default_factory=lambda: {"ips": 0, "snips": 0, "dr": 0})
    widths: dict[str, list[float]] = field(
        default_factory=lambda: {"ips": [], "snips": [], "dr": []}
    )
    ess: list[float] = field(default_factory=list)
    lift_hits: dict[str, int] = field(default_factory=lambda: {"targeted": 0, "policy": 0})
    lift_widths: dict[str, list[float]] = field(
        default_factory=lambda: {"targeted": [], "policy": []}
    )

    def rates(self) -> dict[str, float]:
        return {k: v / self.reps for k, v in self.hits.items()}

    def lift_rates(self) -> dict[str, float]:
        return {k: v / self.reps for k, v in self.lift_hits.items()}

    def mean_widths(self) -> dict[str, float]:
        return {k: float(np.mean(v)) for k, v in self.widths.items()}


def coverage(seeds: range, n: int, logging: Any, candidate: Any, campaign: Campaign) -> Coverage:
    """Replay the candidate on one fresh simulated log per seed; count interval hits.

    The models predict every seed's customers in one call (the per-call overhead of
    scikit-learn pipelines would otherwise dominate).
    """
    sims = [simulate("larkspur", n, random_state=seed) for seed in seeds]
    X = pd.concat([s.X for s in sims], ignore_index=True)
    both = [estimates(m, X, campaign) for m in (logging, candidate)]
    out = Coverage()
    for k, (seed, sim) in enumerate(zip(seeds, sims, strict=True)):
        rows = slice(k * n, (k + 1) * n)
        logged, cand = (tuple(a[rows] for a in e) for e in both)
        one = replay_log(sim, logged, cand, campaign, seed)  # type: ignore[arg-type]
        out.reps += 1
        out.ess.append(one.replay.ess)
        for est in one.replay.estimates():
            out.hits[est.method] += int(est.low <= one.true_value <= est.high)
            out.widths[est.method].append(est.high - est.low)
        t = one.lift.targeted
        if t is not None:
            out.lift_hits["targeted"] += int(
                t.difference.low <= one.true_targeted_lift <= t.difference.high
            )
            out.lift_widths["targeted"].append(t.difference.high - t.difference.low)
        out.lift_widths["policy"].append(one.lift.lift.high - one.lift.lift.low)
        out.lift_hits["policy"] += int(
            one.lift.lift.low <= one.true_policy_lift <= one.lift.lift.high
        )
    return out
