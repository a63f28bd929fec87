"""Request features -> model -> policy -> decisions in column form, with no HTTP in sight.

One customer: :func:`decide_one` (scalar Python, the latency path) returns a
:class:`Single` with its log record and response body.

Many customers are decided in chunks, so memory stays bounded whatever the list size,
and each chunk is handed to the log as one :class:`~service.decisions.DecisionColumns`
(no Python object per customer on the way):

- :func:`decide_chunk` (validated features of one chunk -> model -> policy): a
  :class:`Decided` with the estimates, the :class:`~service.policy.DecisionBatch` and the
  canonical feature JSON of every row.
- :func:`emit_columns` (a decided chunk -> ``DecisionColumns`` with decision ids), to
  commit to the log *before* anything of the chunk is shown to a caller; the views in
  :mod:`service.scoring.views` turn a chunk and its columns into response bodies.
- Ranked lists cut globally: decide every chunk, then :func:`rank_chunks` ranks the
  concatenation with :func:`service.policy.rank` (it needs only the ids and each chunk's
  ``DecisionBatch``; their ``reasons`` may be dropped), then :func:`emit_columns` with the
  :class:`Ranking` and the chunk's row offset gives each chunk's columns in mode
  ``rank``. A caller reading chunks from a file may keep the decided chunks or decide
  them again on a second pass: the same input gives the same decisions.

Sketch of a ranked list over an external chunk source::

    chunks = [decide_chunk(bound, ids, table, values) for ids, table, values in source]
    ranking = rank_chunks(bound, [i for c in chunks for i in c.ids],
                          [c.batch for c in chunks], capacity=500, budget=None)
    offset = 0
    for chunk in chunks:
        log.append_columns_sync([emit_columns(chunk, ranking, offset)])
        offset += len(chunk)

Every function gives exactly the decisions, ids and propensities of the scalar
reference (:func:`service.policy.decide_one` per customer); tests compare them row by
row.
"""

from __future__ import annotations

import hashlib
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, fields
from typing import Any

import numpy as np
import numpy.typing as npt
import orjson

from service.decisions import DecisionColumns, DecisionRecord, decision_id, utc_now
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
from service.scoring.canonical import decision_ids, feature_json
from service.scoring.catalog import BoundCampaign
from service.scoring.estimates import Estimates
from service.scoring.features import FeatureTable, InvalidFeatures

__all__ = [
    "CHUNK_ROWS",
    "Decided",
    "Ranking",
    "Single",
    "decide_chunk",
    "decide_one",
    "emit_columns",
    "rank_chunks",
    "refuse_duplicates",
    "resolve_values",
]

FloatArray = npt.NDArray[np.float64]

CHUNK_ROWS = 10_000
"""Customers per chunk in the service: large enough that per-call costs vanish, small
enough that a chunk's intermediate arrays and log rows stay a few megabytes."""


# -- one customer --------------------------------------------------------------------------


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


# -- many customers, in chunks ---------------------------------------------------------------


@dataclass(frozen=True, eq=False)
class Decided:
    """One chunk of customers of one campaign, decided and ready to be logged.

    ``features`` holds each row's canonical feature JSON (what the log stores and the
    decision id hashes); ``arm`` is the arm each decision's ``uplift`` refers to: the
    chosen arm (also when held out), or the arm with the best expected value when no
    contact was chosen.
    """

    bound: BoundCampaign
    ids: list[str]
    values: FloatArray
    estimates: Estimates
    batch: DecisionBatch
    input_reasons: list[list[str]]
    features: list[str]

    def __len__(self) -> int:
        return len(self.ids)

    @property
    def arm(self) -> npt.NDArray[np.intp]:
        batch = self.batch
        best = np.argmax(batch.ev_per_arm, axis=1) + 1
        return np.where(batch.chosen > 0, batch.chosen, best).astype(np.intp)

    def reasons(self) -> list[list[str]]:
        """Reason codes of each decision: the policy's, then the input flags."""
        pairs = zip(self.batch.reasons, self.input_reasons, strict=True)
        return [a + b if b else a for a, b in pairs]


