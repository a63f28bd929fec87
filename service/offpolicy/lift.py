"""Realized lift: what a running policy delivered, measured against its randomized control.

Two comparisons, both resting only on the randomization the policy logged:

* **Targeted**: among the customers the policy chose to contact, the holdout withheld a
  random share. Contacted minus held-out outcome rate is an unbiased estimate of the
  effect of the contacts actually made (Wald interval for a 0/1 outcome, Welch-type for
  amounts), scaled to incremental conversions and to profit after contact cost.
* **Policy vs no one**: over every decision, the observed mean outcome minus the IPS
  estimate of the mean outcome had no one been contacted. The no-contact rows of the
  holdout and of exploration both enter, each weighted by its exact logged probability.

Beside them, IPS/SNIPS (and DR, given a reward model) estimates of the simple
alternatives "contact no one" and "contact everyone through arm k".
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import numpy.typing as npt

from service.errors import DataError
from service.offpolicy.estimators import Estimate, critical_value, mean_with_interval
from service.offpolicy.evaluate import OffPolicyEvaluation, evaluate_policy
from service.offpolicy.weights import one_hot

__all__ = [
    "Alternative",
    "RealizedLift",
    "TargetedLift",
    "realized_lift",
    "two_sample_difference",
]

FloatArray = npt.NDArray[np.float64]
BoolArray = npt.NDArray[np.bool_]


@dataclass(frozen=True)
class TargetedLift:
    """Contacted vs randomized holdout among the customers the policy chose to contact.

    ``difference`` is per contacted customer; ``incremental_outcome`` is that times the
    number contacted (conversions for a 0/1 outcome); ``incremental_profit`` is the
    value-weighted difference times the number contacted minus what the contacts cost.
    """

    n_contacted: int
    n_holdout: int
    contacted_mean: float
    holdout_mean: float
    difference: Estimate
    incremental_outcome: Estimate
    incremental_profit: Estimate
    contact_cost: float


@dataclass(frozen=True)
class Alternative:
    """A simple comparison policy evaluated on the log: outcome and net value per decision."""

    name: str
    outcome: OffPolicyEvaluation
    net_value: OffPolicyEvaluation


@dataclass(frozen=True)
class RealizedLift:
    """The realized lift of a logged policy; see the module docstring for the estimands.

    ``policy_outcome`` and ``policy_net_value`` are the observed means per decision
    (outcome, and value * outcome - contact cost); ``lift`` and ``profit_lift`` compare
    them with contacting no one, per decision, and ``incremental_outcome`` /
    ``incremental_profit`` are the totals over the ``n`` decisions.
    """

    n: int
    outcome_type: str
    confidence: float
    targeted: TargetedLift | None
    policy_outcome: Estimate
    policy_net_value: Estimate
    lift: Estimate
    profit_lift: Estimate
    incremental_outcome: Estimate
    incremental_profit: Estimate
    alternatives: dict[str, Alternative]
    best_arm: str | None
    warnings: list[str] = field(default_factory=list)


def realized_lift(
    outcome: npt.ArrayLike,
    action: npt.ArrayLike,
    action_probs: npt.ArrayLike,
    holdout: npt.ArrayLike,
    *,
    value: npt.ArrayLike,
    costs: npt.ArrayLike,
    labels: Sequence[str],
    reward_model: npt.ArrayLike | None = None,
    confidence: float = 0.95,
) -> RealizedLift:
    """Measure what a logged policy delivered against its randomized control.

    Parameters
    ----------
    outcome : (n,) observed outcome of each decision (0/1 or an amount).
    action : (n,) action taken, 0 for no contact and k for arm k.
    action_probs : (n, 1 + K) logged law of the action (the log's ``action_probs``).
    holdout : (n,) the policy chose a contact and the holdout withheld it.
    value : (n,) or scalar value of one unit of outcome (1 for money outcomes).
    costs : (K,) contact cost per arm.
    labels : ``["none", arm_1, ..., arm_K]``, to name the alternatives.
    reward_model : (n, 1 + K), optional predicted outcome under each action (the logging
        model's ``mu0`` and ``mu0 + tau``), which adds DR estimates of the alternatives.
    confidence : level of every two-sided interval.

    References
    ----------
    Horvitz & Thompson (1952), JASA 47(260) (inverse-probability weighting); Radcliffe,
    N. J. (2007), Using control groups to target on predicted lift, Direct Marketing
    Analytics Journal 1, 14-21 (measuring lift against a randomized control group).
    """
    y, a, probs, held, v, c = _check(outcome, action, action_probs, holdout, value, costs, labels)
    n = len(y)
    binary = bool(np.isin(y, (0.0, 1.0)).all())
    cost_paid = np.concatenate([[0.0], c])[a]
    net = v * y - cost_paid
    p_none = probs[:, 0]
    notes: list[str] = []
    if (p_none <= 0).any():
        notes.append(
            f"{int((p_none <= 0).sum())} of {n} decisions could not have been 'none' "
            "(neither holdout nor exploration was on for them), so the no-contact "
            "comparison misses them; keep a holdout or exploration rate above 0."
        )
    control = np.where(a == 0, 1.0 / np.where(p_none > 0, p_none, 1.0), 0.0)
    lift = mean_with_interval(y - control * y, "ips_lift", confidence)
    profit = mean_with_interval(net - control * v * y, "ips_profit_lift", confidence)
    alternatives = _alternatives(y, net, a, probs, v, c, labels, reward_model, confidence)
    for alt in alternatives.values():
        notes.extend(f"{alt.name}: {w}" for w in alt.outcome.warnings)
    best = max(labels[1:], key=lambda arm: alternatives[arm].net_value.ips.value)
    return RealizedLift(
        n=n,
        outcome_type="binary" if binary else "continuous",
        confidence=confidence,
        targeted=_targeted(y, a, held, v, cost_paid, binary, confidence, notes),
        policy_outcome=mean_with_interval(y, "observed", confidence),
        policy_net_value=mean_with_interval(net, "observed", confidence),
        lift=lift,
        profit_lift=profit,
        incremental_outcome=_scaled(lift, n, 0.0),
        incremental_profit=_scaled(profit, n, 0.0),
        alternatives=alternatives,
        best_arm=best,
        warnings=notes,
    )


def _alternatives(
    y: FloatArray,
    net: FloatArray,
    a: npt.NDArray[np.intp],
    probs: FloatArray,
    v: FloatArray,
    c: FloatArray,
    labels: Sequence[str],
    reward_model: npt.ArrayLike | None,
    confidence: float,
) -> dict[str, Alternative]:
    n, k = probs.shape
    q_outcome = q_net = None
    if reward_model is not None:
        q_outcome = np.asarray(reward_model, dtype=np.float64)
        q_net = v[:, None] * q_outcome - np.concatenate([[0.0], c])[None, :]
    out = {}
    for j, label in enumerate(labels):
        target = one_hot(np.full(n, j), k)
        common: dict[str, Any] = {"confidence": confidence, "warn": False}
        out[label] = Alternative(
            name="contact no one" if j == 0 else f"contact everyone by {label}",
            outcome=evaluate_policy(target, a, probs, y, reward_model=q_outcome, **common),
            net_value=evaluate_policy(target, a, probs, net, reward_model=q_net, **common),
        )
    return out


def _targeted(
    y: FloatArray,
    a: npt.NDArray[np.intp],
    held: BoolArray,
    v: FloatArray,
    cost_paid: FloatArray,
    binary: bool,
    confidence: float,
    notes: list[str],
) -> TargetedLift | None:
    contacted = a > 0
    n1, n0 = int(contacted.sum()), int(held.sum())
    if n1 < 2 or n0 < 2:
        notes.append(
            f"The targeted comparison needs at least 2 contacted and 2 held-out decisions "
            f"with outcomes; there are {n1} and {n0}. Set a holdout rate (e.g. 0.10) and "
            "wait for more outcomes."
        )
        return None
    diff = two_sample_difference(y[contacted], y[held], binary=binary, confidence=confidence)
    if binary and _constant(v):
        # A 0/1 outcome times one value: the same Wald interval, scaled.
        valued = _scaled(diff, float(v[0]), 0.0)
    else:
        valued = two_sample_difference(
            (v * y)[contacted], (v * y)[held], binary=False, confidence=confidence
        )
    spent = float(cost_paid[contacted].sum())
    return TargetedLift(
        n_contacted=n1,
        n_holdout=n0,
        contacted_mean=float(y[contacted].mean()),
        holdout_mean=float(y[held].mean()),
        difference=diff,
        incremental_outcome=_scaled(diff, n1, 0.0),
        incremental_profit=_scaled(valued, n1, spent),
        contact_cost=spent,
    )


def _constant(values: FloatArray) -> bool:
    return bool(len(values)) and bool(np.all(values == values[0]))


def two_sample_difference(
    treated: FloatArray, control: FloatArray, *, binary: bool, confidence: float = 0.95
) -> Estimate:
    """Difference of two independent means with a normal interval.

    For 0/1 outcomes the Wald interval of a difference of proportions (plug-in variance
    ``p (1 - p) / n`` per group); otherwise the unequal-variance (Welch-type) z interval
    with sample variances (ddof = 1).

    References
    ----------
    Agresti, A. (2013). *Categorical Data Analysis*, 3rd ed., Wiley, sec. 3.1.3 (Wald
    interval for a difference of proportions).
    """
    ddof = 0 if binary else 1
    m1, m0 = float(treated.mean()), float(control.mean())
    var = float(treated.var(ddof=ddof)) / len(treated) + float(control.var(ddof=ddof)) / len(
        control
    )
    se = math.sqrt(var)
    half = critical_value(confidence) * se
    diff = m1 - m0
    method = "wald_difference" if binary else "welch_difference"
    return Estimate(
        method, diff, diff - half, diff + half, se, confidence, len(treated) + len(control)
    )


def _scaled(estimate: Estimate, factor: float, minus: float) -> Estimate:
    """``factor * estimate - minus`` with its interval (factor >= 0)."""
    return Estimate(
        estimate.method,
        factor * estimate.value - minus,
        factor * estimate.low - minus,
        factor * estimate.high - minus,
        factor * estimate.std_error,
        estimate.confidence,
        estimate.n,
    )


def _check(
    outcome: npt.ArrayLike,
    action: npt.ArrayLike,
    action_probs: npt.ArrayLike,
    holdout: npt.ArrayLike,
    value: npt.ArrayLike,
    costs: npt.ArrayLike,
    labels: Sequence[str],
) -> tuple[FloatArray, npt.NDArray[np.intp], FloatArray, BoolArray, FloatArray, FloatArray]:
    y = np.asarray(outcome, dtype=np.float64)
    n = len(y)
    if y.ndim != 1 or n < 2 or not np.isfinite(y).all():
        raise DataError(
            f"outcome must hold at least 2 finite numbers, one per decision; got {n}. Post "
            "outcomes for more decisions first."
        )
    probs = np.asarray(action_probs, dtype=np.float64)
    if probs.ndim != 2 or probs.shape[0] != n or probs.shape[1] != len(labels):
        raise DataError(
            f"action_probs has shape {probs.shape}; it must be ({n}, {len(labels)}) for the "
            f"actions {list(labels)}."
        )
    a = np.asarray(action)
    if a.shape != (n,) or not np.issubdtype(a.dtype, np.integer):
        raise DataError(f"action must hold {n} integer action indices.")
    held = np.asarray(holdout, dtype=bool)
    if held.shape != (n,) or (held & (a != 0)).any():
        raise DataError("holdout must be one flag per decision, and a held-out row has action 0.")
    c = np.asarray(costs, dtype=np.float64)
    if c.shape != (len(labels) - 1,):
        raise DataError(f"costs must hold one cost per arm ({len(labels) - 1}); got {c.shape}.")
    v = np.broadcast_to(np.asarray(value, dtype=np.float64), (n,)).astype(np.float64)
    return y, a.astype(np.intp), probs, held, v, c
