"""The policy decision for one customer, in plain Python floats.

:func:`service.policy.decide` is vectorised: for a single customer its few dozen NumPy
calls on 1-element arrays cost more than the rest of a request. This module applies the
same rules to one customer with scalar arithmetic, in the same order of operations, and
returns the same :class:`~service.policy.DecisionBatch` (one row). The test suite
checks it against :func:`service.policy.decide` on random inputs, field by field, to the
last bit.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np

from service.policy import REASONS, DecisionBatch, Draws
from service.policy.decide import decide

__all__ = ["decide_row"]

_ORDER = tuple(REASONS)


def decide_row(
    tau: Sequence[float],
    low: Sequence[float],
    high: Sequence[float],
    mu0: float,
    value: float,
    costs: Sequence[float],
    opted_out: bool,
    draws: Draws,
    *,
    exploration: float,
    holdout: float,
    margin: float,
) -> DecisionBatch:
    """One customer's decision under the rules of :func:`service.policy.decide`.

    Inputs the vectorised checks would refuse (non-finite numbers, bad rates, shapes)
    are handed to :func:`~service.policy.decide` itself, so errors are the same too.
    """
    k = len(tau)
    numbers = (*tau, *low, *high, mu0, value, *costs, *(float(d[0]) for d in draws))
    if (
        k == 0
        or not len(low) == len(high) == len(costs) == k
        or not all(math.isfinite(x) for x in numbers)
        or not (0.0 <= exploration < 1.0 and 0.0 <= holdout < 1.0 and margin >= 0.0)
    ):
        return decide(
            np.array([tau], dtype=float), np.array([low], dtype=float),
            np.array([high], dtype=float), np.array([mu0]), value,
            np.asarray(costs, dtype=float), np.array([opted_out]), draws,
            exploration=exploration, holdout=holdout, margin=margin,
        )  # fmt: skip
    u_explore, u_arm, u_hold = (float(d[0]) for d in draws)
    ev = [value * t - c for t, c in zip(tau, costs, strict=True)]
    dnc = [h < -margin for h in high]
    allowed = [not d and not opted_out for d in dnc]
    greedy = _greedy(ev, allowed)
    options = [True, *allowed]
    m = sum(options)
    explored = u_explore < exploration and m > 1
    chosen = _pick(options, m, u_arm) if explored else greedy
    withheld = chosen > 0 and u_hold < holdout
    action = 0 if withheld else chosen
    choice = [exploration * o / m for o in options]
    choice[greedy] += 1.0 - exploration
    final = [choice[0] + holdout * sum(choice[1:])] + [p * (1.0 - holdout) for p in choice[1:]]
    dnc_all, dnc_any = all(dnc), any(dnc)
    considered = not opted_out and not dnc_all
    flags = (
        opted_out,
        dnc_all,
        dnc_any and not dnc_all,
        considered and greedy == 0,
        considered and greedy > 0,
        explored,
        withheld,
    )
    return DecisionBatch(
        action=np.array([action], dtype=np.intp),
        expected_value=np.array([0.0 if action == 0 else ev[action - 1]]),
        ev_per_arm=np.array([ev]),
        dnc_per_arm=np.array([dnc], dtype=bool),
        do_not_contact=np.array([dnc_all]),
        explored=np.array([explored]),
        holdout=np.array([withheld]),
        propensity=np.array([final[action]]),
        action_probs=np.array([final]),
        reasons=[[name for name, flag in zip(_ORDER, flags, strict=True) if flag]],
        greedy=np.array([greedy], dtype=np.intp),
        chosen=np.array([chosen], dtype=np.intp),
        choice_probs=np.array([choice]),
        allowed=np.array([allowed], dtype=bool),
        opted_out=np.array([opted_out]),
        outcome_none=np.array([mu0]),
        outcome_chosen=np.array([mu0 + (0.0 if chosen == 0 else tau[chosen - 1])]),
        exploration=float(exploration),
        holdout_rate=float(holdout),
    )


def _greedy(ev: list[float], allowed: list[bool]) -> int:
    """The first allowed arm with the largest EV (1-based) if that EV is positive, else 0."""
    best, best_ev = 0, -math.inf
    for j, (e, ok) in enumerate(zip(ev, allowed, strict=True)):
        if ok and e > best_ev:
            best, best_ev = j + 1, e
    return best if best_ev > 0 else 0


def _pick(options: list[bool], m: int, u_arm: float) -> int:
    """The option at place ``floor(u_arm * m)`` among the options, in action order."""
    slot = min(int(u_arm * m), m - 1)
    seen = -1
    for action, ok in enumerate(options):
        seen += ok
        if ok and seen == slot:
            return action
    raise AssertionError("slot is always below the number of options")
