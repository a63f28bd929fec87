"""One decision per customer: expected value, do-not-contact, exploration, holdout."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

from service.errors import DataError, PolicyError
from service.policy.draws import Draws
from service.policy.exploration import choice_probabilities, explore_pick, final_probabilities
from service.policy.value import do_not_contact_flags, expected_values, greedy_actions

__all__ = ["REASONS", "DecisionBatch", "decide"]

FloatArray = npt.NDArray[np.float64]
BoolArray = npt.NDArray[np.bool_]
IntArray = npt.NDArray[np.intp]

REASONS = {
    "opted_out": "on the campaign's opt-out list; never contacted",
    "do_not_contact": "every arm's uplift upper bound is below -margin (contact expected to hurt)",
    "partial_do_not_contact": "some arms are flagged do-not-contact and were not considered",
    "no_positive_value": "no allowed arm has a positive expected value",
    "best_ev": "the arm with the largest positive expected value",
    "explored": "the action was drawn at random among the options (exploration)",
    "holdout": "the chosen contact was withheld at random as control (holdout)",
    "pilot": "a randomized pilot (no model yet): the action was drawn at the pilot shares",
}
"""Short reason codes a decision may carry, with their meaning."""

# Bit per reason, in the order codes are listed on a decision ("pilot" is set only by
# service.policy.pilot).
_ORDER = tuple(REASONS)[:-1]


@dataclass(frozen=True)
class DecisionBatch:
    """Decisions for n customers over K arms; action 0 is no contact, k is arm k.

    Attributes
    ----------
    action : (n,) final action after exploration and holdout.
    expected_value : (n,) EV of the final action (0 for no contact).
    ev_per_arm, dnc_per_arm : (n, K) EV of each arm; do-not-contact flag of each arm.
    do_not_contact : (n,) every arm is flagged.
    explored : (n,) the exploration draw fired and the customer had more than one option.
    holdout : (n,) a chosen contact was withheld.
    propensity : (n,) exact probability of the final action, ``action_probs[i, action[i]]``.
    action_probs : (n, 1 + K) law of the final action given the customer's estimates.
    reasons : short codes per customer (see :data:`REASONS`).
    greedy : (n,) action before exploration and holdout.
    chosen : (n,) action before holdout (the greedy or the explored one).
    choice_probs : (n, 1 + K) law of ``chosen``.
    allowed : (n, K) arm may be contacted (not opted out, not flagged).
    opted_out : (n,) customer is on the opt-out list.
    outcome_none, outcome_chosen : (n,) predicted outcome without contact (mu0) and with
        the chosen action (mu0 + tau of the chosen arm; mu0 when no contact is chosen).
    exploration, holdout_rate : the rates the batch was decided with.
    """

    action: IntArray
    expected_value: FloatArray
    ev_per_arm: FloatArray
    dnc_per_arm: BoolArray
    do_not_contact: BoolArray
    explored: BoolArray
    holdout: BoolArray
    propensity: FloatArray
    action_probs: FloatArray
    reasons: list[list[str]]
    greedy: IntArray
    chosen: IntArray
    choice_probs: FloatArray
    allowed: BoolArray
    opted_out: BoolArray
    outcome_none: FloatArray
    outcome_chosen: FloatArray
    exploration: float
    holdout_rate: float

    def __len__(self) -> int:
        return len(self.action)

    @property
    def n_arms(self) -> int:
        """Number of arms K."""
        return int(self.ev_per_arm.shape[1])


def decide(
    tau: FloatArray,
    low: FloatArray,
    high: FloatArray,
    mu0: FloatArray,
    values: FloatArray | float,
    costs: FloatArray,
    opted_out: BoolArray,
    draws: Draws | tuple[FloatArray, FloatArray, FloatArray],
    *,
    exploration: float,
    holdout: float,
    margin: float,
) -> DecisionBatch:
    """Decide for every customer at once, exactly as the campaign policy states.

    1. ``EV_a = value * tau_a - cost_a``; arm a is flagged do-not-contact when
       ``high_a < -margin``; the customer is flagged when every arm is.
    2. Allowed arms: not flagged, and none at all for an opted-out customer.
    3. Greedy action: the allowed arm with the largest EV if that EV is positive, else
       no contact.
    4. Exploration: when ``draws.explore < exploration`` the action is instead drawn
       uniformly (by ``draws.arm``) among no contact and the allowed arms.
    5. Holdout: a chosen contact is withheld (final action: no contact) when
       ``draws.holdout < holdout``.

    ``propensity`` is the exact probability of the final action under this law, given
    the customer's estimates: the draws are the only randomness, and they are uniform
    and independent per purpose. ``low`` is accepted for symmetry with the interval the
    model returns but does not enter the decision.

    Parameters
    ----------
    tau, low, high : (n, K) uplift per arm and its interval (the upper end should be a
        one-sided bound at the campaign's confidence, see ``two_sided_level``).
    mu0 : (n,) predicted outcome without contact.
    values : (n,) or scalar value of a conversion.
    costs : (K,) contact cost per arm.
    opted_out : (n,) customer is on the opt-out list.
    draws : uniforms from :func:`uniform_draws` (explore, arm, holdout).
    exploration, holdout, margin : the campaign's rates and do-not-contact margin.

    References
    ----------
    Sutton & Barto (2018), *Reinforcement Learning: An Introduction*, 2nd ed., sec. 2.2
    (epsilon-greedy); Horvitz & Thompson (1952), JASA 47(260) (why the exact probability
    of the action taken is logged: inverse-probability weighting needs it).
    """
    check_rates(exploration, holdout, margin)
    tau, high, mu0, values_arr, costs, opted_out, u = _check_arrays(
        tau, low, high, mu0, values, costs, opted_out, draws
    )
    n = len(tau)
    ev = expected_values(tau, values_arr, costs)
    dnc = do_not_contact_flags(high, margin)
    allowed = ~dnc & ~opted_out[:, None]
    greedy = greedy_actions(ev, allowed)
    options = 1 + allowed.sum(axis=1)
    explored = (u[0] < exploration) & (options > 1)
    chosen = np.where(explored, explore_pick(allowed, u[1]), greedy).astype(np.intp)
    withheld = (chosen > 0) & (u[2] < holdout)
    action = np.where(withheld, 0, chosen).astype(np.intp)
    choice = choice_probabilities(greedy, allowed, exploration)
    probs = final_probabilities(choice, holdout)
    rows = np.arange(n)
    ev_with_none = np.column_stack([np.zeros(n), ev])
    tau_with_none = np.column_stack([np.zeros(n), tau])
    do_not_contact: BoolArray = np.all(dnc, axis=1)
    dnc_any: BoolArray = np.any(dnc, axis=1)
    return DecisionBatch(
        action=action,
        expected_value=ev_with_none[rows, action],
        ev_per_arm=ev,
        dnc_per_arm=dnc,
        do_not_contact=do_not_contact,
        explored=explored,
        holdout=withheld,
        propensity=probs[rows, action],
        action_probs=probs,
        reasons=_reasons(opted_out, do_not_contact, dnc_any, greedy, explored, withheld),
        greedy=greedy,
        chosen=chosen,
        choice_probs=choice,
        allowed=allowed,
        opted_out=opted_out,
        outcome_none=mu0,
        outcome_chosen=mu0 + tau_with_none[rows, chosen],
        exploration=float(exploration),
        holdout_rate=float(holdout),
    )


def _reasons(
    opted_out: BoolArray,
    dnc_all: BoolArray,
    dnc_any: BoolArray,
    greedy: IntArray,
    explored: BoolArray,
    withheld: BoolArray,
) -> list[list[str]]:
    considered = ~opted_out & ~dnc_all
    flags = (
        opted_out,
        dnc_all,
        dnc_any & ~dnc_all,
        considered & (greedy == 0),
        considered & (greedy > 0),
        explored,
        withheld,
    )
    codes = np.zeros(len(greedy), dtype=np.int64)
    for bit, flag in enumerate(flags):
        codes |= flag.astype(np.int64) << bit
    table = {
        int(code): reason_list(*(bool(code >> bit & 1) for bit in range(len(_ORDER))))
        for code in np.unique(codes)
    }
    return [list(table[code]) for code in codes.tolist()]


def reason_list(
    opted_out: bool,
    dnc_all: bool,
    dnc_partial: bool,
    no_value: bool,
    best_ev: bool,
    explored: bool,
    withheld: bool,
) -> list[str]:
    """Reason codes of one decision from its flags, in the order of :data:`REASONS`."""
    flags = (opted_out, dnc_all, dnc_partial, no_value, best_ev, explored, withheld)
    return [name for name, flag in zip(_ORDER, flags, strict=True) if flag]


def check_rates(exploration: float, holdout: float, margin: float) -> None:
    """Raise PolicyError unless both rates lie in [0, 1) and the margin is finite, >= 0."""
    for name, rate in (("exploration", exploration), ("holdout", holdout)):
        if not (math.isfinite(rate) and 0.0 <= rate < 1.0):
            raise PolicyError(f"{name}={rate!r} must lie in [0, 1); fix the campaign policy.")
    if not (math.isfinite(margin) and margin >= 0.0):
        raise PolicyError(f"margin={margin!r} must be a finite number >= 0.")


def _check_arrays(
    tau: FloatArray,
    low: FloatArray,
    high: FloatArray,
    mu0: FloatArray,
    values: FloatArray | float,
    costs: FloatArray,
    opted_out: BoolArray,
    draws: Draws | tuple[FloatArray, FloatArray, FloatArray],
) -> tuple[
    FloatArray, FloatArray, FloatArray, FloatArray, FloatArray, BoolArray, list[FloatArray]
]:
    tau = _finite("tau", tau, 2)
    n, k = tau.shape
    if k < 1:
        raise DataError("tau has no arm column; pass an (n, K) array with K >= 1.")
    for name, band in (("low", low), ("high", high)):
        if np.shape(band) != (n, k):
            raise DataError(f"{name} has shape {np.shape(band)}; it must match tau, {(n, k)}.")
    high = _finite("high", high, 2)
    _finite("low", low, 2)
    mu0 = _finite("mu0", mu0, 1, n)
    value_arr = np.broadcast_to(np.asarray(values, dtype=np.float64), (n,))
    value_arr = _finite("values", value_arr, 1, n)
    if (value_arr <= 0).any():
        raise DataError("values must be > 0 (the value of a conversion); fix the request.")
    costs = _finite("costs", costs, 1, k)
    flags = np.asarray(opted_out)
    if flags.shape != (n,) or flags.dtype != np.bool_:
        raise DataError(f"opted_out must be a boolean array of shape ({n},).")
    uniforms = [_finite(f"draws[{j}]", np.asarray(d), 1, n) for j, d in enumerate(draws)]
    if len(uniforms) != 3:
        raise DataError("draws must hold three arrays (explore, arm, holdout).")
    return tau, high, mu0, value_arr, costs, flags, uniforms


def _finite(name: str, values: object, ndim: int, length: int | None = None) -> FloatArray:
    array = np.asarray(values, dtype=np.float64)
    if array.ndim != ndim or (length is not None and array.shape[0] != length):
        expected = f"({length},)" if ndim == 1 else "(n, K)"
        raise DataError(f"{name} has shape {array.shape}; it must have shape {expected}.")
    if not np.isfinite(array).all():
        raise DataError(f"{name} holds NaN or infinite values; only finite numbers are allowed.")
    return array