@dataclass(frozen=True, eq=False)
class Ranking:
    """A ranked list over all chunks: the global cut and the list's id context."""

    result: RankResult
    context: str


def resolve_values(
    bound: BoundCampaign, values: Sequence[Any] | None, n: int, *, first_row: int = 0
) -> FloatArray:
    """Per-customer conversion values (None: the campaign's), refusing bad ones by row."""
    default = bound.campaign.value
    if values is None:
        return np.full(n, default)
    if len(values) != n:
        raise DataError(f"{len(values)} values for {n} customers; send one per customer.")
    out = np.empty(n)
    problems = []
    for i, v in enumerate(values):
        if v is None:
            out[i] = default
        elif type(v) in (int, float) and np.isfinite(v) and v > 0:
            out[i] = v
        else:
            problems.append(
                {"row": first_row + i, "feature": "value", "problem": f"must be a finite "
                 f"number > 0, got {v!r}; send null to use the campaign's value ({default})"}
            )  # fmt: skip
    if problems:
        raise InvalidFeatures(problems)
    return out


def decide_chunk(
    bound: BoundCampaign,
    ids: Sequence[str],
    table: FeatureTable,
    values: Sequence[Any] | FloatArray | None,
    *,
    first_row: int = 0,
    threads: int | None = None,
) -> Decided:
    """Estimate and decide one chunk of validated customers (vectorised).

    ``values`` may be raw per-customer values (checked; problems name the row counted
    from ``first_row``) or an array from :func:`resolve_values`. ``threads`` caps the
    model's scoring threads (default: as many as pay off).
    """
    n = len(ids)
    if n != len(table):
        raise DataError(f"{n} ids for {len(table)} feature rows; send one id per row.")
    if isinstance(values, np.ndarray):
        value_array = np.asarray(values, dtype=float)
    else:
        value_array = resolve_values(bound, values, n, first_row=first_row)
    campaign = bound.campaign
    if n:
        level = two_sided_level(campaign.confidence)
        est = bound.model.estimate(table, level, threads=threads).take(bound.arm_columns)
    else:
        empty = np.empty((0, len(bound.arm_columns)))
        est = Estimates(empty, np.empty(0), empty, empty)
    ids = list(ids)
    draws = uniform_draws(campaign.salt, campaign.id, ids)
    if campaign.is_pilot:  # no model: the action is drawn at the pilot shares
        batch = pilot_decide(campaign.shares(), campaign.opted_out(ids), draws[1])
    else:
        batch = decide(
            est.tau, est.low, est.high, est.mu0, value_array, campaign.costs,
            campaign.opted_out(ids), draws,
            exploration=campaign.exploration, holdout=campaign.holdout,
            margin=campaign.dnc_margin,
        )  # fmt: skip
    return Decided(bound, ids, value_array, est, batch, table.reasons,
                   feature_json(table.columns, n))  # fmt: skip


def rank_chunks(
    bound: BoundCampaign,
    ids: Sequence[str],
    batches: Sequence[DecisionBatch],
    *,
    capacity: int | None,
    budget: float | None,
) -> Ranking:
    """Rank the decided chunks together and cut the list at capacity and/or budget.

    ``ids`` are all candidates in chunk order; ``batches`` the chunks' decisions in the
    same order. Without either limit the campaign's default capacity applies. The
    decision ids of a ranked list also depend on the list request (candidates, limits),
    since the cut decides who is contacted; a retried identical request gets the same ids.
    """
    refuse_duplicates(ids)
    if capacity is None and budget is None:
        capacity = bound.campaign.capacity
        if capacity is None:
            raise DataError(
                f"No limit for the list: the request gives neither capacity nor budget and "
                f"campaign {bound.campaign.id!r} sets no default capacity, so every candidate "
                "would be listed. Send capacity and/or budget, or set capacity in the "
                "campaign file."
            )
    batch = _concatenate(batches, bound)
    result = rank(batch, ids, capacity=capacity, budget=budget, costs=bound.campaign.costs)
    return Ranking(result, _rank_context(ids, capacity, budget))


