"""Request features -> model -> policy -> decision records, with no HTTP in sight.

:func:`decide_one` and :func:`decide_many` turn validated customers into decisions for
one campaign; :func:`rank_many` also cuts a contact list. Each returns a
:class:`Decided` whose ``records`` must be committed to the decision log
(:class:`~service.scoring.Committer`) before anything is shown to a caller; the views in
:mod:`service.scoring.views` turn it into response bodies.
"""

from __future__ import annotations

import hashlib
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import numpy.typing as npt
import orjson

from service.decisions import DecisionRecord, decision_id, utc_now
from service.errors import DataError
from service.policy import (
    DecisionBatch,
    RankResult,
    decide,
    pilot_decide,
    pilot_decide_one,
    rank,
    two_sided_level,
    uniform_draw,
    uniform_draws,
)
from service.policy import decide_one as policy_decide_one
from service.scoring.catalog import BoundCampaign
from service.scoring.estimates import Estimates
from service.scoring.features import FeatureTable, InvalidFeatures

__all__ = [
    "Decided",
    "Single",
    "decide_many",
    "decide_one",
    "rank_many",
]

Array = npt.NDArray[Any]


@dataclass(frozen=True, eq=False)
class Decided:
    """Decisions for one campaign, ready to be committed and shown.

    ``arm`` is the arm each decision's ``uplift`` refers to: the chosen arm (also when
    held out), or the arm with the best expected value when no contact was chosen.
    """

    bound: BoundCampaign
    ids: list[str]
    values: npt.NDArray[np.float64]
    estimates: Estimates
    batch: DecisionBatch
    input_reasons: list[list[str]]
    decision_ids: list[str]
    records: list[DecisionRecord]
    arm: npt.NDArray[np.intp]
    ranked: RankResult | None = None

    def __len__(self) -> int:
        return len(self.ids)


# -- deciding ------------------------------------------------------------------------------


@dataclass(frozen=True, eq=False)
class Single:
    """One customer's decision: the log record and the JSON-ready response."""

    record: DecisionRecord
    body: dict[str, Any]
    reasons: list[str]

    @property
    def records(self) -> list[DecisionRecord]:
        return [self.record]


def decide_one(
    bound: BoundCampaign, customer_id: str, features: Mapping[str, Any], value: float | None
) -> Single:
    """Decide for one customer in plain Python (compiled model, scalar policy)."""
    clean, input_reasons = bound.schema.check_row(features)
    campaign = bound.campaign
    est = bound.model.estimate_row(clean, two_sided_level(campaign.confidence))
    cols = bound.arm_index
    tau_all, low_all, high_all = est.tau[0].tolist(), est.low[0].tolist(), est.high[0].tolist()
    tau = [tau_all[j] for j in cols]
    low = [low_all[j] for j in cols]
    high = [high_all[j] for j in cols]
    mu0 = float(est.mu0[0])
    worth = campaign.value if value is None else float(value)
    costs = bound.cost_list
    draws = uniform_draw(campaign.salt, campaign.id, customer_id)
    if campaign.is_pilot:  # no model: the action is drawn at the pilot shares
        d = pilot_decide_one(campaign.shares(), customer_id in campaign.suppression, draws[1])
    else:
        d = policy_decide_one(
            tau, high, mu0, worth, costs, customer_id in campaign.suppression, draws,
            exploration=campaign.exploration, holdout=campaign.holdout,
            margin=campaign.dnc_margin,
        )  # fmt: skip
    labels = bound.labels
    model = (bound.bundle.name, bound.bundle.version)
    d_id = decision_id(campaign.id, customer_id, campaign.hash, model, clean, worth)
    record = DecisionRecord(
        decision_id=d_id, created_at=utc_now(), campaign=campaign.id, customer_id=customer_id,
        model_name=model[0], model_version=model[1], policy_hash=campaign.hash,
        features=clean, value=worth, arms=list(labels[1:]), tau=tau, low=low, high=high,
        mu0=mu0, action=labels[d.action], expected_value=d.expected_value,
        explored=d.explored, holdout=d.holdout, do_not_contact=d.do_not_contact,
        propensity=d.propensity, action_probs=dict(zip(labels, d.action_probs, strict=True)),
        mode="score",
    )  # fmt: skip
    k = d.chosen - 1 if d.chosen else max(range(len(tau)), key=d.ev_per_arm.__getitem__)
    reasons = d.reasons + input_reasons
    body = {
        "decision_id": d_id, "customer_id": customer_id, "campaign": campaign.id,
        "model": bound.model_ref, "policy_hash": campaign.hash, "action": labels[d.action],
        "arm": labels[k + 1], "uplift": tau[k], "uplift_low": low[k], "uplift_high": high[k],
        "confidence": campaign.confidence, "outcome_without_contact": mu0,
        "outcome_with_arm": mu0 + tau[k], "expected_value": d.expected_value,
        "do_not_contact": d.do_not_contact, "explored": d.explored, "holdout": d.holdout,
        "propensity": d.propensity, "reasons": reasons,
        "arms": [
            {
                "arm": labels[j + 1], "cost": costs[j], "uplift": tau[j],
                "uplift_low": low[j], "uplift_high": high[j], "outcome": mu0 + tau[j],
                "expected_value": d.ev_per_arm[j], "do_not_contact": d.dnc_per_arm[j],
            }
            for j in range(len(tau))
        ],
    }  # fmt: skip
    return Single(record, body, reasons)


