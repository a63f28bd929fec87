"""The realized lift of a campaign from its decision log: the report behind
``GET /v1/campaigns/{id}/lift`` and ``upshot lift``."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

from service.errors import DataError
from service.loop.logged import LoggedDecisions
from service.offpolicy import Estimate, OffPolicyEvaluation, RealizedLift, realized_lift
from service.policy import Campaign

__all__ = ["COVERAGE_GAP", "LiftReport", "campaign_lift"]

# Common practice, no source: outcome coverage that differs by more than 5 points between
# the contacted and the held-out decisions can bias their comparison noticeably.
COVERAGE_GAP = 0.05

_READING = (
    "targeted: contacted vs randomized holdout among the customers the policy chose to "
    "contact (the effect of the contacts made); policy: observed outcome per decision vs "
    "the IPS estimate of contacting no one (holdout and exploration 'none' rows, weighted "
    "by their logged probability); alternatives: IPS/SNIPS/DR estimates of simple policies "
    "on the same decisions. Intervals are two-sided normal intervals."
)


@dataclass(frozen=True)
class LiftReport:
    """Realized lift of one campaign over a window, with outcome coverage and warnings."""

    campaign: str
    since: str | None
    until: str | None
    first_decision_at: str | None
    last_decision_at: str | None
    decisions: int
    with_outcome: int
    coverage: dict[str, float]
    costs: dict[str, float]
    lift: RealizedLift
    warnings: list[str] = field(default_factory=list)

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready report (the API's response body)."""
        lift = self.lift
        t = lift.targeted
        return {
            "campaign": self.campaign,
            "window": {
                "since": self.since,
                "until": self.until,
                "first_decision_at": self.first_decision_at,
                "last_decision_at": self.last_decision_at,
            },
            "decisions": self.decisions,
            "with_outcome": self.with_outcome,
            "outcome_coverage": self.coverage,
            "outcome_type": lift.outcome_type,
            "confidence": lift.confidence,
            "costs": self.costs,
            "targeted": None
            if t is None
            else {
                "contacted": t.n_contacted,
                "held_out": t.n_holdout,
                "contacted_mean": t.contacted_mean,
                "holdout_mean": t.holdout_mean,
                "lift": _interval(t.difference),
                "incremental_outcome": _interval(t.incremental_outcome),
                "incremental_profit": _interval(t.incremental_profit),
                "contact_cost": t.contact_cost,
            },
            "policy": {
                "outcome_per_decision": _interval(lift.policy_outcome),
                "net_value_per_decision": _interval(lift.policy_net_value),
                "lift_vs_no_one": _interval(lift.lift),
                "profit_lift_vs_no_one": _interval(lift.profit_lift),
                "incremental_outcome": _interval(lift.incremental_outcome),
                "incremental_profit": _interval(lift.incremental_profit),
            },
            "alternatives": {
                label: {
                    "policy": alt.name,
                    "outcome_per_decision": _evaluation(alt.outcome),
                    "net_value_per_decision": _evaluation(alt.net_value),
                }
                for label, alt in lift.alternatives.items()
            },
            "best_arm_for_everyone": lift.best_arm,
            "reading": _READING,
            "warnings": list(self.warnings),
        }


def _interval(e: Estimate) -> dict[str, float]:
    return {"estimate": e.value, "low": e.low, "high": e.high, "std_error": e.std_error}


def _evaluation(e: OffPolicyEvaluation) -> dict[str, Any]:
    out: dict[str, Any] = {m.method: _interval(m) for m in e.estimates()}
    out["ess"] = e.ess
    out["support_ok"] = e.support.ok
    return out


