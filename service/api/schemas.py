"""Request and response bodies of the HTTP API, named by role.

Feature values are JSON scalars; their meaning (number or category) is checked against
the model's feature schema in :mod:`service.scoring`, which names the offending field.
Response models document the wire format; the hot endpoints render the same fields
straight from the scoring results.
"""

from __future__ import annotations

from typing import Annotated, Any, Literal

from pydantic import BaseModel, ConfigDict, Field, SkipValidation, field_validator, model_validator

__all__ = [
    "ArmEstimate",
    "BatchDecisions",
    "BatchScoreRequest",
    "CampaignInfo",
    "CampaignList",
    "Contact",
    "Customer",
    "Decision",
    "DecisionColumns",
    "ErrorBody",
    "ErrorInfo",
    "Excluded",
    "FeatureValue",
    "Health",
    "ModelInfo",
    "ModelList",
    "ModelRef",
    "PromoteRequest",
    "PromoteResult",
    "RankRequest",
    "RankedList",
    "RankTotals",
    "Readiness",
    "ReloadResult",
    "ScoreRequest",
]

FeatureValue = float | int | str | bool | None
"""A feature value as sent: a number, a category (text or boolean), or null for missing."""

CustomerId = Annotated[str, Field(min_length=1, max_length=256)]
_Name = Annotated[str, Field(min_length=1, max_length=200)]
_Value = Annotated[float, Field(gt=0, allow_inf_nan=False)]
MAX_CAPACITY = 1_000_000_000
"""Largest ``capacity`` of a ranked list (far above any batch the service accepts)."""


class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid")


# -- requests --------------------------------------------------------------------------


class Customer(_Strict):
    """One customer to decide on."""

    id: CustomerId = Field(description="Your customer id; the same id gets the same draws.")
    features: dict[str, FeatureValue] = Field(
        default_factory=dict, description="Feature values by name; omit or null if missing."
    )
    value: _Value | None = Field(
        None, description="Value of a conversion for this customer (overrides the campaign's)."
    )


class ScoreRequest(_Strict):
    """``POST /v1/score``: one customer of one campaign."""

    campaign: _Name
    customer: Customer


class BatchScoreRequest(_Strict):
    """``POST /v1/score/batch``: many customers, row-wise or column-wise.

    Column form: ``columns`` maps ``"id"`` (required), optionally ``"value"``, and each
    feature name to a list with one entry per customer; it is much cheaper to send and
    to parse for large batches, and the response then comes in column form too.

    The columns' entries are not checked here, only that each column is a list: the
    feature schema, the id and the value checks read every entry anyway and name the
    row and field of a bad one (:func:`service.api.candidates.candidates`). Checking each
    entry against ``FeatureValue`` here too cost about three times the JSON parse.
    """

    campaign: _Name
    customers: list[Customer] | None = None
    columns: dict[str, SkipValidation[list[FeatureValue]]] | None = None

    @field_validator("columns")
    @classmethod
    def _lists(cls, columns: dict[str, Any] | None) -> dict[str, Any] | None:
        for name, values in (columns or {}).items():
            if type(values) is not list:
                raise ValueError(
                    f"column {name!r} must be a list with one entry per customer (null "
                    f"where missing), got {type(values).__name__}"
                )
        return columns

    @model_validator(mode="after")
    def _one_form(self) -> BatchScoreRequest:
        if (self.customers is None) == (self.columns is None):
            raise ValueError("send exactly one of 'customers' (rows) or 'columns' (columns)")
        return self


class RankRequest(BatchScoreRequest):
    """``POST /v1/rank``: candidates plus the capacity and/or budget of the contact list.

    Without either, the campaign's default capacity applies.
    """

    capacity: int | None = Field(None, ge=0, le=MAX_CAPACITY, description="Most contacts to make.")
    budget: float | None = Field(
        None, ge=0, allow_inf_nan=False, description="Most contact cost to spend."
    )


class PromoteRequest(_Strict):
    """``POST /v1/admin/models/{name}/promote``."""

    version: _Name
    reason: str = Field(min_length=1, max_length=2000, description="Why, for the audit trail.")


# -- responses -------------------------------------------------------------------------


class ModelRef(BaseModel):
    """The model that made a decision."""

    name: str
    version: str


class ArmEstimate(BaseModel):
    """Estimates for one contact arm of one customer."""

    arm: str
    cost: float
    uplift: float
    uplift_low: float
    uplift_high: float
    outcome: float = Field(description="Expected outcome if contacted through this arm.")
    expected_value: float = Field(description="value * uplift - cost")
    do_not_contact: bool = Field(description="Upper bound of the uplift is below -margin.")