def decide_many(
    bound: BoundCampaign, ids: Sequence[str], table: FeatureTable, values: Sequence[Any] | None
) -> Decided:
    """Decide for many customers at once (vectorised)."""
    estimates, value_array = _estimate(bound, ids, table, values)
    return _decide(bound, list(ids), _feature_rows(table), value_array, estimates,
                   table.reasons, None)  # fmt: skip


def rank_many(
    bound: BoundCampaign,
    ids: Sequence[str],
    table: FeatureTable,
    values: Sequence[Any] | None,
    *,
    capacity: int | None,
    budget: float | None,
) -> Decided:
    """Decide for candidates and cut the contact list at capacity and/or budget.

    Without either limit the campaign's default capacity applies. The decision ids of a
    ranked list also depend on the list request (candidates, limits), since the cut
    decides who is contacted; a retried identical request gets the same ids.
    """
    _refuse_duplicates(ids)
    if capacity is None and budget is None:
        capacity = bound.campaign.capacity
        if capacity is None:
            raise DataError(
                f"No limit for the list: the request gives neither capacity nor budget and "
                f"campaign {bound.campaign.id!r} sets no default capacity, so every candidate "
                "would be listed. Send capacity and/or budget, or set capacity in the "
                "campaign file."
            )
    estimates, value_array = _estimate(bound, ids, table, values)
    context = _rank_context(ids, capacity, budget)
    return _decide(bound, list(ids), _feature_rows(table), value_array, estimates,
                   table.reasons, (capacity, budget, context))  # fmt: skip


def _estimate(
    bound: BoundCampaign, ids: Sequence[str], table: FeatureTable, values: Sequence[Any] | None
) -> tuple[Estimates, npt.NDArray[np.float64]]:
    if len(ids) != len(table):
        raise DataError(f"{len(ids)} ids for {len(table)} feature rows; send one id per row.")
    value_array = _values(bound, values if values is not None else [None] * len(ids))
    if not len(ids):
        k = len(bound.arm_columns)
        empty = np.empty((0, k))
        return Estimates(empty, np.empty(0), empty, empty), value_array
    level = two_sided_level(bound.campaign.confidence)
    return bound.model.estimate(table, level).take(bound.arm_columns), value_array


def _decide(
    bound: BoundCampaign,
    ids: list[str],
    features: list[dict[str, Any]],
    values: npt.NDArray[np.float64],
    est: Estimates,
    input_reasons: list[list[str]],
    ranking: tuple[int | None, float | None, str] | None,
) -> Decided:
    campaign = bound.campaign
    draws = uniform_draws(campaign.salt, campaign.id, ids)
    if campaign.is_pilot:  # no model: the action is drawn at the pilot shares
        batch = pilot_decide(campaign.shares(), campaign.opted_out(ids), draws[1])
    else:
        batch = decide(
            est.tau, est.low, est.high, est.mu0, values, campaign.costs,
            campaign.opted_out(ids), draws,
            exploration=campaign.exploration, holdout=campaign.holdout,
            margin=campaign.dnc_margin,
        )  # fmt: skip
    costs = campaign.costs
    ranked = None
    if ranking is not None:
        ranked = rank(batch, ids, capacity=ranking[0], budget=ranking[1], costs=costs)
    model = (bound.bundle.name, bound.bundle.version)
    value_list = values.tolist()
    context = "score" if ranking is None else ranking[2]
    ids_out = [
        decision_id(campaign.id, i, campaign.hash, model, f, v, context=context)
        for i, f, v in zip(ids, features, value_list, strict=True)
    ]
    arm = np.where(batch.chosen > 0, batch.chosen, np.argmax(batch.ev_per_arm, axis=1) + 1)
    decided = Decided(
        bound=bound, ids=ids, values=values, estimates=est, batch=batch,
        input_reasons=input_reasons, decision_ids=ids_out, records=[],
        arm=arm.astype(np.intp), ranked=ranked,
    )  # fmt: skip
    decided.records.extend(_records(decided, features))
    return decided