def campaign_lift(
    logged: LoggedDecisions, campaign: Campaign, *, confidence: float = 0.95
) -> LiftReport:
    """Realized lift of the decisions in ``logged`` that have an outcome.

    Contact costs come from the campaign's current definition; per-customer values from
    each decision as logged.
    """
    costs = _costs(logged, campaign)
    done = logged.with_outcomes()
    if len(done) < 2:
        raise DataError(
            f"Campaign {logged.campaign!r} has {len(done)} decision(s) with an outcome in "
            "this window; post outcomes (POST /v1/outcomes or `upshot outcomes import`), "
            "for contacted and non-contacted customers alike, then ask again."
        )
    if np.all(done.action_probs.max(axis=1) >= 1.0 - 1e-12):
        raise DataError(
            f"Campaign {logged.campaign!r} has no randomized share in this window: every "
            "decision's action was certain (holdout and exploration were 0 when they were "
            "made), so there is no random control to measure a lift or an incremental profit "
            "against. Set holdout (e.g. 0.10) and/or exploration (e.g. 0.05) in the campaign "
            "file, or run a pilot, and measure on the decisions made after that."
        )
    reward_model = np.column_stack([done.mu0, done.mu0[:, None] + done.tau])
    lift = realized_lift(
        done.outcome,
        done.action,
        done.action_probs,
        done.holdout,
        value=done.value,
        costs=[costs[arm] for arm in logged.arms],
        labels=logged.labels,
        reward_model=reward_model,
        confidence=confidence,
    )
    coverage = _coverage(logged)
    first, last = logged.first_last()
    return LiftReport(
        campaign=logged.campaign,
        since=logged.since,
        until=logged.until,
        first_decision_at=first,
        last_decision_at=last,
        decisions=len(logged),
        with_outcome=len(done),
        coverage=coverage,
        costs=costs,
        lift=lift,
        warnings=_coverage_warnings(logged, coverage) + _pilot_notes(campaign, lift.warnings),
    )


def _pilot_notes(campaign: Campaign, warnings: list[str]) -> list[str]:
    # A pilot has no holdout by design: every action is a random draw, and its lift is
    # the policy-vs-no-one comparison; the holdout advice does not apply to it.
    if not campaign.is_pilot:
        return list(warnings)
    kept = [w for w in warnings if not w.startswith("The targeted comparison")]
    return [
        "randomized pilot: every action was drawn at the pilot shares, so the lift is the "
        "comparison with contacting no one (there is no holdout among chosen contacts)",
        *kept,
    ]


def _costs(logged: LoggedDecisions, campaign: Campaign) -> dict[str, float]:
    known = {arm.name: float(arm.cost) for arm in campaign.arms}
    missing = [arm for arm in logged.arms if arm not in known]
    if missing:
        raise DataError(
            f"The log of campaign {logged.campaign!r} has arm(s) {missing} that the campaign "
            "file no longer declares, so their contact cost is unknown; restore them in the "
            "campaign file or choose a window (--since/--until) after the change."
        )
    return {arm: known[arm] for arm in logged.arms}


def _coverage(logged: LoggedDecisions) -> dict[str, float]:
    has = logged.has_outcome
    groups = {"all": np.ones(len(logged), dtype=bool)}
    groups["contacted"] = logged.action > 0
    groups["held_out"] = logged.holdout
    groups["not_contacted"] = (logged.action == 0) & ~logged.holdout
    return {k: float(has[m].mean()) for k, m in groups.items() if m.any()}


def _coverage_warnings(logged: LoggedDecisions, coverage: dict[str, float]) -> list[str]:
    notes = []
    missing = int((~logged.has_outcome).sum())
    if missing:
        notes.append(
            f"{missing} of {len(logged)} decisions have no outcome yet and are left out; "
            "post outcomes for every decision, not only for customers who responded (a "
            "non-response is an outcome of 0)."
        )
    if "contacted" in coverage and "held_out" in coverage:
        gap = abs(coverage["contacted"] - coverage["held_out"])
        if gap > COVERAGE_GAP:
            notes.append(
                f"Outcomes arrived for {coverage['contacted']:.0%} of contacted but "
                f"{coverage['held_out']:.0%} of held-out decisions; unequal coverage biases "
                "the comparison. Wait for the outcomes to mature or post the missing ones."
            )
    return notes