def emit_columns(
    decided: Decided, ranking: Ranking | None = None, offset: int = 0
) -> DecisionColumns:
    """The chunk's decisions in column form, with their ids, ready for the log.

    With a :class:`Ranking`, the rows ``offset .. offset + len(decided)`` of its result
    give the final actions and their probabilities given the cut (mode ``rank``).
    """
    bound, batch = decided.bound, decided.batch
    campaign = bound.campaign
    n = len(decided)
    if ranking is None:
        action, probs, held, mode, context = (
            batch.action, batch.action_probs, batch.holdout, "score", "score"
        )  # fmt: skip
    else:
        part = slice(offset, offset + n)
        result = ranking.result
        if result.action[part].shape != (n,):
            raise DataError(
                f"Rows {offset}..{offset + n} are outside the ranked list of "
                f"{len(result.action)} candidates; pass the chunk's own offset."
            )
        action, probs, held = result.action[part], result.action_probs[part], result.holdout[part]
        mode, context = "rank", ranking.context
    ev = np.where(action > 0, batch.ev_per_arm[np.arange(n), np.maximum(action - 1, 0)], 0.0)
    model = (bound.bundle.name, bound.bundle.version)
    est = decided.estimates
    return DecisionColumns(
        campaign=campaign.id, model_name=model[0], model_version=model[1],
        policy_hash=campaign.hash, arms=tuple(bound.labels[1:]), mode=mode,
        created_at=utc_now(),
        decision_id=decision_ids(campaign.id, decided.ids, campaign.hash, model,
                                 decided.features, decided.values, context),
        customer_id=decided.ids, features=decided.features, value=decided.values,
        tau=est.tau, low=est.low, high=est.high, mu0=est.mu0,
        action=np.asarray(action, dtype=np.intp), expected_value=ev,
        explored=batch.explored, holdout=np.asarray(held, dtype=bool),
        do_not_contact=batch.do_not_contact, action_probs=probs,
    )  # fmt: skip


def refuse_duplicates(ids: Sequence[str]) -> None:
    """Refuse a candidate list that names a customer twice."""
    if len(set(ids)) != len(ids):
        seen: set[str] = set()
        repeated = sorted({i for i in ids if i in seen or seen.add(i)})  # type: ignore[func-returns-value]
        raise DataError(
            f"Candidate id(s) {repeated[:10]} appear more than once; send each customer once."
        )


def _rank_context(ids: Sequence[str], capacity: int | None, budget: float | None) -> str:
    digest = hashlib.blake2b(orjson.dumps([sorted(ids), capacity, budget]), digest_size=16)
    return "rank:" + digest.hexdigest()


def _concatenate(batches: Sequence[DecisionBatch], bound: BoundCampaign) -> DecisionBatch:
    """One batch of the chunks' arrays (without the per-row reason lists, unused by rank)."""
    if not batches:
        k = len(bound.arm_columns)
        empty = np.empty((0, k))
        batches = [
            decide(
                empty,
                empty,
                empty,
                np.empty(0),
                1.0,
                bound.campaign.costs,
                np.zeros(0, dtype=bool),
                (np.empty(0), np.empty(0), np.empty(0)),
                exploration=0.0,
                holdout=0.0,
                margin=0.0,
            )  # fmt: skip
        ]
    if len(batches) == 1:
        return batches[0]
    first = batches[0]
    joined: dict[str, Any] = {}
    for f in fields(DecisionBatch):
        value = getattr(first, f.name)
        if f.name == "reasons":
            joined[f.name] = []
        elif isinstance(value, np.ndarray):
            joined[f.name] = np.concatenate([getattr(b, f.name) for b in batches])
        else:
            joined[f.name] = value
    return DecisionBatch(**joined)
