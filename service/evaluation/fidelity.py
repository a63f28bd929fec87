"""How faithfully a served form reproduces the full model's numbers and decisions.

Both forms are scored on the same rows; the comparison covers what the decision policy
reads: the ranking (normalised Qini of each form's uplift), the greedy action under the
given value and costs with do-not-contact arms excluded, and the customer's
do-not-contact flag, at several one-sided confidence levels. As in the policy
(``service.policy``), an arm is flagged when the upper bound of its uplift is below
``-margin`` and the customer when every arm is; an arm flagged by one form only changes
the greedy action when it was the best arm, so it counts in the action agreement, and
the share of (row, arm) flags that agree is recorded beside it.
Every figure compares the two forms with each other; none is an estimate of quality.
"""

from __future__ import annotations

from collections.abc import Hashable, Sequence
from dataclasses import asdict, dataclass
from typing import Any

import numpy as np
from scipy.stats import norm

from service.evaluation.areas import qini_coefficient
from service.policy.value import (
    do_not_contact_flags,
    expected_values,
    greedy_actions,
    two_sided_level,
)

__all__ = ["FidelityThresholds", "FormEstimates", "form_fidelity", "interval_coverage"]

# One-sided do-not-contact levels checked (the campaign default is 0.90).
CONFIDENCES = (0.80, 0.90, 0.95)


@dataclass(frozen=True)
class FidelityThresholds:
    """The least a served form must achieve against the full form.

    The defaults are the project's targets (issue 8), not a published standard.
    """

    qini_difference: float = 0.01
    action_agreement: float = 0.98
    dnc_agreement: float = 0.99

    def to_dict(self) -> dict[str, float]:
        return asdict(self)


@dataclass(frozen=True)
class FormEstimates:
    """Uplift per arm, shape (n, n_arms), and the standard deviation of its interval."""

    tau: np.ndarray
    sd: np.ndarray

    def high(self, confidence: float) -> np.ndarray:
        """One-sided upper bound at ``confidence`` (the policy's do-not-contact bound)."""
        level = two_sided_level(confidence)
        return np.asarray(self.tau + norm.ppf(0.5 + level / 2) * self.sd)


def form_fidelity(
    full: FormEstimates,
    served: FormEstimates,
    *,
    y: np.ndarray,
    treatment: np.ndarray,
    arms: Sequence[Hashable],
    control: Hashable,
    value: float,
    costs: np.ndarray,
    sample_weight: np.ndarray | None = None,
    margin: float = 0.0,
    thresholds: FidelityThresholds | None = None,
) -> dict[str, Any]:
    """Compare ``served`` with ``full`` on the same rows; return a JSON-ready record.

    ``passed`` is true when, for every arm, the normalised Qini differs by at most
    ``thresholds.qini_difference`` and, at every level in :data:`CONFIDENCES`, the
    greedy actions and the customers' do-not-contact flags agree on at least the
    threshold shares of rows. ``failures`` names what fell short.
    """
    limits = thresholds or FidelityThresholds()
    qini = {}
    for j, arm in enumerate(arms):
        pair = [
            qini_coefficient(
                y, treatment, est.tau[:, j], sample_weight=sample_weight, control=control, arm=arm
            )
            for est in (full, served)
        ]
        qini[str(arm)] = {"full": pair[0], "served": pair[1], "difference": pair[1] - pair[0]}
    levels = []
    ev_full = expected_values(full.tau, value, costs)
    ev_served = expected_values(served.tau, value, costs)
    for confidence in CONFIDENCES:
        flags_full = do_not_contact_flags(full.high(confidence), margin)
        flags_served = do_not_contact_flags(served.high(confidence), margin)
        actions_full = greedy_actions(ev_full, ~flags_full)
        actions_served = greedy_actions(ev_served, ~flags_served)
        levels.append(
            {
                "confidence": confidence,
                "action_agreement": float(np.mean(actions_full == actions_served)),
                "dnc_agreement": float(
                    np.mean(flags_full.all(axis=1) == flags_served.all(axis=1))
                ),
                "arm_flag_agreement": float(np.mean(flags_full == flags_served)),
                "dnc_share_full": float(np.mean(flags_full.all(axis=1))),
                "dnc_share_served": float(np.mean(flags_served.all(axis=1))),
            }
        )
    ratio = served.sd / np.where(full.sd > 0, full.sd, np.nan)
    failures = _failures(qini, levels, limits)
    return {
        "rows": len(y),
        "margin": margin,
        "value": value,
        "costs": [float(c) for c in costs],
        "thresholds": limits.to_dict(),
        "qini": qini,
        "levels": levels,
        "point_max_abs_difference": float(np.max(np.abs(served.tau - full.tau), initial=0.0)),
        "sd_ratio_quantiles": {
            q: float(np.nanquantile(ratio, float(q))) if np.isfinite(ratio).any() else None
            for q in ("0.05", "0.5", "0.95")
        },
        "passed": not failures,
        "failures": failures,
    }


def _failures(
    qini: dict[str, dict[str, float]], levels: list[dict[str, float]], limits: FidelityThresholds
) -> list[str]:
    out = []
    for arm, q in qini.items():
        if not abs(q["difference"]) <= limits.qini_difference:
            out.append(
                f"arm {arm}: normalised Qini differs by {q['difference']:+.4f} "
                f"(limit {limits.qini_difference})"
            )
    for level in levels:
        for key, limit in (
            ("action_agreement", limits.action_agreement),
            ("dnc_agreement", limits.dnc_agreement),
        ):
            if not level[key] >= limit:
                out.append(
                    f"{key.replace('_', ' ')} {level[key]:.2%} at confidence "
                    f"{level['confidence']} (at least {limit:.0%} required)"
                )
    return out


def interval_coverage(
    true_tau: np.ndarray, tau: np.ndarray, sd: np.ndarray, confidence: float = 0.95
) -> float:
    """Share of (row, arm) cells whose two-sided normal interval holds the true uplift."""
    half = norm.ppf(0.5 + confidence / 2) * sd
    return float(np.mean(np.abs(np.asarray(true_tau) - tau) <= half))
