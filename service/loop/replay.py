"""Replay: the value a candidate model's policy would have had on the logged decisions.

The candidate keeps the campaign's policy (value, costs, do-not-contact rule, opt-outs)
and swaps in its own estimates; for evaluation it acts greedily, without exploration or
holdout. Its value per decision (value * outcome - contact cost) is estimated by IPS,
SNIPS and DR on the logged decisions that have an outcome.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from datetime import UTC, datetime, timedelta
from typing import Any

import numpy as np
import numpy.typing as npt

from service.errors import DataError
from service.loop.logged import LoggedDecisions
from service.offpolicy import (
    Estimate,
    OffPolicyEvaluation,
    evaluate_policy,
    mean_with_interval,
    one_hot,
)
from service.policy import (
    Campaign,
    do_not_contact_flags,
    expected_values,
    greedy_actions,
    two_sided_level,
)
from service.registry import LoadedBundle
from service.scoring import FeatureSchema, servable

__all__ = [
    "REWARD_MODELS",
    "ReplayResult",
    "candidate_actions",
    "greedy_policy",
    "replay",
    "rewards",
]

FloatArray = npt.NDArray[np.float64]

REWARD_MODELS = ("logged", "candidate")
"""DR reward models: the logging model's estimates recorded with each decision (fitted
before those outcomes existed), or the candidate's own predictions."""


