"""Request and response bodies of the learning-loop endpoints: outcomes and lift."""

from __future__ import annotations

from typing import Annotated

from pydantic import BaseModel, ConfigDict, Field, StrictBool

__all__ = [
    "AlternativeValue",
    "CorrectionBody",
    "CorrectionRequest",
    "EstimateBody",
    "LiftReportBody",
    "LiftWindow",
    "OutcomeIn",
    "OutcomeReceiptBody",
    "OutcomesRequest",
    "PolicyEstimates",
    "PolicyLift",
    "TargetedLiftBody",
]


class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid")


# A JSON number, never a string such as "1"; the store then checks it against the
# outcome type of the decision's model (0/1 for binary) and a bound on amounts.
OutcomeValue = StrictBool | Annotated[float, Field(strict=True, allow_inf_nan=False)]


class OutcomeIn(_Strict):
    """The observed outcome of one logged decision."""

    decision_id: Annotated[str, Field(min_length=1, max_length=200)] = Field(
        description="The `decision_id` the service returned for the decision."
    )
    outcome: OutcomeValue = Field(
        description="1/0 (or true/false) for a binary outcome, or an amount such as revenue "
        "(within +/-1e9)."
    )
    observed_at: Annotated[str, Field(max_length=64)] | None = Field(
        None, description="When it was observed: ISO 8601 with a UTC offset."
    )


class OutcomesRequest(_Strict):
    """Outcomes to record; all are stored, or none when one conflicts."""

    outcomes: list[OutcomeIn] = Field(min_length=1, description="One entry per decision.")


class CorrectionRequest(_Strict):
    """An explicit correction of a recorded outcome, with the reason."""

    outcome: OutcomeValue = Field(description="The corrected outcome.")
    observed_at: Annotated[str, Field(max_length=64)] | None = Field(
        None, description="When it was observed: ISO 8601 with a UTC offset."
    )
    reason: Annotated[str, Field(min_length=1, max_length=1000)] = Field(
        description="Why the recorded outcome was wrong (kept in the audit trail)."
    )


class OutcomeValueBody(BaseModel):
    """An outcome as stored."""

    decision_id: str
    outcome: float
    observed_at: str | None


class CorrectionBody(BaseModel):
    """What a correction changed, by whom, when and why."""

    decision_id: str
    previous: OutcomeValueBody
    outcome: OutcomeValueBody
    actor: str
    reason: str
    corrected_at: str


class OutcomeReceiptBody(BaseModel):
    """What the request did."""

    recorded: int = Field(description="Outcomes stored now.")
    unchanged: int = Field(description="Outcomes already stored with the same value (no-op).")
    unknown: int = Field(description="Outcomes whose decision_id is not in the log.")
    unknown_ids: list[str] = Field(description="Those decision ids; nothing was stored for them.")


class EstimateBody(BaseModel):
    """An estimate with its two-sided normal interval."""

    estimate: float
    low: float
    high: float
    std_error: float


class LiftWindow(BaseModel):
    """The time window asked for and the decisions it held."""

    since: str | None
    until: str | None
    first_decision_at: str | None
    last_decision_at: str | None


class TargetedLiftBody(BaseModel):
    """Contacted vs randomized holdout among the customers the policy chose to contact."""

    contacted: int
    held_out: int
    contacted_mean: float = Field(description="Outcome rate (or mean amount) of the contacted.")
    holdout_mean: float = Field(description="Outcome rate (or mean amount) of the held out.")
    lift: EstimateBody = Field(description="Contacted minus held out, per contact.")
    incremental_outcome: EstimateBody = Field(description="Lift times the number contacted.")
    incremental_profit: EstimateBody = Field(
        description="Value-weighted lift times the number contacted, minus contact cost."
    )
    contact_cost: float


class PolicyLift(BaseModel):
    """The policy as run vs contacting no one, over every decision with an outcome."""

    outcome_per_decision: EstimateBody
    net_value_per_decision: EstimateBody
    lift_vs_no_one: EstimateBody
    profit_lift_vs_no_one: EstimateBody
    incremental_outcome: EstimateBody
    incremental_profit: EstimateBody


class PolicyEstimates(BaseModel):
    """A policy's value per decision by IPS, SNIPS and DR, with the weights' diagnostics."""

    ips: EstimateBody
    snips: EstimateBody
    dr: EstimateBody | None = None
    ess: float = Field(description="Kish's effective sample size of the importance weights.")
    support_ok: bool = Field(description="False when the log lacks support for this policy.")


class AlternativeValue(BaseModel):
    """A simple policy's estimated value on the same decisions."""

    policy: str
    outcome_per_decision: PolicyEstimates
    net_value_per_decision: PolicyEstimates


class LiftReportBody(BaseModel):
    """Realized lift of a campaign, measured against its randomized control."""

    campaign: str
    window: LiftWindow
    decisions: int = Field(description="Decisions in the window.")
    with_outcome: int = Field(description="Of which with an outcome (the ones analysed).")
    outcome_coverage: dict[str, float]
    outcome_type: str
    confidence: float
    costs: dict[str, float]
    targeted: TargetedLiftBody | None
    policy: PolicyLift
    alternatives: dict[str, AlternativeValue]
    best_arm_for_everyone: str | None
    reading: str
    warnings: list[str]
