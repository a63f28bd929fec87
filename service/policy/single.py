"""The decision for one customer in plain Python: the low-latency path of ``decide``.

NumPy costs a few microseconds per call on tiny arrays, which adds up to hundreds for a
whole decision; a CRM asking about one customer should not pay that. ``decide_one``
follows :func:`decide` step by step, and a test checks that both agree on every field.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

from service.errors import DataError
from service.policy.decide import DecisionBatch, check_rates, reason_list

__all__ = ["Decision", "decide_one", "decision_row"]


@dataclass(frozen=True, slots=True)
class Decision:
    """One customer's decision; fields as in :class:`DecisionBatch`, per customer.

    Tuples indexed by action (``action_probs``: 0 = no contact, then the arms) or by arm
    (``ev_per_arm``, ``dnc_per_arm``).
    """

    action: int
    expected_value: float
    ev_per_arm: tuple[float, ...]
    dnc_per_arm: tuple[bool, ...]
    do_not_contact: bool
    explored: bool
    holdout: bool
    propensity: float
    action_probs: tuple[float, ...]
    reasons: list[str]
    greedy: int
    chosen: int
    opted_out: bool
    outcome_none: float
    outcome_chosen: float


def decide_one(
    tau: Sequence[float],
    high: Sequence[float],
    mu0: float,
    value: float,
    costs: Sequence[float],
    opted_out: bool,
    draws: tuple[float, float, float],
    *,
    exploration: float,
    holdout: float,
    margin: float,
) -> Decision:
    """:func:`decide` for a single customer (same law, same draws, same result).

    ``tau``, ``high`` and ``costs`` hold one number per arm; ``draws`` is
    ``uniform_draw(salt, campaign, customer_id)``. The lower bound plays no part in a
    decision and is not taken.

    References
    ----------
    Sutton & Barto (2018), *Reinforcement Learning: An Introduction*, 2nd ed., sec. 2.2
    (epsilon-greedy).
    """
    check_rates(exploration, holdout, margin)
    k = len(tau)
    numbers = [*tau, *high, mu0, value, *costs, *draws]
    if k < 1 or len(high) != k or len(costs) != k or len(draws) != 3:
        raise DataError(
            f"tau, high and costs need one entry per arm; got {k}, {len(high)}, "
            f"{len(costs)} (and draws must hold 3 uniforms)."
        )
    if not all(math.isfinite(x) for x in numbers):
        raise DataError(
            "decide_one got a NaN or infinite number; only finite numbers are allowed."
        )
    if value <= 0:
        raise DataError(f"value={value!r} must be > 0 (the value of a conversion).")
    ev = tuple(value * t - c for t, c in zip(tau, costs, strict=True))
    dnc = tuple(h < -margin for h in high)
    options = [0] if opted_out else [0, *(a + 1 for a in range(k) if not dnc[a])]
    greedy, best = 0, -math.inf
    for action in options[1:]:
        if ev[action - 1] > best:  # strict: ties keep the first arm, as argmax does
            greedy, best = action, ev[action - 1]
    if best <= 0:
        greedy = 0
    m = len(options)
    explored = draws[0] < exploration and m > 1
    chosen = options[min(int(draws[1] * m), m - 1)] if explored else greedy
    withheld = chosen > 0 and draws[2] < holdout
    final = 0 if withheld else chosen
    choice = [0.0] * (k + 1)
    for action in options:
        choice[action] = exploration / m
    choice[greedy] += 1.0 - exploration
    probs = (choice[0] + holdout * sum(choice[1:]), *((1.0 - holdout) * p for p in choice[1:]))
    dnc_all, dnc_any = all(dnc), any(dnc)
    considered = not opted_out and not dnc_all
    reasons = reason_list(
        opted_out,
        dnc_all,
        dnc_any and not dnc_all,
        considered and greedy == 0,
        considered and greedy > 0,
        explored,
        withheld,
    )
    return Decision(
        action=final,
        expected_value=ev[final - 1] if final else 0.0,
        ev_per_arm=ev,
        dnc_per_arm=dnc,
        do_not_contact=dnc_all,
        explored=explored,
        holdout=withheld,
        propensity=probs[final],
        action_probs=probs,
        reasons=reasons,
        greedy=greedy,
        chosen=chosen,
        opted_out=bool(opted_out),
        outcome_none=float(mu0),
        outcome_chosen=mu0 + tau[chosen - 1] if chosen else float(mu0),
    )


def decision_row(batch: DecisionBatch, i: int) -> Decision:
    """Row ``i`` of a decided batch as a :class:`Decision` of Python scalars."""
    return Decision(
        action=int(batch.action[i]),
        expected_value=float(batch.expected_value[i]),
        ev_per_arm=tuple(batch.ev_per_arm[i].tolist()),
        dnc_per_arm=tuple(batch.dnc_per_arm[i].tolist()),
        do_not_contact=bool(batch.do_not_contact[i]),
        explored=bool(batch.explored[i]),
        holdout=bool(batch.holdout[i]),
        propensity=float(batch.propensity[i]),
        action_probs=tuple(batch.action_probs[i].tolist()),
        reasons=list(batch.reasons[i]),
        greedy=int(batch.greedy[i]),
        chosen=int(batch.chosen[i]),
        opted_out=bool(batch.opted_out[i]),
        outcome_none=float(batch.outcome_none[i]),
        outcome_chosen=float(batch.outcome_chosen[i]),
    )
