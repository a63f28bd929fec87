"""Output rows of a scored file, as Arrow tables with a fixed schema.

Scoring: the fields of the column-form API answer (:func:`service.scoring.column_part`),
one row per customer in input order, with the per-arm fields as ``<arm>_<field>`` and
the batch-wide fields (campaign, model, policy hash, confidence) repeated on every row.
Ranked lists: the fields of a ``/v1/rank`` contact, the listed candidates in rank order,
then the excluded ones in input order with ``rank`` empty and their ``reason``.
"""

from __future__ import annotations

from collections.abc import Iterator, Sequence
from typing import Any

import numpy as np
import numpy.typing as npt
import pyarrow as pa

from service.decisions import DecisionColumns
from service.scoring import BoundCampaign, Decided, Ranking, column_part

__all__ = ["ranked_schema", "ranked_tables", "score_schema", "score_table"]

_TEXT, _REAL, _FLAG = pa.string(), pa.float64(), pa.bool_()
_REASONS = pa.list_(pa.string())
_COLUMNS = (
    ("decision_id", _TEXT), ("customer_id", _TEXT), ("action", _TEXT), ("arm", _TEXT),
    ("uplift", _REAL), ("uplift_low", _REAL), ("uplift_high", _REAL),
    ("outcome_without_contact", _REAL), ("outcome_with_arm", _REAL),
    ("expected_value", _REAL), ("do_not_contact", _FLAG), ("explored", _FLAG),
    ("holdout", _FLAG), ("propensity", _REAL), ("reasons", _REASONS),
)  # fmt: skip
_PER_ARM = (
    ("uplift", _REAL), ("uplift_low", _REAL), ("uplift_high", _REAL),
    ("expected_value", _REAL), ("do_not_contact", _FLAG),
)  # fmt: skip
_BATCH = (("campaign", _TEXT), ("model_name", _TEXT), ("model_version", _TEXT),
          ("policy_hash", _TEXT), ("confidence", _REAL))  # fmt: skip
_RANKED = (
    ("rank", pa.int64()), ("customer_id", _TEXT), ("decision_id", _TEXT), ("arm", _TEXT),
    ("contact", _FLAG), ("expected_value", _REAL), ("uplift", _REAL), ("cost", _REAL),
    ("propensity", _REAL), ("explored", _FLAG), ("holdout", _FLAG), ("reason", _TEXT),
)  # fmt: skip


def score_schema(bound: BoundCampaign) -> pa.Schema:
    """Columns of a scored file for this campaign's arms."""
    arms = bound.campaign.action_labels()[1:]
    per_arm = [(f"{arm}_{name}", kind) for arm in arms for name, kind in _PER_ARM]
    return pa.schema([*_COLUMNS, *per_arm, *_BATCH])


def score_table(decided: Decided, logged: DecisionColumns) -> pa.Table:
    """A chunk's decisions as output rows (the column-form answer's fields)."""
    part = column_part(decided, logged)
    bound = decided.bound
    n = len(decided)
    data: dict[str, Any] = {name: part[name] for name, _ in _COLUMNS}
    for arm in bound.campaign.action_labels()[1:]:
        for name, _ in _PER_ARM:
            data[f"{arm}_{name}"] = part[f"{arm}\0{name}"]
    campaign = bound.campaign
    batch = (campaign.id, bound.bundle.name, bound.bundle.version, campaign.hash,
             campaign.confidence)  # fmt: skip
    for (name, _), value in zip(_BATCH, batch, strict=True):
        data[name] = [value] * n
    return pa.table(data, schema=score_schema(bound))


def ranked_schema(bound: BoundCampaign) -> pa.Schema:
    """Columns of a ranked-list file."""
    return pa.schema([*_RANKED, *_BATCH])


def ranked_tables(
    bound: BoundCampaign,
    ranking: Ranking,
    ids: Sequence[str],
    decision_ids: Sequence[str],
    uplift: npt.NDArray[np.float64],
    rows: int,
) -> Iterator[pa.Table]:
    """The ranked list's rows, ``rows`` at a time: listed in rank order, then excluded."""
    ranked = ranking.result
    campaign = bound.campaign
    labels = np.array(campaign.action_labels(), dtype=object)
    costs = np.concatenate([[np.nan], campaign.costs])
    order = np.concatenate([ranked.order, ranked.excluded]).astype(np.intp)
    m = len(ranked.order)
    reason = np.array([None] * len(ids), dtype=object)
    reason[ranked.excluded] = np.array(ranked.excluded_reason, dtype=object)
    schema = ranked_schema(bound)
    batch = (campaign.id, bound.bundle.name, bound.bundle.version, campaign.hash,
             campaign.confidence)  # fmt: skip
    for start in range(0, len(order), rows):
        rows_ = order[start : start + rows]
        listed = np.arange(start, start + len(rows_)) < m
        arm = ranked.arm[rows_]
        data: dict[str, Any] = {
            "rank": pa.array(np.arange(start + 1, start + len(rows_) + 1), mask=~listed),
            "customer_id": [ids[i] for i in rows_.tolist()],
            "decision_id": [decision_ids[i] for i in rows_.tolist()],
            "arm": pa.array(labels[arm].tolist(), _TEXT, mask=~listed),
            "contact": pa.array(~ranked.holdout[rows_], mask=~listed),
            "expected_value": pa.array(ranked.expected_value[rows_], mask=~listed),
            "uplift": pa.array(uplift[rows_], mask=~listed),
            "cost": pa.array(costs[arm], mask=~listed),
            "propensity": pa.array(ranked.propensity[rows_], mask=~listed),
            "explored": pa.array(ranked.explored[rows_], mask=~listed),
            "holdout": pa.array(ranked.holdout[rows_], mask=~listed),
            "reason": reason[rows_].tolist(),
        }
        for (name, _), value in zip(_BATCH, batch, strict=True):
            data[name] = [value] * len(rows_)
        yield pa.table(data, schema=schema)
