"""Response bodies (JSON-ready dicts) built from decided customers.

Row form mirrors :class:`service.api.schemas.Decision`; column form returns one list
per field, with NumPy arrays that orjson writes directly.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from service.scoring.engine import Decided

__all__ = ["decision_columns", "decision_rows", "ranked_list"]


def _reasons(decided: Decided, i: int) -> list[str]:
    return decided.batch.reasons[i] + decided.input_reasons[i]


def decision_rows(decided: Decided) -> list[dict[str, Any]]:
    """One JSON-ready decision per customer, in request order."""
    bound, batch, est = decided.bound, decided.batch, decided.estimates
    campaign = bound.campaign
    labels = campaign.action_labels()
    costs = campaign.costs.tolist()
    model = bound.model_ref
    rows = np.arange(len(decided))
    k = decided.arm - 1
    outcome_arms = (est.mu0[:, None] + est.tau).tolist()
    per = zip(
        decided.decision_ids, decided.ids, batch.action.tolist(), decided.arm.tolist(),
        est.tau[rows, k].tolist(), est.low[rows, k].tolist(), est.high[rows, k].tolist(),
        est.mu0.tolist(), (est.mu0 + est.tau[rows, k]).tolist(), batch.expected_value.tolist(),
        batch.do_not_contact.tolist(), batch.explored.tolist(), batch.holdout.tolist(),
        batch.propensity.tolist(), est.tau.tolist(), est.low.tolist(), est.high.tolist(),
        batch.ev_per_arm.tolist(), batch.dnc_per_arm.tolist(), outcome_arms, strict=True,
    )  # fmt: skip
    out = []
    for i, (d_id, cid, a, arm, u, lo, hi, mu0, with_arm, ev, dnc, x, h, p, taus, lows, highs,
            evs, dncs, outs) in enumerate(per):  # fmt: skip
        out.append(
            {
                "decision_id": d_id,
                "customer_id": cid,
                "campaign": campaign.id,
                "model": model,
                "policy_hash": campaign.hash,
                "action": labels[a],
                "arm": labels[arm],
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
                "reasons": _reasons(decided, i),
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


def decision_columns(decided: Decided) -> dict[str, Any]:
    """Decisions as columns (one list per field), for column-form batches."""
    bound, batch, est = decided.bound, decided.batch, decided.estimates
    campaign = bound.campaign
    labels = np.array(campaign.action_labels(), dtype=object)
    rows = np.arange(len(decided))
    k = decided.arm - 1
    columns = {
        "decision_id": decided.decision_ids,
        "customer_id": decided.ids,
        "action": labels[batch.action].tolist(),
        "arm": labels[decided.arm].tolist(),
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
        "reasons": [_reasons(decided, i) for i in range(len(decided))],
    }
    arms = {
        str(labels[j + 1]): {
            "uplift": np.ascontiguousarray(est.tau[:, j]),
            "uplift_low": np.ascontiguousarray(est.low[:, j]),
            "uplift_high": np.ascontiguousarray(est.high[:, j]),
            "expected_value": np.ascontiguousarray(batch.ev_per_arm[:, j]),
            "do_not_contact": np.ascontiguousarray(batch.dnc_per_arm[:, j]),
        }
        for j in range(len(labels) - 1)
    }
    return {
        "campaign": campaign.id,
        "model": bound.model_ref,
        "policy_hash": campaign.hash,
        "confidence": campaign.confidence,
        "count": len(decided),
        "columns": {k: _contiguous(v) for k, v in columns.items()},
        "arms": arms,
    }


def ranked_list(decided: Decided) -> dict[str, Any]:
    """The ordered contact list and the excluded candidates, JSON-ready."""
    ranked = decided.ranked
    assert ranked is not None, "ranked_list needs the result of rank_many"
    bound, batch, est = decided.bound, decided.batch, decided.estimates
    campaign = bound.campaign
    labels = campaign.action_labels()
    costs = campaign.costs
    contacts = []
    for place, i in enumerate(ranked.order.tolist(), start=1):
        a = int(ranked.arm[i])
        contacts.append(
            {
                "rank": place,
                "customer_id": decided.ids[i],
                "decision_id": decided.decision_ids[i],
                "arm": labels[a],
                "contact": not bool(ranked.holdout[i]),
                "expected_value": float(ranked.expected_value[i]),
                "uplift": float(est.tau[i, a - 1]),
                "cost": float(costs[a - 1]),
                "propensity": float(ranked.propensity[i]),
                "explored": bool(batch.explored[i]),
                "holdout": bool(ranked.holdout[i]),
            }  # fmt: skip
        )
    excluded = [
        {"customer_id": decided.ids[i], "decision_id": decided.decision_ids[i], "reason": r}
        for i, r in zip(ranked.excluded.tolist(), ranked.excluded_reason, strict=True)
    ]
    listed_ev = ranked.expected_value[ranked.order][~ranked.holdout[ranked.order]]
    return {
        "campaign": campaign.id,
        "model": bound.model_ref,
        "policy_hash": campaign.hash,
        "capacity": ranked.capacity,
        "budget": ranked.budget,
        "contacts": contacts,
        "excluded": excluded,
        "totals": {
            "candidates": len(decided),
            "contacts": int((ranked.listed & ~ranked.holdout).sum()),
            "held_out": int(ranked.holdout.sum()),
            "excluded": len(excluded),
            "expected_value": float(listed_ev.sum()),
            "cost": ranked.spend,
        },
    }


def _contiguous(value: Any) -> Any:
    return np.ascontiguousarray(value) if isinstance(value, np.ndarray) else value