class Decision(BaseModel):
    """One decision, committed to the decision log before it is returned."""

    decision_id: str
    customer_id: str
    campaign: str
    model: ModelRef
    policy_hash: str
    action: str = Field(description="The arm to use, or 'none' for no contact.")
    arm: str = Field(
        description="Arm the uplift fields describe: the chosen arm (also when held out), "
        "else the arm with the best expected value."
    )
    uplift: float = Field(description="Estimated uplift of `arm` against no contact.")
    uplift_low: float = Field(description="Lower bound, one-sided at `confidence`.")
    uplift_high: float = Field(description="Upper bound, one-sided at `confidence`.")
    confidence: float = Field(description="The campaign's one-sided confidence level.")
    outcome_without_contact: float
    outcome_with_arm: float = Field(description="Expected outcome if contacted via `arm`.")
    expected_value: float = Field(description="Expected value of the action taken.")
    do_not_contact: bool
    explored: bool
    holdout: bool
    propensity: float = Field(description="Exact probability of the action taken.")
    reasons: list[str]
    arms: list[ArmEstimate]


class BatchDecisions(BaseModel):
    """Decisions for a row-wise batch, in request order."""

    campaign: str
    model: ModelRef
    count: int
    decisions: list[Decision]


class DecisionColumns(BaseModel):
    """Decisions for a column-form batch: one list per field, in request order.

    ``arms`` maps each arm to its per-customer columns (``uplift``, ``uplift_low``,
    ``uplift_high``, ``expected_value``, ``do_not_contact``).
    """

    campaign: str
    model: ModelRef
    policy_hash: str
    confidence: float
    count: int
    columns: dict[str, list[Any]]
    arms: dict[str, dict[str, list[Any]]]


class Contact(BaseModel):
    """One entry of a ranked contact list."""

    rank: int
    customer_id: str
    decision_id: str
    arm: str = Field(description="Channel to use; for a holdout, the arm that was withheld.")
    contact: bool = Field(description="False for a holdout: keep it uncontacted as control.")
    expected_value: float
    uplift: float
    cost: float
    propensity: float
    explored: bool
    holdout: bool


class Excluded(BaseModel):
    """A candidate left off the contact list, with the reason."""

    customer_id: str
    decision_id: str
    reason: Literal[
        "opted_out",
        "do_not_contact",
        "no_positive_value",
        "explored",
        "beyond_capacity",
        "beyond_budget",
    ] = Field(description="'explored': exploration drew no contact for this customer.")


class RankTotals(BaseModel):
    """Sums over the ranked list."""

    candidates: int
    contacts: int
    held_out: int
    excluded: int
    expected_value: float
    cost: float


class RankedList(BaseModel):
    """``POST /v1/rank``: the ordered contact list and the excluded candidates."""

    campaign: str
    model: ModelRef
    policy_hash: str
    capacity: int | None
    budget: float | None
    contacts: list[Contact]
    excluded: list[Excluded]
    totals: RankTotals


class ModelInfo(BaseModel):
    """A registered model: versions, champion and challenger, and what serves it here."""

    name: str
    versions: list[str]
    champion: str | None
    challenger: str | None
    serving: dict[str, str] = Field(description="Campaign -> version it is scored with.")
    serving_forms: dict[str, str] = Field(
        default_factory=dict,
        description="Campaign -> form of that version it is scored with: 'compact' (the "
        "full-data fit and a model of the bootstrap spread) or 'full' (every refit).",
    )
    features: list[dict[str, Any]]
    arms: list[str]
    outcome_type: str | None


class ModelList(BaseModel):
    """``GET /v1/models``."""

    models: list[ModelInfo]


class CampaignInfo(BaseModel):
    """A campaign policy as loaded, and the model serving it."""

    name: str
    model: str | None = Field(description="Registry name; null for a randomized pilot.")
    model_version: str | None = Field(description="Serving version; null when not loaded.")
    pinned: bool
    policy_hash: str
    arms: dict[str, float] = Field(description="Contact cost per arm.")
    value: float
    exploration: float
    holdout: float
    capacity: int | None
    confidence: float
    dnc_margin: float
    suppressed: int = Field(description="Number of opted-out ids on the suppression list.")
    ready: bool
    problem: str | None


class CampaignList(BaseModel):
    """``GET /v1/campaigns``, with the responsible-use notice."""

    notice: str
    campaigns: list[CampaignInfo]


class ReloadResult(BaseModel):
    """``POST /v1/admin/campaigns/reload``."""

    campaigns: list[CampaignInfo]


class PromoteResult(BaseModel):
    """``POST /v1/admin/models/{name}/promote``."""

    name: str
    champion: str
    previous: str | None
    campaigns: list[str] = Field(description="Campaigns now scored with the new champion.")


class Health(BaseModel):
    """``GET /healthz``."""

    status: Literal["ok"]


class Readiness(BaseModel):
    """``GET /readyz``."""

    ready: bool
    problems: list[str]
    campaigns: dict[str, str] = Field(description="Campaign -> serving 'model@version'.")
    forms: dict[str, str] = Field(
        default_factory=dict, description="Campaign -> serving form, 'compact' or 'full'."
    )


class ErrorInfo(BaseModel):
    """What went wrong."""

    code: str
    message: str
    details: Any = None


class ErrorBody(BaseModel):
    """The one error shape of every failure."""

    error: ErrorInfo