@dataclass(frozen=True, eq=False)
class ReplayResult:
    """A candidate policy's estimated value on a campaign's logged decisions.

    ``net_value`` is per decision (value * outcome - contact cost) and ``outcome`` the
    mean outcome per decision, each by IPS, SNIPS and DR; ``logged`` is the observed net
    value per decision of the policy that actually ran, for comparison. ``target`` holds
    the candidate's action probabilities on each evaluated decision (for paired
    comparisons); ``agreement`` is the share of decisions where it takes the logged action.
    """

    campaign: str
    model: str
    version: str
    decisions: int
    n: int
    net_value: OffPolicyEvaluation
    outcome: OffPolicyEvaluation
    logged: Estimate
    actions: dict[str, float]
    agreement: float
    reward_model: str
    target: FloatArray
    warnings: list[str] = field(default_factory=list)

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready fields (without the per-row target)."""
        return {
            "campaign": self.campaign,
            "model": {"name": self.model, "version": self.version},
            "decisions": self.decisions,
            "evaluated": self.n,
            "net_value_per_decision": self.net_value.to_dict(),
            "outcome_per_decision": self.outcome.to_dict(),
            "logged_policy_net_value": self.logged.to_dict(),
            "candidate_actions": self.actions,
            "agreement_with_log": self.agreement,
            "dr_reward_model": self.reward_model,
            "warnings": list(self.warnings),
        }


def rewards(logged: LoggedDecisions, campaign: Campaign) -> tuple[FloatArray, FloatArray]:
    """Per decision: net value ``value * outcome - cost of the logged action``, and the
    cost of every action (n, 1 + K) in the log's label order, from the campaign's costs."""
    known = {arm.name: float(arm.cost) for arm in campaign.arms}
    missing = [arm for arm in logged.arms if arm not in known]
    if missing:
        raise DataError(
            f"The log of campaign {logged.campaign!r} has arm(s) {missing} that the campaign "
            "file does not declare, so their cost is unknown; restore them or choose a "
            "window after the change (--since)."
        )
    costs = np.array([0.0] + [known[a] for a in logged.arms])
    net: FloatArray = logged.value * logged.outcome - costs[logged.action]
    return net, np.broadcast_to(costs, logged.action_probs.shape).astype(np.float64)


def candidate_actions(
    bundle: LoadedBundle, campaign: Campaign, logged: LoggedDecisions
) -> tuple[npt.NDArray[np.intp], FloatArray]:
    """The candidate's greedy action on each logged decision (index into ``logged.labels``)
    and its predicted outcome under each label, shape (n, 1 + K).

    Same policy as the service, without exploration or holdout: EV per arm from the
    candidate's uplift, do-not-contact from its upper bound at the campaign's confidence,
    opted-out customers never contacted.
    """
    schema = FeatureSchema.from_manifest(bundle.manifest["features"])
    table = schema.table_from_rows(logged.feature_rows(schema.names))
    level = two_sided_level(campaign.confidence)
    est = servable(bundle.model, compile=False).estimate(table, level)
    columns = campaign.arm_columns([str(a) for a in bundle.manifest["arms"]])
    tau, high = est.tau[:, columns], est.high[:, columns]
    opted_out = campaign.opted_out(logged.customer_ids())
    greedy = greedy_policy(tau, high, logged.value, campaign, opted_out)
    position = {label: j for j, label in enumerate(logged.labels)}
    absent = [arm for arm in campaign.arm_names if arm not in position]
    if absent:
        raise DataError(
            f"Campaign arm(s) {absent} never appear in the log of {logged.campaign!r}, so "
            "the log cannot support a policy that uses them; replay a window where the "
            "campaign already had those arms."
        )
    to_log = np.array([0] + [position[a] for a in campaign.arm_names], dtype=np.intp)
    predicted = np.zeros(logged.action_probs.shape)
    predicted[:, 0] = est.mu0
    predicted[:, to_log[1:]] = est.mu0[:, None] + tau
    return to_log[greedy], predicted


def greedy_policy(
    tau: FloatArray,
    high: FloatArray,
    values: FloatArray,
    campaign: Campaign,
    opted_out: npt.NDArray[np.bool_],
) -> npt.NDArray[np.intp]:
    """The campaign's policy without exploration or holdout: 0 (no contact) or arm 1..K.

    ``tau`` and ``high`` are (n, K) in the campaign's arm order, ``high`` the upper bound
    at the campaign's confidence (see :func:`~service.policy.two_sided_level`).
    """
    ev = expected_values(tau, values, campaign.costs)
    allowed = ~do_not_contact_flags(high, campaign.dnc_margin) & ~opted_out[:, None]
    return greedy_actions(ev, allowed)


def replay(
    logged: LoggedDecisions,
    campaign: Campaign,
    bundle: LoadedBundle,
    *,
    confidence: float = 0.95,
    reward_model: str = "logged",
) -> ReplayResult:
    """Estimate the value of ``bundle``'s greedy policy on the decisions with outcomes.

    Parameters
    ----------
    logged : decisions of the campaign (see :func:`~service.loop.read_logged`).
    campaign : the campaign's current policy.
    bundle : the candidate model version.
    confidence : level of the two-sided intervals.
    reward_model : ``"logged"`` (default) or ``"candidate"``, the outcome model of DR.

    References
    ----------
    Horvitz & Thompson (1952), JASA 47(260) (IPS); Swaminathan & Joachims (2015),
    NeurIPS 28 (SNIPS); Dudík, Langford & Li (2011), ICML (DR); Li, Chu, Langford &
    Wang (2011), Unbiased offline evaluation of contextual-bandit-based news article
    recommendation algorithms, WSDM (replaying a policy on logged decisions).
    """
    if reward_model not in REWARD_MODELS:
        raise DataError(f"reward_model={reward_model!r} must be one of {list(REWARD_MODELS)}.")
    done = logged.with_outcomes()
    if len(done) < 2:
        raise DataError(
            f"Campaign {logged.campaign!r} has {len(done)} decision(s) with an outcome in "
            "this window; post outcomes first, then replay."
        )
    net, costs = rewards(done, campaign)
    action, predicted = candidate_actions(bundle, campaign, done)
    target = one_hot(action, len(done.labels))
    if reward_model == "logged":
        predicted = np.column_stack([done.mu0, done.mu0[:, None] + done.tau])
    q_net = done.value[:, None] * predicted - costs
    common: dict[str, Any] = {"confidence": confidence, "warn": False}
    net_eval = evaluate_policy(
        target, done.action, done.action_probs, net, reward_model=q_net, **common
    )
    outcome_eval = evaluate_policy(
        target, done.action, done.action_probs, done.outcome, reward_model=predicted, **common
    )
    notes = list(net_eval.warnings)
    notes += _overlap_warning(bundle, done)
    missing = len(logged) - len(done)
    if missing:
        notes.append(f"{missing} of {len(logged)} decisions have no outcome yet and are left out.")
    return ReplayResult(
        campaign=logged.campaign,
        model=bundle.name,
        version=bundle.version,
        decisions=len(logged),
        n=len(done),
        net_value=net_eval,
        outcome=outcome_eval,
        logged=mean_with_interval(net, "observed", confidence),
        actions={label: float((action == j).mean()) for j, label in enumerate(done.labels)},
        agreement=float((action == done.action).mean()),
        reward_model=reward_model,
        target=target,
        warnings=notes,
    )


def _overlap_warning(bundle: LoadedBundle, logged: LoggedDecisions) -> list[str]:
    source = bundle.manifest.get("source_decisions")
    if not isinstance(source, dict) or source.get("campaign") != logged.campaign:
        return []
    first, last = source.get("first_decision_at"), source.get("last_decision_at")
    start, end = logged.first_last()
    if not (first and last and start and end) or end < first or start > last:
        return []
    return [
        f"{bundle.name}:{bundle.version} was trained on decisions of this campaign from "
        f"{first} to {last}, which overlap the replay window; a policy judged on its own "
        "training data looks better than it is. Replay on later decisions only "
        f"(--since {after(last)}: --since includes its own time, so this is one microsecond "
        "after the last training decision)."
    ]


def after(stamp: str) -> str:
    """The log time one microsecond after ``stamp`` (ISO 8601), the first time a
    ``--since`` bound excludes it (``--since`` is inclusive)."""
    moment = datetime.fromisoformat(stamp.replace("Z", "+00:00"))
    later = (moment + timedelta(microseconds=1)).astimezone(UTC)
    return later.isoformat(timespec="microseconds").replace("+00:00", "Z")
