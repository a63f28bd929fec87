"""Randomized pilots: a campaign with no model draws every action at fixed shares.

Every team starts without randomized data. A pilot campaign (no ``model`` key) assigns
each customer no contact or one of the arms by the same deterministic hash draw as
exploration, at the campaign's ``pilot_shares`` (default equal), so a retried request
gets the same action and the logged propensity is the exact share of the action taken.
Opted-out customers are never contacted. The log of a pilot trains the first model
directly (``upshot export``): every propensity is known and bounded away from zero.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import numpy.typing as npt

from service.errors import DataError
from service.policy.decide import DecisionBatch
from service.policy.single import Decision

__all__ = ["PILOT_MODEL", "PILOT_REASON", "pilot_decide", "pilot_decide_one", "pilot_draw"]

FloatArray = npt.NDArray[np.float64]
BoolArray = npt.NDArray[np.bool_]

PILOT_MODEL = ("pilot", "none")
"""Model name and version logged with a pilot decision (there is no model)."""

PILOT_REASON = "pilot"
"""Reason code of a pilot decision: the action was drawn at the pilot shares."""


def _check(shares: Sequence[float]) -> FloatArray:
    p = np.asarray(shares, dtype=np.float64)
    if p.ndim != 1 or len(p) < 2 or not np.isfinite(p).all() or (p <= 0).any():
        raise DataError(f"pilot shares {list(shares)} must be >= 2 positive numbers.")
    if abs(p.sum() - 1.0) > 1e-9:
        raise DataError(f"pilot shares {list(shares)} must sum to 1.")
    return p


def pilot_draw(shares: Sequence[float], u: float) -> int:
    """The action drawn by the uniform ``u`` at ``shares``: inverse of the cumulative law."""
    total = 0.0
    for action, share in enumerate(shares):
        total += share
        if u < total:
            return action
    return len(shares) - 1  # rounding: u just below 1 and the shares sum to 1 - 1e-16


def pilot_decide(
    shares: Sequence[float], opted_out: BoolArray, u_arm: FloatArray
) -> DecisionBatch:
    """Pilot decisions for n customers (see the module docstring).

    ``shares`` holds one share per action (no contact, then the arms) and sums to 1;
    ``u_arm`` the customers' uniform draws (the ``arm`` purpose of
    :func:`~service.policy.uniform_draws`). Opted-out customers get no contact with
    probability 1. No model means no estimates: the per-arm expected values, outcomes
    and uplift are 0 placeholders, flags are off, and every decision carries the reason
    ``pilot`` (or ``opted_out``).
    """
    p = _check(shares)
    flags = np.asarray(opted_out, dtype=bool)
    u = np.asarray(u_arm, dtype=np.float64)
    n, k = len(flags), len(p) - 1
    if u.shape != (n,):
        raise DataError(f"u_arm has shape {u.shape}; it must have shape ({n},).")
    cumulative = np.cumsum(p)
    drawn = np.minimum(np.searchsorted(cumulative, u, side="right"), k).astype(np.intp)
    action = np.where(flags, 0, drawn).astype(np.intp)
    probs = np.where(flags[:, None], np.eye(k + 1)[0], p[None, :])
    rows = np.arange(n)
    zeros_k, zeros = np.zeros((n, k)), np.zeros(n)
    return DecisionBatch(
        action=action,
        expected_value=zeros.copy(),
        ev_per_arm=zeros_k,
        dnc_per_arm=np.zeros((n, k), dtype=bool),
        do_not_contact=np.zeros(n, dtype=bool),
        explored=~flags,
        holdout=np.zeros(n, dtype=bool),
        propensity=probs[rows, action],
        action_probs=probs,
        reasons=[["opted_out"] if f else [PILOT_REASON] for f in flags.tolist()],
        greedy=np.zeros(n, dtype=np.intp),
        chosen=action.copy(),
        choice_probs=probs.copy(),
        allowed=np.repeat(~flags[:, None], k, axis=1),
        opted_out=flags,
        outcome_none=zeros.copy(),
        outcome_chosen=zeros.copy(),
        exploration=1.0,
        holdout_rate=0.0,
    )


def pilot_decide_one(shares: Sequence[float], opted_out: bool, u_arm: float) -> Decision:
    """One customer's pilot decision, in plain Python (the single-score path)."""
    k = len(shares) - 1
    probs = (1.0, *([0.0] * k)) if opted_out else tuple(float(s) for s in shares)
    action = 0 if opted_out else pilot_draw(shares, u_arm)
    return Decision(
        action=action,
        expected_value=0.0,
        ev_per_arm=(0.0,) * k,
        dnc_per_arm=(False,) * k,
        do_not_contact=False,
        explored=not opted_out,
        holdout=False,
        propensity=probs[action],
        action_probs=probs,
        reasons=["opted_out"] if opted_out else [PILOT_REASON],
        greedy=0,
        chosen=action,
        opted_out=opted_out,
        outcome_none=0.0,
        outcome_chosen=0.0,
    )
