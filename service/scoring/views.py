"""Response bodies (JSON-ready) built from decided chunks and their logged columns.

Row form mirrors :class:`service.api.schemas.Decision`. Column form keeps one array per
field: :func:`column_part` takes what a chunk contributes, :func:`column_body` joins the
parts, and orjson writes NumPy arrays directly. A ranked list is built from the global
:class:`~service.scoring.engine.Ranking` and each row's decision id.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np
import numpy.typing as npt

from service.decisions import DecisionColumns
from service.scoring.catalog import BoundCampaign
from service.scoring.engine import Decided, Ranking

__all__ = ["column_body", "column_part", "decision_rows", "ranked_list"]

_PER_ARM = ("uplift", "uplift_low", "uplift_high", "expected_value", "do_not_contact")


def decision_rows(decided: Decided, logged: DecisionColumns) -> list[dict[str, Any]]:
    """One JSON-ready decision per customer of the chunk, in request order."""
    bound, batch, est = decided.bound, decided.batch, decided.estimates
    campaign = bound.campaign
    labels = campaign.action_labels()
    costs = campaign.costs.tolist()
    model = bound.model_ref
    rows = np.arange(len(decided))
    arm = decided.arm
    k = arm - 1
    outcome_arms = (est.mu0[:, None] + est.tau).tolist()
    per = zip(
        logged.decision_id, decided.ids, batch.action.tolist(), arm.tolist(),
        est.tau[rows, k].tolist(), est.low[rows, k].tolist(), est.high[rows, k].tolist(),
        est.mu0.tolist(), (est.mu0 + est.tau[rows, k]).tolist(), batch.expected_value.tolist(),
        batch.do_not_contact.tolist(), batch.explored.tolist(), batch.holdout.tolist(),
        batch.propensity.tolist(), decided.reasons(), est.tau.tolist(), est.low.tolist(),
        est.high.tolist(), batch.ev_per_arm.tolist(), batch.dnc_per_arm.tolist(), outcome_arms,
        strict=True,
    )  # fmt: skip
    out = []
    for (d_id, cid, a, arm_i, u, lo, hi, mu0, with_arm, ev, dnc, x, h, p, reasons, taus, lows,
         highs, evs, dncs, outs) in per:  # fmt: skip
        out.append(
            {
                "decision_id": d_id,
                "customer_id": cid,
                "campaign": campaign.id,
                "model": model,
                "policy_hash": campaign.hash,
                "action": labels[a],
                "arm": labels[arm_i],
                "uplift": u,
                "uplift_low": lo,
                "uplift_high": hi,
                "confidence": campaign.confidence,
                "outcome_without_contact": mu0,
                "outcome_with_arm": with_arm,
                "expected_value": ev,
                "do_not_contact": dnc,
                "explored": x,
                "holdout": h,
                "propensity": p,
                "reasons": reasons,
                "arms": [
                    {
                        "arm": labels[j + 1],
                        "cost": costs[j],
                        "uplift": taus[j],
                        "uplift_low": lows[j],
                        "uplift_high": highs[j],
                        "outcome": outs[j],
                        "expected_value": evs[j],
                        "do_not_contact": dncs[j],
                    }  # fmt: skip
                    for j in range(len(costs))
                ],
            }  # fmt: skip
        )
    return out


def column_part(decided: Decided, logged: DecisionColumns) -> dict[str, Any]:
    """What one chunk contributes to a column-form answer (arrays and lists per field)."""
    batch, est = decided.batch, decided.estimates
    labels = np.array(decided.bound.campaign.action_labels(), dtype=object)
    rows = np.arange(len(decided))
    arm = decided.arm
    k = arm - 1
    part: dict[str, Any] = {
        "decision_id": list(logged.decision_id),
        "customer_id": decided.ids,
        "action": labels[batch.action].tolist(),
        "arm": labels[arm].tolist(),
        "uplift": est.tau[rows, k],
        "uplift_low": est.low[rows, k],
        "uplift_high": est.high[rows, k],
        "outcome_without_contact": est.mu0,
        "outcome_with_arm": est.mu0 + est.tau[rows, k],
        "expected_value": batch.expected_value,
        "do_not_contact": batch.do_not_contact,
        "explored": batch.explored,
        "holdout": batch.holdout,
        "propensity": batch.propensity,
        "reasons": decided.reasons(),
    }
    per_arm = (est.tau, est.low, est.high, batch.ev_per_arm, batch.dnc_per_arm)
    for j, label in enumerate(labels[1:].tolist()):
        for name, values in zip(_PER_ARM, per_arm, strict=True):
            part[f"{label}\0{name}"] = values[:, j]
    return part


def column_body(bound: BoundCampaign, parts: Sequence[dict[str, Any]]) -> dict[str, Any]:
    """The column-form answer from the parts of every chunk (at least one), in order."""
    campaign = bound.campaign
    joined = {name: _join([p[name] for p in parts]) for name in parts[0]}
    columns = {name: value for name, value in joined.items() if "\0" not in name}
    arms: dict[str, dict[str, Any]] = {}
    for label in campaign.action_labels()[1:]:
        arms[label] = {
            name: joined.get(f"{label}\0{name}", np.empty(0)) for name in _PER_ARM
        }  # fmt: skip
    count = len(columns.get("customer_id", ()))
    return {
        "campaign": campaign.id,
        "model": bound.model_ref,
        "policy_hash": campaign.hash,
        "confidence": campaign.confidence,
        "count": count,
        "columns": columns,
        "arms": arms,
    }


def ranked_list(
    bound: BoundCampaign,
    ranking: Ranking,
    ids: Sequence[str],
    decision_ids: Sequence[str],
    uplift: npt.NDArray[np.float64],
) -> dict[str, Any]:
    """The ordered contact list and the excluded candidates, JSON-ready.

    ``uplift`` holds, per candidate, the uplift of the arm the list names (any value
    for rows not listed).
    """
    ranked = ranking.result
    campaign = bound.campaign
    labels = campaign.action_labels()
    costs = campaign.costs
    order = ranked.order
    arm = ranked.arm[order]
    held = ranked.holdout[order]
    per = zip(
        range(1, len(order) + 1), [ids[i] for i in order.tolist()],
        [decision_ids[i] for i in order.tolist()], arm.tolist(), (~held).tolist(),
        ranked.expected_value[order].tolist(), uplift[order].tolist(),
        costs[arm - 1].tolist(), ranked.propensity[order].tolist(),
        ranked.explored[order].tolist(), held.tolist(), strict=True,
    )  # fmt: skip
    contacts = [
        {
            "rank": place,
            "customer_id": cid,
            "decision_id": d_id,
            "arm": labels[a],
            "contact": contact,
            "expected_value": ev,
            "uplift": u,
            "cost": c,
            "propensity": p,
            "explored": x,
            "holdout": h,
        }  # fmt: skip
        for place, cid, d_id, a, contact, ev, u, c, p, x, h in per
    ]
    excluded = [
        {"customer_id": ids[i], "decision_id": decision_ids[i], "reason": r}
        for i, r in zip(ranked.excluded.tolist(), ranked.excluded_reason, strict=True)
    ]
    listed_ev = ranked.expected_value[order][~held]
    return {
        "campaign": campaign.id,
        "model": bound.model_ref,
        "policy_hash": campaign.hash,
        "capacity": ranked.capacity,
        "budget": ranked.budget,
        "contacts": contacts,
        "excluded": excluded,
        "totals": {
            "candidates": len(ids),
            "contacts": int((ranked.listed & ~ranked.holdout).sum()),
            "held_out": int(ranked.holdout.sum()),
            "excluded": len(excluded),
            "expected_value": float(listed_ev.sum()),
            "cost": ranked.spend,
        },
    }


def _join(values: list[Any]) -> Any:
    if isinstance(values[0], np.ndarray):
        return np.ascontiguousarray(np.concatenate(values))
    return [v for part in values for v in part]