def _values(bound: BoundCampaign, values: Sequence[Any]) -> npt.NDArray[np.float64]:
    default = bound.campaign.value
    out = np.empty(len(values))
    problems = []
    for i, v in enumerate(values):
        if v is None:
            out[i] = default
        elif type(v) in (int, float) and np.isfinite(v) and v > 0:
            out[i] = v
        else:
            problems.append(
                {"row": i, "feature": "value", "problem": f"must be a finite number > 0, "
                 f"got {v!r}; send null to use the campaign's value ({default})"}
            )  # fmt: skip
    if problems:
        raise InvalidFeatures(problems)
    return out


def _refuse_duplicates(ids: Sequence[str]) -> None:
    if len(set(ids)) != len(ids):
        seen: set[str] = set()
        repeated = sorted({i for i in ids if i in seen or seen.add(i)})  # type: ignore[func-returns-value]
        raise DataError(
            f"Candidate id(s) {repeated[:10]} appear more than once; send each customer once."
        )


def _rank_context(ids: Sequence[str], capacity: int | None, budget: float | None) -> str:
    digest = hashlib.blake2b(orjson.dumps([sorted(ids), capacity, budget]), digest_size=16)
    return "rank:" + digest.hexdigest()


def _feature_rows(table: FeatureTable) -> list[dict[str, Any]]:
    names = list(table.columns)
    lists = []
    for column in table.columns.values():
        if column.dtype == object:
            lists.append(column.tolist())
        else:
            lists.append(np.where(np.isnan(column), np.array(None), column).tolist())
    return [dict(zip(names, row, strict=True)) for row in zip(*lists, strict=True)]


def _records(decided: Decided, features: list[dict[str, Any]]) -> list[DecisionRecord]:
    bound, batch, est, ranked = decided.bound, decided.batch, decided.estimates, decided.ranked
    campaign = bound.campaign
    labels = list(campaign.action_labels())
    arms = labels[1:]
    if ranked is None:
        action, probs, held, mode = batch.action, batch.action_probs, batch.holdout, "score"
        propensity = batch.propensity
    else:
        action, probs, held, mode = ranked.action, ranked.action_probs, ranked.holdout, "rank"
        propensity = ranked.propensity
    ev = np.column_stack([np.zeros(len(action)), batch.ev_per_arm])[np.arange(len(action)), action]
    created = utc_now()
    name, version = bound.bundle.name, bound.bundle.version
    columns = zip(
        decided.decision_ids, decided.ids, features, decided.values.tolist(),
        est.tau.tolist(), est.low.tolist(), est.high.tolist(), est.mu0.tolist(),
        action.tolist(), ev.tolist(), batch.explored.tolist(), held.tolist(),
        batch.do_not_contact.tolist(), propensity.tolist(), probs.tolist(), strict=True,
    )  # fmt: skip
    return [
        DecisionRecord(
            decision_id=d_id,
            created_at=created,
            campaign=campaign.id,
            customer_id=cid,
            model_name=name,
            model_version=version,
            policy_hash=campaign.hash,
            features=f,
            value=v,
            arms=arms,
            tau=tau,
            low=low,
            high=high,
            mu0=mu0,
            action=labels[a],
            expected_value=e,
            explored=x,
            holdout=h,
            do_not_contact=dnc,
            propensity=p,
            action_probs=dict(zip(labels, pr, strict=True)),
            mode=mode,
        )  # fmt: skip
        for (d_id, cid, f, v, tau, low, high, mu0, a, e, x, h, dnc, p, pr) in columns
    ]
